"""The GeoPackage of a before/after comparison (``mapper compare``).

It follows the survey GeoPackage's conventions: the same column names for the same things
(``hotspot_id``, ``peak_x_site_m``, ``n_readings`` ...), NULL for open band ends, no empty
geometries, a stored style (QML and SLD) for every layer, descriptions in ``gpkg_contents``,
column descriptions and units in ``gpkg_data_columns`` and the summary also as GDAL dataset
metadata. The difference grid (after - before, V/m) is a float coverage ``difference``,
north-up in the export CRS, with its unit, field name, description and nodata, coloured on the
action-level scale like the maps; its style is also written beside the file (``OUT.qml``,
``OUT.sld``). A desktop GIS project stored in the file opens the layers in order, styled.
"""

from __future__ import annotations

import math
import sqlite3
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio

from mapper.atomic_file import atomic_path, output_path
from mapper.export import styles as st
from mapper.export.columns import write_data_columns
from mapper.export.coverage import Coverage, write_coverage
from mapper.export.crs import ExportCRS, export_crs, transform_all
from mapper.export.gpkg import GPKG_VERSION
from mapper.export.layers import HOTSPOT_COLUMNS, hotspot_record
from mapper.export.metadata import MetaRow, write_gdal_metadata
from mapper.export.project import ProjectLayer, write_project
from mapper.export.raster import resample_north_up
from mapper.features import Comparison, bands
from mapper.features import colour_scale as cs
from mapper.features.contours import Levels
from mapper.site.model import Site
from mapper.units import from_si

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
#: Drawing order of the stored project, top first.
PROJECT_ORDER = ("hotspot_changes", "hotspots_after", "hotspots_before", "common_region", "difference_bands", RASTER)
#: Colours of the change kinds (our choice; common practice, no source).
CHANGE_COLORS = {"appeared": "#d7301f", "grew": "#fc8d59", "unchanged": "#737373", "shrank": "#6baed6",
                 "cleared": "#2171b5"}

DESCRIPTIONS = {
    "common_region": "region covered by both surveys",
    "difference_bands": "after - before in bands of the action-level scale (lower < d <= upper; NULL: open)",
    "hotspots_before": "hotspots of the first survey, with what happened to each (change)",
    "hotspots_after": "hotspots of the second survey, with what happened to each (change)",
    "hotspot_changes": "each hotspot change: appeared, cleared, grew, shrank or unchanged",
    "summary": "summary of the comparison (one row)",
}


def _frame(records: list[dict], geoms, ecrs: ExportCRS, columns=None) -> gpd.GeoDataFrame:
    data = pd.DataFrame.from_records(records, columns=list(columns) if columns else None)
    return gpd.GeoDataFrame(data, geometry=transform_all(geoms, ecrs), crs=ecrs.crs)


def _finite(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def difference_raster(cmp: Comparison, ecrs: ExportCRS) -> tuple[np.ndarray, object]:
    """The difference grid as a north-up float32 raster in the export CRS.

    A local site writes the common grid as it is; a georeferenced one is resampled bilinearly
    onto a north-up grid of half the ground cell (:func:`~mapper.export.raster.resample_north_up`),
    NaN outside the common region.

    Returns
    -------
    array : ndarray, shape (rows, cols), float32
        V/m, NaN where there is no difference value; row 0 is the northern edge.
    transform : affine.Affine
        Pixel to CRS transform.
    """
    (values,), transform, _, _ = resample_north_up(cmp.x, cmp.y, [cmp.difference], ecrs, cmp.common_region)
    return values, transform


def _difference_bands(cmp: Comparison, unit: str) -> tuple[list, list[dict]]:
    d = cmp.difference[np.isfinite(cmp.difference)]
    lo, hi = float(d.min()), float(d.max())
    if not hi - lo > 0:
        return [], []
    t = cmp.summary.threshold_v_per_m
    bs = [b for b in bands(cmp.difference_grid(), cmp.common_region, Levels(cs.scale_levels(t, lo, hi), unit))
          if not b.geometry.is_empty]
    records = [{
        "band_index": i, "lower_v_per_m": _finite(b.lower_v_per_m), "upper_v_per_m": _finite(b.upper_v_per_m),
        "lower_display": None if not math.isfinite(b.lower_v_per_m) else from_si(b.lower_v_per_m, unit),
        "upper_display": None if not math.isfinite(b.upper_v_per_m) else from_si(b.upper_v_per_m, unit),
        "display_unit": unit, "label": b.label, "area_m2": b.area_m2,
        "color": cs.interval_hex(b.lower_v_per_m, b.upper_v_per_m, t),
    } for i, b in enumerate(bs)]
    return bs, records


def _changes_qml() -> str:
    root, geom = st._doc(2)
    cats = [(k, k, {"color": c, "alpha": 60, "outline": c, "width_mm": 0.8}) for k, c in CHANGE_COLORS.items()]
    st._categorized(root, "status", cats, "fill")
    st._labels(root, "status", placement=2, size_pt=7.0, color="#333333", priority=4, obstacle=False)
    return st._finish(root, geom)


def comparison_styles(cmp: Comparison, bs: list, unit: str) -> list[st.LayerStyle]:
    """Stored styles of the comparison layers and raster."""
    t = cmp.summary.threshold_v_per_m
    return [
        st.LayerStyle("common_region", st.outline_qml(st.OUTLINE_COLOR, width_mm=0.7), "common region outline"),
        st.LayerStyle("difference_bands", st.bands_qml(bs, t), "difference on the action-level scale"),
        st.LayerStyle("hotspots_before", st.hotspots_qml(), "hotspots before, labelled with ids"),
        st.LayerStyle("hotspots_after", st.hotspots_qml(), "hotspots after, labelled with ids"),
        st.LayerStyle("hotspot_changes", _changes_qml(), "changes coloured by kind"),
        st.LayerStyle(RASTER, st.field_raster_qml(t, unit), "after - before on the action-level scale",
                      raster=True),
    ]


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
        Display unit for band labels and display columns.
    """
    path = output_path(path, ".gpkg")
    ecrs = export_crs(site)
    with atomic_path(path) as tmp:
        _frame([{"area_m2": float(cmp.common_region.area), "crs": ecrs.name}], [cmp.common_region], ecrs).to_file(
            tmp, layer="common_region", driver="GPKG", promote_to_multi=True, VERSION=GPKG_VERSION)
        bs, band_records = _difference_bands(cmp, unit)
        frame = _frame(band_records, [b.geometry for b in bs], ecrs,
                       ("band_index", "lower_v_per_m", "upper_v_per_m", "lower_display", "upper_display",
                        "display_unit", "label", "area_m2", "color"))
        for col in ("lower_v_per_m", "upper_v_per_m", "lower_display", "upper_display"):
            frame[col] = frame[col].astype(float)
        pyogrio.write_dataframe(frame, tmp, layer="difference_bands", driver="GPKG", promote_to_multi=True,
                                geometry_type="MultiPolygon")
        status_of = {}
        for c in cmp.changes:
            for hid in c.before_ids:
                status_of[("before", hid)] = c.status
            for hid in c.after_ids:
                status_of[("after", hid)] = c.status
        for side, hs in (("before", cmp.hotspots_before), ("after", cmp.hotspots_after)):
            hs = [h for h in hs if not h.geometry.is_empty]
            records = [{**hotspot_record(h, unit), "change": status_of.get((side, h.id), "")} for h in hs]
            frame = _frame(records, [h.geometry for h in hs], ecrs, (*HOTSPOT_COLUMNS, "change"))
            for col in ("max_reading_v_per_m", "p_exceed_max", "nearest_asset_m"):
                frame[col] = frame[col].astype(float)
            pyogrio.write_dataframe(frame, tmp, layer=f"hotspots_{side}", driver="GPKG", promote_to_multi=True,
                                    geometry_type="MultiPolygon")
        change_records, change_geoms = [], []
        for c in cmp.changes:
            geom = c.geometry_before.union(c.geometry_after)
            if geom.is_empty:
                continue
            rec = {k: v for k, v in c.to_dict().items() if not k.startswith("wkt")}
            rec["before_ids"] = ",".join(c.before_ids)
            rec["after_ids"] = ",".join(c.after_ids)
            change_records.append(rec)
            change_geoms.append(geom)
        frame = _frame(change_records, change_geoms, ecrs,
                       ("status", "polarity", "before_ids", "after_ids", "area_before_m2", "area_after_m2",
                        "peak_before_v_per_m", "peak_after_v_per_m", "overlap_m2", "note"))
        for col in ("area_before_m2", "area_after_m2", "peak_before_v_per_m", "peak_after_v_per_m", "overlap_m2"):
            frame[col] = pd.to_numeric(frame[col], errors="coerce").astype(float)
        pyogrio.write_dataframe(frame, tmp, layer="hotspot_changes", driver="GPKG", promote_to_multi=True,
                                geometry_type="MultiPolygon")
        summary = cmp.summary.to_dict()
        counts = summary.pop("counts")
        summary.update({f"count_{k}": v for k, v in counts.items()})
        summary = {k: (_finite(v) if isinstance(v, float) else v) for k, v in summary.items()}
        summary["crs"] = ecrs.name
        pyogrio.write_dataframe(pd.DataFrame([summary]), tmp, layer="summary", driver="GPKG")
        array, transform = difference_raster(cmp, ecrs)
        write_coverage(tmp, Coverage(
            RASTER, array, transform, "after - before, V/m",
            "field after minus field before, V/m, physics sign; north-up; nodata outside the common region",
            "difference_v_per_m", "difference of the electric field (vertical component)"), ecrs.wkt)
        styles = comparison_styles(cmp, bs, unit)
        conn = sqlite3.connect(tmp)
        try:
            with conn:
                st.write_layer_styles(conn, styles)
                conn.executemany("UPDATE gpkg_contents SET description = ? WHERE table_name = ?",
                                 [(d, n) for n, d in DESCRIPTIONS.items()])
                write_data_columns(conn, LAYERS, unit)
                rows = [MetaRow("comparison", k, "" if v is None else str(v),
                                "V/m" if k.endswith("v_per_m") else "m2" if k.endswith("m2") else "")
                        for k, v in summary.items()]
                write_gdal_metadata(conn, rows, st.utc_stamp())
                qml = {s.table: s.qml for s in styles}
                layers = [ProjectLayer(name, qml[name], None if name == RASTER else "MultiPolygon",
                                       name not in ("hotspots_before", RASTER))
                          for name in PROJECT_ORDER]
                x0, y0, x1, y1 = ecrs.geometry(site.outline).bounds
                pad = 0.05 * max(x1 - x0, y1 - y0)
                write_project(conn, layers, path.name, ecrs, (x0 - pad, y0 - pad, x1 + pad, y1 + pad),
                              f"{site.name}: after - before", st.utc_stamp())
        finally:
            conn.close()
    # The style beside the file too: desktop GIS releases that read raster styles only from a
    # sidecar OUT.qml (not from layer_styles) then open the difference coloured as well.
    raster_style = next(s for s in styles if s.table == RASTER)
    for suffix, text in ((".qml", raster_style.qml), (".sld", raster_style.sld)):
        with atomic_path(path.with_suffix(suffix)) as tmp:
            tmp.write_text(text, encoding="utf-8")


__all__ = ["CHANGE_COLORS", "LAYERS", "RASTER", "comparison_styles", "difference_raster", "write_comparison_gpkg"]
