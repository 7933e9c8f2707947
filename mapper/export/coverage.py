"""A float raster inside a GeoPackage: a 2D gridded coverage (OGC 17-066r1) with its unit.

GDAL's GPKG raster driver writes a Float32 dataset as a ``2d-gridded-coverage`` table with TIFF
tiles, and fills ``gpkg_2d_gridded_coverage_ancillary`` (unit of measure, field name, quantity
definition, nodata) and ``gpkg_contents`` (identifier, description) from the options given.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import rasterio
from rasterio.transform import Affine

#: Nodata of a coverage: the most negative float32. A GeoPackage stores NaN as NULL, so a finite
#: value keeps nodata readable; no field a meter shows comes near it.
COVERAGE_NODATA = float(np.finfo(np.float32).min)


@dataclass(frozen=True)
class Coverage:
    """One single-band float coverage to store.

    Attributes
    ----------
    table : str
        Raster table name.
    values : ndarray, shape (rows, cols)
        Values in ``unit``; NaN where there is none. Row 0 is north.
    transform : affine.Affine
        North-up pixel corner -> CRS transform.
    identifier : str
        Short human name (``gpkg_contents.identifier``).
    description : str
        What the values are (``gpkg_contents.description``).
    field_name : str
        Name of the quantity (ancillary ``field_name``).
    quantity : str
        Quantity definition (ancillary ``quantity_definition``).
    unit : str
        Unit of measure, e.g. ``V/m``.
    """

    table: str
    values: np.ndarray
    transform: Affine
    identifier: str
    description: str
    field_name: str
    quantity: str
    unit: str = "V/m"


def write_coverage(path: str | Path, cov: Coverage, crs_wkt: str) -> None:
    """Add a coverage to an existing GeoPackage (its vector layers stay).

    Parameters
    ----------
    path : str or Path
        GeoPackage being written (a temporary file of :func:`~mapper.atomic_file.atomic_path`).
    cov : Coverage
        The raster and its descriptions.
    crs_wkt : str
        CRS of the raster.
    """
    if cov.transform.b != 0 or cov.transform.d != 0:
        raise ValueError("a GeoPackage raster must be north-up (no rotation terms)")
    data = np.where(np.isfinite(cov.values), cov.values, COVERAGE_NODATA).astype(np.float32)
    with rasterio.open(
        path, "w", driver="GPKG", width=data.shape[1], height=data.shape[0], count=1, dtype="float32",
        crs=crs_wkt, transform=cov.transform, nodata=COVERAGE_NODATA,
        RASTER_TABLE=cov.table, RASTER_IDENTIFIER=cov.identifier, RASTER_DESCRIPTION=cov.description,
        APPEND_SUBDATASET="YES", TILE_FORMAT="TIFF", UOM=cov.unit, FIELD_NAME=cov.field_name,
        QUANTITY_DEFINITION=cov.quantity, GRID_CELL_ENCODING="grid-value-is-area",
    ) as ds:
        ds.write(data, 1)
    # GDAL leaves ``data_null`` empty for a float coverage written in one go; the ancillary row is
    # where readers look for nodata (OGC 17-066r1, table 2), so set it.
    conn = sqlite3.connect(path)
    try:
        with conn:
            conn.execute("UPDATE gpkg_2d_gridded_coverage_ancillary SET data_null = ? WHERE tile_matrix_set_name = ?",
                         (COVERAGE_NODATA, cov.table))
    finally:
        conn.close()


__all__ = ["COVERAGE_NODATA", "Coverage", "write_coverage"]
