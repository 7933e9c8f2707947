"""Writing the GeoPackage: the layers, the metadata table and the stored styles.

Layers are written through geopandas/pyogrio; the metadata table and ``layer_styles`` are added
with sqlite3 in the same file. The file is written beside the target under a temporary name and
moved into place, so a failed export never leaves half a GeoPackage under the wanted name.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pyogrio

from mapper.atomic_file import atomic_path, output_path
from mapper.export import styles as st
from mapper.export.columns import write_data_columns
from mapper.export.coverage import Coverage, write_coverage
from mapper.export.layers import Layer, ReadingTable, all_layers
from mapper.export.metadata import METADATA_TABLE, metadata_rows, write_gdal_metadata
from mapper.export.project import ProjectLayer, write_project
from mapper.export.raster import NorthUp, north_up
from mapper.workflow import Products


@dataclass(frozen=True)
class GpkgResult:
    """What was written.

    Attributes
    ----------
    path : Path
        The GeoPackage.
    layers : dict
        Layer name -> feature count (non-spatial tables included).
    crs : str
        Name of the CRS of every spatial layer.
    """

    path: Path
    layers: dict
    crs: str


#: Raster tables of the field inside the GeoPackage (2D gridded coverages, V/m).
FIELD_RASTERS = ("field_estimate", "field_std")


def layer_styles(products: Products) -> list[st.LayerStyle]:
    """The default style of each layer the products allow."""
    out = [
        st.LayerStyle("site", st.outline_qml(st.OUTLINE_COLOR, width_mm=0.7), "site outline"),
        st.LayerStyle("zones", st.outline_qml(st.ZONE_COLOR, width_mm=0.5, dashed=True, label="name"),
                      "zones dashed and labelled"),
        st.LayerStyle("assets", st.assets_qml(), "asset polygons grey, labelled"),
        st.LayerStyle("asset_lines", st.asset_lines_qml(), "line assets grey, labelled along the line"),
        st.LayerStyle("asset_points", st.asset_points_qml(), "point assets grey, labelled"),
    ]
    f = products.findings
    if f is not None:
        t, unit = f.threshold_v_per_m, products.display_unit
        out += [
            st.LayerStyle("readings", st.readings_qml(t, unit), "readings graded on the action-level scale"),
            st.LayerStyle("bands", st.bands_qml(f.bands, t),
                          "action-level scale: blue negative, red positive, neutral near zero"),
            st.LayerStyle("contours", st.contours_qml(), "contours labelled with their level"),
            st.LayerStyle("hotspots", st.hotspots_qml(), "hotspots outlined and labelled with ids (always shown)"),
            st.LayerStyle("probable_exceedance", st.probable_qml(),
                          "probable exceedance dashed, labels below the hotspot ids"),
            st.LayerStyle("violations", st.outline_qml("#000000", width_mm=0.4, fill="#ff00ff"),
                          "violation regions"),
            st.LayerStyle("advice", st.advice_qml(), "next readings as rings with rank"),
            st.LayerStyle("field_estimate", st.field_raster_qml(t, unit),
                          "field estimate on the action-level scale", raster=True),
            st.LayerStyle("field_std", st.std_raster_qml(t, unit),
                          "standard deviation, 0 to the action level", raster=True),
        ]
    return out


def field_coverages(products: Products, resampled: NorthUp | None = None) -> list[Coverage]:
    """The field estimate and its standard deviation as north-up coverages (empty without a field).

    ``resampled`` is the field model's :func:`~mapper.export.raster.north_up` when already made.
    """
    if products.grid is None:
        return []
    r = north_up(products.grid, products.crs, products.site.outline) if resampled is None else resampled
    how = "resampled bilinearly onto a north-up grid" if r.resampled else "the field model's grid"
    out = [Coverage("field_estimate", r.estimate, r.transform, "field estimate, V/m",
                    f"electric field estimate at the meter height, V/m, physics sign (positive: pointing up); "
                    f"method {products.grid.method}; {how}; nodata outside the site",
                    "estimate_v_per_m", "electric field strength (vertical component)")]
    if np.isfinite(r.std).any():
        out.append(Coverage("field_std", r.std, r.transform, "standard deviation of the field estimate, V/m",
                            "standard deviation of the field estimate, V/m; nodata outside the site",
                            "std_v_per_m", "standard deviation of the electric field estimate"))
    return out


#: GeoPackage version written: 1.2 is read without warnings by the GDAL releases desktop GIS of
#: the last years ship (newer GDAL writes 1.4 by default).
GPKG_VERSION = "1.2"


#: Drawing order of the stored project, top first; rasters and layers not listed stay out.
PROJECT_ORDER = ("hotspots", "probable_exceedance", "advice", "violations", "readings", "asset_points",
                 "asset_lines", "assets", "zones", "contours", "site", "bands", "field_estimate", "field_std")
#: Layers in the project but unchecked when it opens (the bands show the same field).
PROJECT_HIDDEN = ("field_estimate", "field_std")


def project_layers(layers: list[Layer], styles: list[st.LayerStyle]) -> list[ProjectLayer]:
    """The stored project's layers, top first, each with its stored style."""
    qml = {s.table: s.qml for s in styles}
    gtype = {layer.name: layer.geometry_type for layer in layers}
    return [ProjectLayer(name, qml[name], gtype.get(name), name not in PROJECT_HIDDEN)
            for name in PROJECT_ORDER if name in qml]


def _bounds(geom, margin: float = 0.05) -> tuple[float, float, float, float]:
    x0, y0, x1, y1 = geom.bounds
    dx, dy = (x1 - x0) * margin, (y1 - y0) * margin
    return x0 - dx, y0 - dy, x1 + dx, y1 + dy


def _write_layer(path: Path, layer: Layer) -> None:
    frame = layer.frame
    kwargs = {"promote_to_multi": True} if layer.geometry_type.startswith("Multi") else {}
    if not path.exists():
        kwargs["dataset_options"] = {"VERSION": GPKG_VERSION}
    pyogrio.write_dataframe(
        frame, path, layer=layer.name, driver="GPKG", geometry_type=layer.geometry_type, **kwargs
    )


def write_geopackage(products: Products, path: str | Path, *, exported_utc: str | None = None,
                     table: ReadingTable | None = None, resampled: NorthUp | None = None) -> GpkgResult:
    """Write every layer of a survey's products to a GeoPackage.

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products`.
    path : str or Path
        Target ``.gpkg``; replaced if it exists.
    exported_utc : str, optional
        Time stamp recorded in the metadata; default now.
    table : ReadingTable, optional
        The readings' attributes when already made (:func:`~mapper.export.layers.reading_table`).
    resampled : NorthUp, optional
        The field model on the north-up grid when already made (:func:`~mapper.export.raster.north_up`).

    Returns
    -------
    GpkgResult
    """
    path = output_path(path, ".gpkg")
    counts: dict[str, int] = {}
    layers = all_layers(products, table)
    with atomic_path(path) as tmp:
        for layer in layers:
            _write_layer(tmp, layer)
            counts[layer.name] = len(layer.frame)
        rows = metadata_rows(products, exported_utc)
        meta = pd.DataFrame(
            {"section": [r.section for r in rows], "key": [r.key for r in rows],
             "value": [r.value for r in rows], "unit": [r.unit for r in rows]}
        )
        pyogrio.write_dataframe(meta, tmp, layer=METADATA_TABLE, driver="GPKG")
        counts[METADATA_TABLE] = len(meta)
        for cov in field_coverages(products, resampled):
            write_coverage(tmp, cov, products.crs.wkt)
            counts[cov.table] = int(np.isfinite(cov.values).sum())
        styles = [s for s in layer_styles(products) if s.table in counts]
        descriptions = {layer.name: layer.description for layer in layers}
        descriptions[METADATA_TABLE] = "survey metadata: meter, calibration, operator, limits, method, CV"
        conn = sqlite3.connect(tmp)
        try:
            with conn:
                st.write_layer_styles(conn, styles)
                conn.executemany(
                    "UPDATE gpkg_contents SET description = ? WHERE table_name = ?",
                    [(d, n) for n, d in descriptions.items()],
                )
                write_data_columns(conn, [layer.name for layer in layers], products.display_unit)
                write_gdal_metadata(conn, rows, st.utc_stamp())
                write_project(conn, project_layers(layers, styles), path.name, products.crs,
                              _bounds(products.crs.geometry(products.site.outline)), products.name, st.utc_stamp())
        finally:
            conn.close()
        counts["layer_styles"] = len(styles)
    return GpkgResult(path, counts, products.crs.name)


__all__ = ["FIELD_RASTERS", "GpkgResult", "field_coverages", "layer_styles", "write_geopackage"]
