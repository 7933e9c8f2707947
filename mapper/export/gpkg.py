"""Writing the GeoPackage: the layers, the metadata table and the stored styles.

Layers are written through geopandas/pyogrio; the metadata table and ``layer_styles`` are added
with sqlite3 in the same file. The file is written beside the target under a temporary name and
moved into place, so a failed export never leaves half a GeoPackage under the wanted name.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
import pyogrio

from mapper.atomic_file import atomic_path
from mapper.errors import MapperError
from mapper.export import styles as st
from mapper.export.layers import Layer, all_layers
from mapper.export.metadata import METADATA_TABLE, metadata_rows
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


def layer_styles(products: Products) -> list[st.LayerStyle]:
    """The default style of each layer the products allow."""
    out = [
        st.LayerStyle("site", st.outline_qml(st.OUTLINE_COLOR, width_mm=0.7), "site outline"),
        st.LayerStyle("zones", st.outline_qml(st.ZONE_COLOR, width_mm=0.5, dashed=True, label="name"),
                      "zones dashed and labelled"),
        st.LayerStyle("assets", st.assets_qml(), "assets grey, labelled"),
    ]
    f = products.findings
    if f is not None:
        out += [
            st.LayerStyle("readings", st.readings_qml(f.threshold_v_per_m, products.display_unit),
                          "readings graded on the action-level scale"),
            st.LayerStyle("bands", st.bands_qml(f.bands, f.threshold_v_per_m),
                          "action-level scale: blue negative, red positive, neutral near zero"),
            st.LayerStyle("contours", st.contours_qml(), "contours labelled with their level"),
            st.LayerStyle("hotspots", st.hotspots_qml(), "hotspots outlined and labelled with ids"),
            st.LayerStyle("probable_exceedance",
                          st.outline_qml(st.PROBABLE_COLOR, width_mm=0.6, dashed=True, label="probable_id"),
                          "probable exceedance dashed"),
            st.LayerStyle("violations", st.outline_qml("#000000", width_mm=0.4, fill="#ff00ff"),
                          "violation regions"),
            st.LayerStyle("advice", st.advice_qml(), "next readings as rings with rank"),
        ]
    return out


def _write_layer(path: Path, layer: Layer) -> None:
    frame = layer.frame
    kwargs = {"promote_to_multi": True} if layer.geometry_type.startswith("Multi") else {}
    pyogrio.write_dataframe(
        frame, path, layer=layer.name, driver="GPKG", geometry_type=layer.geometry_type, **kwargs
    )


def write_geopackage(products: Products, path: str | Path, *, exported_utc: str | None = None) -> GpkgResult:
    """Write every layer of a survey's products to a GeoPackage.

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products`.
    path : str or Path
        Target ``.gpkg``; replaced if it exists.
    exported_utc : str, optional
        Time stamp recorded in the metadata; default now.

    Returns
    -------
    GpkgResult
    """
    path = Path(path)
    if path.suffix.lower() != ".gpkg":
        raise MapperError(f"output {path.name!r} should end in .gpkg", where=str(path))
    if not path.parent.exists():
        raise MapperError("folder does not exist", where=str(path.parent))
    counts: dict[str, int] = {}
    with atomic_path(path) as tmp:
        for layer in all_layers(products):
            _write_layer(tmp, layer)
            counts[layer.name] = len(layer.frame)
        rows = metadata_rows(products, exported_utc)
        meta = pd.DataFrame(
            {"section": [r.section for r in rows], "key": [r.key for r in rows],
             "value": [r.value for r in rows], "unit": [r.unit for r in rows]}
        )
        pyogrio.write_dataframe(meta, tmp, layer=METADATA_TABLE, driver="GPKG")
        counts[METADATA_TABLE] = len(meta)
        styles = [s for s in layer_styles(products) if s.table in counts]
        descriptions = {layer.name: layer.description for layer in all_layers(products)}
        descriptions[METADATA_TABLE] = "survey metadata: meter, calibration, operator, limits, method, CV"
        conn = sqlite3.connect(tmp)
        try:
            with conn:
                st.write_layer_styles(conn, styles)
                conn.executemany(
                    "UPDATE gpkg_contents SET description = ? WHERE table_name = ?",
                    [(d, n) for n, d in descriptions.items()],
                )
        finally:
            conn.close()
        counts["layer_styles"] = len(styles)
    return GpkgResult(path, counts, products.crs.name)


__all__ = ["GpkgResult", "layer_styles", "write_geopackage"]
