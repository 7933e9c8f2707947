"""The corrected readings as a CSV file (the readings layer's columns plus export coordinates)."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pandas as pd

from mapper.atomic_file import atomic_path, output_path
from mapper.export.layers import READING_COLUMNS, ReadingTable, reading_table
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


#: Types the csv module writes as :func:`_cell` would (``str`` of a float is its ``repr``; ``None``
#: is written empty), NaN apart.
_PLAIN = {str, int, bool, float, type(None)}


def _utc_texts(stamps: pd.DatetimeIndex) -> list:
    """What :func:`_cell` makes of each time (:meth:`pandas.Timestamp.isoformat`, empty for ``NaT``)
    for a whole column of UTC microsecond times at once."""
    if stamps.isna().all():
        return [""] * len(stamps)
    if str(stamps.dtype) != "datetime64[us, UTC]":
        return [_cell(None if t is pd.NaT else t) for t in stamps]
    naive = stamps.tz_localize(None).values.astype("datetime64[us]")
    whole = np.datetime_as_string(naive, unit="s")
    fraction = np.datetime_as_string(naive, unit="us")
    text = np.where(stamps.microsecond == 0, whole, fraction).astype(object) + "+00:00"
    text[stamps.isna()] = ""
    return text.tolist()


def _column(values) -> list:
    """One column's cells: the values themselves when :func:`_cell` would leave them as they are."""
    if isinstance(values, pd.DatetimeIndex):
        return _utc_texts(values)
    types = set(map(type, values))
    if types <= _PLAIN:
        if float not in types:
            return values
        floats = np.array([v for v in values if type(v) is float])
        if not np.isnan(floats).any():
            return values
    return [_cell(v) for v in values]


def write_readings_csv(products: Products, path: str | Path, table: ReadingTable | None = None) -> Path:
    """Write the corrected field readings as CSV (UTF-8, comma separated, header row).

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products`.
    path : str or Path
        Target file; replaced if it exists.
    table : ReadingTable, optional
        The readings' attributes when already made (:func:`~mapper.export.layers.reading_table`).

    Returns
    -------
    Path
    """
    path = output_path(path)
    table = reading_table(products) if table is None else table
    xs, ys = products.crs.points(table.columns["x_site_m"], table.columns["y_site_m"])
    crs_name = products.crs.name
    columns = [_column(table.columns[c]) for c in READING_COLUMNS]
    # Written beside the target and renamed into place when complete (mapper.atomic_file): a
    # killed export never leaves a short CSV that ends on a complete row and looks valid.
    with atomic_path(path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(CSV_COLUMNS)
        writer.writerows(zip(_column(xs.tolist()), _column(ys.tolist()), [crs_name] * len(table), *columns,
                             strict=True))
    return path


__all__ = ["CSV_COLUMNS", "write_readings_csv"]
