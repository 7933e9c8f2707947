"""The field model as a GeoTIFF: band 1 the estimate, band 2 its standard deviation, in V/m.

Cells outside the site are nodata (NaN). The geotransform maps pixel corners to the export CRS
through the site's similarity transform, so a rotated georeference gives an affine with rotation
terms; a local site is written in the engineering CRS in site metres.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import rasterio
from rasterio.transform import Affine

from mapper.atomic_file import atomic_path
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS
from mapper.field.model import FieldGrid

#: Band names, in order.
BAND_NAMES = ("estimate_v_per_m", "std_v_per_m")


def grid_transform(grid: FieldGrid, ecrs: ExportCRS) -> Affine:
    """Affine from (column, row) pixel corners to export CRS coordinates.

    Row 0 is the northern-most (largest site y) row of the grid, as GeoTIFF readers expect.
    With the similarity ``E = a x - b y + tx``, ``N = b x + a y + ty`` and cell ``c`` the pixel
    corner ``(col, row)`` sits at site ``x = x_left + c col``, ``y = y_top - c row``, hence
    ``E = a c col + b c row + (a x_left - b y_top + tx)`` and
    ``N = b c col - a c row + (b x_left + a y_top + ty)``.

    Parameters
    ----------
    grid : FieldGrid
        Regular grid of cell centres, metres.
    ecrs : ExportCRS
        Export CRS and georeference.
    """
    c = grid.cell_m
    x_left = float(grid.x[0]) - 0.5 * c
    y_top = float(grid.y[-1]) + 0.5 * c
    if ecrs.georef is None:
        a, b, tx, ty = 1.0, 0.0, 0.0, 0.0
    else:
        g = ecrs.georef
        a, b, tx, ty = g.a, g.b, g.tx, g.ty
    return Affine(a * c, b * c, a * x_left - b * y_top + tx, b * c, -a * c, b * x_left + a * y_top + ty)


def write_geotiff(grid: FieldGrid, ecrs: ExportCRS, path: str | Path, *, tags: dict | None = None) -> Path:
    """Write the field model as a two-band float32 GeoTIFF.

    Parameters
    ----------
    grid : FieldGrid
        Field model; estimate and std in V/m, NaN outside the site.
    ecrs : ExportCRS
        CRS and georeference to write.
    path : str or Path
        Target ``.tif``; replaced if it exists.
    tags : dict, optional
        Extra dataset tags (text values), e.g. method and threshold.

    Returns
    -------
    Path
    """
    path = Path(path)
    if not path.parent.exists():
        raise MapperError("folder does not exist", where=str(path.parent))
    est = np.asarray(grid.estimate, dtype=np.float32)[::-1]
    std = np.asarray(grid.std, dtype=np.float32)[::-1]
    if est.shape != (len(grid.y), len(grid.x)) or std.shape != est.shape:
        raise MapperError(f"grid arrays have shape {est.shape}; expected {(len(grid.y), len(grid.x))}")
    std = np.where(np.isfinite(est), std, np.nan).astype(np.float32)
    height, width = est.shape
    profile = {
        "driver": "GTiff", "width": width, "height": height, "count": 2, "dtype": "float32",
        "crs": ecrs.wkt, "transform": grid_transform(grid, ecrs), "nodata": math.nan,
        "compress": "deflate", "predictor": 3,
    }
    with atomic_path(path) as tmp:
        with rasterio.open(tmp, "w", **profile) as dst:
            dst.write(est, 1)
            dst.write(std, 2)
            dst.descriptions = BAND_NAMES
            dst.units = ("V/m", "V/m")
            meta = {"method": grid.method, "cell_m": f"{grid.cell_m:g}", "reason": grid.reason,
                    "params": json.dumps(grid.params, default=str)}
            meta.update({k: str(v) for k, v in (tags or {}).items()})
            dst.update_tags(**meta)
            dst.update_tags(1, quantity="electric field estimate, physics sign (positive upward)")
            dst.update_tags(2, quantity="standard deviation of the estimate" if np.isfinite(std).any()
                            else f"no standard deviation from method {grid.method}")
    return path


__all__ = ["BAND_NAMES", "grid_transform", "write_geotiff"]
