"""The field model as a north-up raster: a GeoTIFF beside the GeoPackage, and a gridded coverage in it.

Band 1 is the estimate, band 2 its standard deviation, in V/m. A local site's grid is already
axis-aligned in its engineering CRS and is written as it is. A georeferenced site's grid is
rotated against the projected CRS, so it is resampled onto a north-up grid of half its ground
cell (:data:`RESAMPLE_FACTOR`; bilinear between the four field-grid nodes around each new cell
centre), with no
rotation terms in the geotransform: desktop GIS and plain exports (XYZ, ASCII grid) then read it
without warping. Cells whose centre lies outside the site outline are nodata.

Large rasters (more than :data:`TILE_ABOVE_PX` cells a side) are tiled and carry overviews.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import rasterio
import shapely
from rasterio.enums import Resampling
from rasterio.transform import Affine
from scipy import ndimage
from shapely.geometry.base import BaseGeometry

from mapper.atomic_file import atomic_path, output_path
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS
from mapper.field.model import FieldGrid

#: Band names, in order.
BAND_NAMES = ("estimate_v_per_m", "std_v_per_m")
#: A rotated field grid is resampled onto north-up cells this many times smaller than its own:
#: bilinear resampling flattens peaks between nodes, and on the sample hall (1 m cells) the
#: largest |E| of the raster falls 11 % short of the grid's at the same cell, 2 % at half of it.
RESAMPLE_FACTOR = 2
#: Rasters wider or taller than this (cells) are tiled and get overviews.
TILE_ABOVE_PX = 1024
#: Tile edge of a tiled GeoTIFF, cells.
TILE_PX = 256


@dataclass(frozen=True)
class NorthUp:
    """The field on a north-up grid of the export CRS.

    Attributes
    ----------
    estimate, std : ndarray, shape (rows, cols), float32
        V/m; NaN outside the site (and ``std`` NaN where the method gives none). Row 0 is north.
    transform : affine.Affine
        Pixel corner -> export CRS; ``b == d == 0``.
    cell : float
        Cell edge in CRS units (metres).
    resampled : bool
        True when the values were resampled from a rotated field grid.
    """

    estimate: np.ndarray
    std: np.ndarray
    transform: Affine
    cell: float
    resampled: bool


def fill_nearest(values: np.ndarray) -> np.ndarray:
    """Copy of a 2-D array with every NaN replaced by the nearest finite value (all NaN: unchanged)."""
    bad = ~np.isfinite(values)
    if not bad.any() or bad.all():
        return np.array(values, dtype=float)
    idx = ndimage.distance_transform_edt(bad, return_distances=False, return_indices=True)
    return np.asarray(values, dtype=float)[tuple(idx)]


def bilinear(x: np.ndarray, y: np.ndarray, values: np.ndarray, px: np.ndarray, py: np.ndarray) -> np.ndarray:
    """Bilinear interpolation of a regular grid at points, clamped to the grid's edge.

    Parameters
    ----------
    x, y : ndarray
        Increasing, equally spaced node coordinates, metres (``nx``, ``ny``).
    values : ndarray, shape (ny, nx)
        Node values (finite).
    px, py : ndarray
        Query points, metres (same shape).

    Returns
    -------
    ndarray
        Interpolated values, each a weighted mean of the four nodes around the point.
    """
    nx, ny = len(x), len(y)
    fx = np.clip((np.asarray(px, dtype=float) - x[0]) / (x[1] - x[0]) if nx > 1 else 0.0 * px, 0, max(nx - 1, 0))
    fy = np.clip((np.asarray(py, dtype=float) - y[0]) / (y[1] - y[0]) if ny > 1 else 0.0 * py, 0, max(ny - 1, 0))
    i0 = np.minimum(np.floor(fx).astype(int), max(nx - 2, 0))
    j0 = np.minimum(np.floor(fy).astype(int), max(ny - 2, 0))
    i1 = np.minimum(i0 + 1, nx - 1)
    j1 = np.minimum(j0 + 1, ny - 1)
    tx, ty = fx - i0, fy - j0
    v = values
    return ((1 - tx) * (1 - ty) * v[j0, i0] + tx * (1 - ty) * v[j0, i1]
            + (1 - tx) * ty * v[j1, i0] + tx * ty * v[j1, i1])


def resample_north_up(x: np.ndarray, y: np.ndarray, arrays: list[np.ndarray], ecrs: ExportCRS,
                      outline: BaseGeometry) -> tuple[list[np.ndarray], Affine, float, bool]:
    """Grids of cell centres in site metres onto one north-up grid of the export CRS.

    Parameters
    ----------
    x, y : ndarray
        Increasing, equally spaced cell-centre coordinates, site metres.
    arrays : list of ndarray, shape (len(y), len(x))
        Values (NaN where there are none).
    ecrs : ExportCRS
        Export CRS and georeference.
    outline : shapely geometry
        Region with values, site metres; cells whose centre is outside are NaN.

    Returns
    -------
    arrays : list of ndarray, float32
        Row 0 north.
    transform : affine.Affine
        Pixel corner -> CRS, no rotation terms.
    cell : float
        Cell edge, CRS metres (the grid's cell over :data:`RESAMPLE_FACTOR` when resampled).
    resampled : bool
        False for a local site (the arrays as they are, flipped north-up).
    """
    c = float(x[1] - x[0]) if len(x) > 1 else float(y[1] - y[0])
    if ecrs.georef is None:
        transform = Affine(c, 0.0, float(x[0]) - 0.5 * c, 0.0, -c, float(y[-1]) + 0.5 * c)
        return [np.asarray(a, dtype=float)[::-1].astype(np.float32) for a in arrays], transform, c, False
    g = ecrs.georef
    cell = c * g.scale / RESAMPLE_FACTOR
    ox, oy = shapely.get_coordinates(shapely.boundary(outline)).T
    e, n = g.forward(ox, oy)
    west = math.floor(float(np.min(e)) / cell) * cell
    north = math.ceil(float(np.max(n)) / cell) * cell
    cols = max(1, math.ceil((float(np.max(e)) - west) / cell))
    rows = max(1, math.ceil((north - float(np.min(n))) / cell))
    ee, nn = np.meshgrid(west + cell * (np.arange(cols) + 0.5), north - cell * (np.arange(rows) + 0.5))
    sx, sy = g.inverse(ee, nn)
    sx, sy = np.asarray(sx), np.asarray(sy)
    inside = shapely.contains_xy(outline, sx, sy)
    out = []
    for a in arrays:
        a = np.asarray(a, dtype=float)
        if np.isfinite(a).any():
            out.append(np.where(inside, bilinear(x, y, fill_nearest(a), sx, sy), np.nan).astype(np.float32))
        else:
            out.append(np.full(sx.shape, np.nan, dtype=np.float32))
    return out, Affine(cell, 0.0, west, 0.0, -cell, north), cell, True


def north_up(grid: FieldGrid, ecrs: ExportCRS, outline: BaseGeometry) -> NorthUp:
    """The field model on a north-up grid of the export CRS.

    Parameters
    ----------
    grid : FieldGrid
        Field model on its regular grid of cell centres, site metres.
    ecrs : ExportCRS
        Export CRS and georeference.
    outline : shapely geometry
        Site outline, site metres; cells whose centre is outside are nodata.

    Returns
    -------
    NorthUp
    """
    est = np.asarray(grid.estimate, dtype=float)
    std = np.where(np.isfinite(est), np.asarray(grid.std, dtype=float), np.nan)
    (e, s), transform, cell, resampled = resample_north_up(grid.x, grid.y, [est, std], ecrs, outline)
    return NorthUp(e, s, transform, cell, resampled)


def overview_factors(width: int, height: int) -> list[int]:
    """Overview decimation factors (2, 4, 8 ...) until the smaller overview side is under one tile."""
    factors = []
    f = 2
    while max(width, height) > TILE_ABOVE_PX and max(width, height) / f >= TILE_PX // 2:
        factors.append(f)
        f *= 2
    return factors


def write_geotiff(grid: FieldGrid, ecrs: ExportCRS, path: str | Path, *, outline: BaseGeometry,
                  tags: dict | None = None, resampled: NorthUp | None = None) -> Path:
    """Write the field model as a north-up two-band float32 GeoTIFF.

    Parameters
    ----------
    grid : FieldGrid
        Field model; estimate and std in V/m, NaN outside the site.
    ecrs : ExportCRS
        CRS and georeference to write.
    path : str or Path
        Target ``.tif``; replaced if it exists.
    outline : shapely geometry
        Site outline, site metres.
    tags : dict, optional
        Extra dataset tags (text values), e.g. method and threshold.
    resampled : NorthUp, optional
        :func:`north_up` of these arguments when already made.

    Returns
    -------
    Path
    """
    path = output_path(path)
    if np.shape(grid.estimate) != (len(grid.y), len(grid.x)) or np.shape(grid.std) != np.shape(grid.estimate):
        raise MapperError(f"grid arrays have shape {np.shape(grid.estimate)}; expected {(len(grid.y), len(grid.x))}")
    r = north_up(grid, ecrs, outline) if resampled is None else resampled
    height, width = r.estimate.shape
    profile = {
        "driver": "GTiff", "width": width, "height": height, "count": 2, "dtype": "float32",
        "crs": ecrs.wkt, "transform": r.transform, "nodata": math.nan,
        "compress": "deflate", "predictor": 3,
    }
    factors = overview_factors(width, height)
    if factors:
        profile.update(tiled=True, blockxsize=TILE_PX, blockysize=TILE_PX)
    with atomic_path(path) as tmp:
        with rasterio.open(tmp, "w", **profile) as dst:
            dst.write(r.estimate, 1)
            dst.write(r.std, 2)
            dst.descriptions = BAND_NAMES
            dst.units = ("V/m", "V/m")
            meta = {"method": grid.method, "cell_m": f"{grid.cell_m:g}", "reason": grid.reason,
                    "params": json.dumps({} if grid.settings is None else grid.settings.to_dict(), default=str),
                    "resampling": ("bilinear from the rotated field grid onto this north-up grid"
                                   if r.resampled else "none (the field grid itself)")}
            meta.update({k: str(v) for k, v in (tags or {}).items()})
            dst.update_tags(**meta)
            dst.update_tags(1, quantity="electric field estimate, physics sign (positive upward)")
            dst.update_tags(2, quantity="standard deviation of the estimate" if np.isfinite(r.std).any()
                            else f"no standard deviation from method {grid.method}")
            if factors:
                dst.build_overviews(factors, Resampling.average)
                dst.update_tags(ns="rio_overview", resampling="average")
    return path


__all__ = ["BAND_NAMES", "NorthUp", "bilinear", "fill_nearest", "north_up", "overview_factors", "resample_north_up",
           "RESAMPLE_FACTOR", "write_geotiff"]
