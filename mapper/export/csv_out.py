"""The corrected readings as a CSV file (the readings layer's columns plus export coordinates)."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pandas as pd

from mapper.atomic_file import atomic_path
from mapper.errors import MapperError
from mapper.export.layers import READING_COLUMNS, reading_records
from mapper.workflow import Products

#: Columns of the CSV, in order: export CRS coordinates first.
CSV_COLUMNS = ("x_export", "y_export", "crs", *READING_COLUMNS)


def _cell(value: object) -> object:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    if isinstance(value, pd.Timestamp):
        return value.isoformat()
    if isinstance(value, float):
        return repr(value)
    return value


def write_readings_csv(products: Products, path: str | Path) -> Path:
    """Write the corrected field readings as CSV (UTF-8, comma separated, header row).

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products`.
    path : str or Path
        Target file; replaced if it exists.

    Returns
    -------
    Path
    """
    path = Path(path)
    if not path.parent.exists():
        raise MapperError("folder does not exist", where=str(path.parent))
    records = reading_records(products)
    xs, ys = products.crs.points([r["x_site_m"] for r in records], [r["y_site_m"] for r in records])
    # Written beside the target and renamed into place when complete (mapper.atomic_file): a
    # killed export never leaves a short CSV that ends on a complete row and looks valid.
    with atomic_path(path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(CSV_COLUMNS)
        for rec, x, y in zip(records, xs.tolist(), ys.tolist(), strict=True):
            writer.writerow([_cell(v) for v in (x, y, products.crs.name, *(rec[c] for c in READING_COLUMNS))])
    return path


__all__ = ["CSV_COLUMNS", "write_readings_csv"]
