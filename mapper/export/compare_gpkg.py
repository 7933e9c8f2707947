"""The GeoPackage of a before/after comparison (``mapper compare``).

Raster ``difference`` (after - before, V/m, north-up in the export CRS), its bands, both
surveys' hotspots, the hotspot changes, the common region and a one-row summary table.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import rasterio
from rasterio.transform import Affine
from scipy.interpolate import RegularGridInterpolator

from mapper.atomic_file import atomic_path
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS, export_crs, transform_all
from mapper.features import Comparison, bands, nice_levels
from mapper.site.model import Site

#: Vector layers written to the GeoPackage, in order.
LAYERS = (
    "common_region",
    "difference_bands",
    "hotspots_before",
    "hotspots_after",
    "hotspot_changes",
    "summary",
)
#: Name of the raster table holding the difference grid.
RASTER = "difference"


def _frame(records: list[dict], geoms, ecrs: ExportCRS) -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame(records, geometry=transform_all(geoms, ecrs), crs=ecrs.crs)


def difference_raster(cmp: Comparison, ecrs: ExportCRS) -> tuple[np.ndarray, object]:
    """The difference grid as a north-up float32 raster in the export CRS.

    A local site writes the common grid as it is. A georeferenced site is resampled
    (bilinear) onto a north-up grid of the same cell size in the projected CRS, since a
    GeoPackage raster cannot be rotated.

    Returns
    -------
    array : ndarray, shape (rows, cols), float32
        V/m, NaN where there is no difference value; row 0 is the northern edge.
    transform : affine.Affine
        Pixel to CRS transform.
    """
    x, y, d = cmp.x, cmp.y, cmp.difference
    dx, dy = float(x[1] - x[0]), float(y[1] - y[0])
    if ecrs.georef is None:
        transform = Affine(dx, 0.0, x[0] - dx / 2, 0.0, -dy, y[-1] + dy / 2)
        return d[::-1].astype(np.float32), transform
    g = ecrs.georef
    cell = min(dx, dy) * g.scale
    cx = np.array([x[0] - dx / 2, x[-1] + dx / 2, x[-1] + dx / 2, x[0] - dx / 2])
    cy = np.array([y[0] - dy / 2, y[0] - dy / 2, y[-1] + dy / 2, y[-1] + dy / 2])
    e, n = g.forward(cx, cy)
    west, north = float(np.min(e)), float(np.max(n))
    cols = int(np.ceil((np.max(e) - west) / cell))
    rows = int(np.ceil((north - np.min(n)) / cell))
    ee, nn = np.meshgrid(
        west + cell * (np.arange(cols) + 0.5), north - cell * (np.arange(rows) + 0.5)
    )
    sx, sy = g.inverse(ee, nn)
    interp = RegularGridInterpolator((y, x), d, bounds_error=False, fill_value=np.nan)
    values = interp(np.column_stack([np.ravel(sy), np.ravel(sx)])).reshape(ee.shape)
    return values.astype(np.float32), Affine(cell, 0.0, west, 0.0, -cell, north)


def write_comparison_gpkg(path: str | Path, cmp: Comparison, site: Site, unit: str) -> None:
    """Write a comparison to a GeoPackage (replacing the file), atomically.

    Parameters
    ----------
    path : str or Path
        Output ``.gpkg``.
    cmp : Comparison
        What :func:`mapper.features.compare_fields` returned.
    site : Site
        The site (its georeference places the layers).
    unit : str
        Display unit for band labels.
    """
    path = Path(path)
    if path.suffix.lower() != ".gpkg":
        raise MapperError(f"output {path.name!r} should end in .gpkg", where=str(path))
    if not path.parent.is_dir():
        raise MapperError("folder does not exist", where=str(path.parent))
    ecrs = export_crs(site)
    with atomic_path(path) as tmp:
        _frame([{"area_m2": float(cmp.common_region.area)}], [cmp.common_region], ecrs).to_file(
            tmp, layer="common_region", driver="GPKG"
        )
        diff_grid = cmp.difference_grid()
        d = cmp.difference[np.isfinite(cmp.difference)]
        lo, hi = float(d.min()), float(d.max())
        if hi - lo > 0:
            lv = nice_levels(min(lo, -hi), max(hi, -lo), unit=unit, symmetric=True)
            bs = bands(diff_grid, cmp.common_region, lv)
        else:
            bs = ()
        _frame(
            [
                {
                    "lower_v_per_m": b.lower_v_per_m,
                    "upper_v_per_m": b.upper_v_per_m,
                    "label": b.label,
                    "area_m2": b.area_m2,
                }
                for b in bs
            ],
            [b.geometry for b in bs],
            ecrs,
        ).to_file(tmp, layer="difference_bands", driver="GPKG", promote_to_multi=True)
        status_of = {}
        for c in cmp.changes:
            for hid in c.before_ids:
                status_of[("before", hid)] = c.status
            for hid in c.after_ids:
                status_of[("after", hid)] = c.status
        for side, hs in (("before", cmp.hotspots_before), ("after", cmp.hotspots_after)):
            records = []
            for h in hs:
                rec = {
                    k: v for k, v in h.to_dict().items() if k not in ("wkt", "reading_ids", "zones")
                }
                rec["zones"] = ", ".join(h.zones)
                rec["readings"] = len(h.reading_ids)
                rec["change"] = status_of.get((side, h.id), "")
                records.append(rec)
            _frame(records, [h.geometry for h in hs], ecrs).to_file(
                tmp, layer=f"hotspots_{side}", driver="GPKG", promote_to_multi=True
            )
        change_records = []
        for c in cmp.changes:
            rec = {k: v for k, v in c.to_dict().items() if not k.startswith("wkt")}
            rec["before_ids"] = ", ".join(c.before_ids)
            rec["after_ids"] = ", ".join(c.after_ids)
            change_records.append(rec)
        change_geoms = [c.geometry_before.union(c.geometry_after) for c in cmp.changes]
        _frame(change_records, change_geoms, ecrs).to_file(
            tmp, layer="hotspot_changes", driver="GPKG", promote_to_multi=True
        )
        summary = cmp.summary.to_dict()
        counts = summary.pop("counts")
        summary.update({f"count_{k}": v for k, v in counts.items()})
        summary["crs"] = ecrs.name
        pyogrio.write_dataframe(pd.DataFrame([summary]), tmp, layer="summary", driver="GPKG")
        array, transform = difference_raster(cmp, ecrs)
        with rasterio.open(
            tmp,
            "w",
            driver="GPKG",
            width=array.shape[1],
            height=array.shape[0],
            count=1,
            dtype="float32",
            crs=ecrs.wkt,
            transform=transform,
            nodata=np.nan,
            RASTER_TABLE=RASTER,
            RASTER_IDENTIFIER="after - before, V/m",
            APPEND_SUBDATASET="YES",
            TILE_FORMAT="TIFF",
        ) as ds:
            ds.write(array, 1)


__all__ = ["LAYERS", "RASTER", "difference_raster", "write_comparison_gpkg"]
