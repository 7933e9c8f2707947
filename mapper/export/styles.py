"""Our palette and the styles stored with the GeoPackage.

Field values are coloured on the one scale every map uses, tied to the action level
(:mod:`mapper.features.colour_scale`): blue for negative fields (pointing down, towards the
floor), red for positive ones, a pale neutral band around zero. Styles are
written as QGIS QML documents into a ``layer_styles`` table, the convention desktop GIS use for
styles kept inside a GeoPackage; a GIS that does not read it still gets the plain layers.
"""

from __future__ import annotations

import math
import sqlite3
import xml.etree.ElementTree as ET
from collections.abc import Sequence
from dataclasses import dataclass

from mapper.features import colour_scale as cs
from mapper.features.contours import Band
from mapper.survey.store import to_utc_text, utc_now

#: Colours of the map's other things.
OUTLINE_COLOR = "#222222"
ASSET_COLOR = "#6b6b6b"
ZONE_COLOR = "#6a3d9a"
HOTSPOT_COLORS = {"positive": "#8b0000", "negative": "#0b2a66"}
PROBABLE_COLOR = "#d4a017"
ADVICE_COLOR = "#1a7f37"
CONTOUR_COLOR = "#3a3a3a"
#: Bounds standing in for the open ends of the lowest and highest band where a GIS needs numbers:
#: the dielectric strength of air, about 3 MV/m (AMS Glossary of Meteorology).
OPEN_END_V_PER_M = 3.0e6


def _rgb(hex_color: str) -> tuple[int, int, int]:
    h = hex_color.lstrip("#")
    return int(h[0:2], 16), int(h[2:4], 16), int(h[4:6], 16)


def value_color(value_v_per_m: float, threshold_v_per_m: float) -> str:
    """Colour of a field value on the action-level scale (:mod:`mapper.features.colour_scale`)."""
    return cs.colour_hex(value_v_per_m, threshold_v_per_m)


def band_colors(bands: Sequence[Band], threshold_v_per_m: float) -> list[str]:
    """One colour per contour band: that of the scale band holding it."""
    return [cs.interval_hex(b.lower_v_per_m, b.upper_v_per_m, threshold_v_per_m) for b in bands]


def text_color_on(hex_color: str) -> str:
    """Black or white, whichever reads better on a background colour."""
    r, g, b = _rgb(hex_color)
    return "#000000" if 0.299 * r + 0.587 * g + 0.114 * b > 140 else "#ffffff"


# ---------------------------------------------------------------------------- QML documents
def _qcolor(hex_color: str, alpha: int = 255) -> str:
    r, g, b = _rgb(hex_color)
    return f"{r},{g},{b},{alpha}"


def _symbol_layer(parent: ET.Element, cls: str, props: dict[str, str]) -> None:
    layer = ET.SubElement(parent, "layer", {"class": cls, "enabled": "1", "locked": "0", "pass": "0"})
    opt = ET.SubElement(layer, "Option", {"type": "Map"})
    for k, v in props.items():
        ET.SubElement(opt, "Option", {"type": "QString", "name": k, "value": v})
    for k, v in props.items():  # older readers use <prop>
        ET.SubElement(layer, "prop", {"k": k, "v": v})


def _symbol(parent: ET.Element, name: str, kind: str, color: str, *, alpha: int = 255,
            outline: str | None = None, width_mm: float = 0.4, style: str = "solid",
            outline_style: str = "solid", size_mm: float = 2.0) -> ET.Element:
    sym = ET.SubElement(parent, "symbol", {"type": kind, "name": name, "alpha": "1",
                                           "clip_to_extent": "1", "force_rhr": "0"})
    if kind == "fill":
        _symbol_layer(sym, "SimpleFill", {
            "color": _qcolor(color, alpha), "style": style,
            "outline_color": _qcolor(outline or color), "outline_style": outline_style,
            "outline_width": f"{width_mm:g}", "outline_width_unit": "MM",
        })
    elif kind == "line":
        _symbol_layer(sym, "SimpleLine", {
            "line_color": _qcolor(color), "line_width": f"{width_mm:g}", "line_width_unit": "MM",
            "line_style": style, "capstyle": "round", "joinstyle": "round",
        })
    else:
        _symbol_layer(sym, "SimpleMarker", {
            "name": "circle", "color": _qcolor(color, alpha), "size": f"{size_mm:g}", "size_unit": "MM",
            "outline_color": _qcolor(outline or "#000000"), "outline_width": f"{width_mm:g}",
            "outline_width_unit": "MM", "outline_style": "solid",
        })
    return sym


def _doc(geometry_type: int) -> tuple[ET.Element, ET.Element]:
    root = ET.Element("qgis", {"version": "3.28.0", "styleCategories": "Symbology|Labeling"})
    geom = ET.Element("layerGeometryType")
    geom.text = str(geometry_type)
    return root, geom


def _labels(root: ET.Element, field_name: str, *, placement: int, size_pt: float = 8.0,
            color: str = "#000000", bold: bool = False) -> None:
    lab = ET.SubElement(root, "labeling", {"type": "simple"})
    settings = ET.SubElement(lab, "settings", {"calloutType": "simple"})
    ET.SubElement(settings, "text-style", {
        "fieldName": field_name, "isExpression": "0", "fontSize": f"{size_pt:g}", "fontSizeUnit": "Point",
        "textColor": _qcolor(color), "fontWeight": "75" if bold else "50", "fontFamily": "Sans Serif",
        "textOpacity": "1", "namedStyle": "Bold" if bold else "Regular",
    })
    ET.SubElement(settings, "text-buffer", {
        "bufferDraw": "1", "bufferSize": "0.8", "bufferSizeUnits": "MM", "bufferColor": "255,255,255,255",
        "bufferOpacity": "0.85",
    })
    ET.SubElement(settings, "placement", {"placement": str(placement), "repeatDistance": "0"})
    ET.SubElement(settings, "rendering", {"drawLabels": "1", "obstacle": "1", "scaleVisibility": "0"})
    root.set("labelsEnabled", "1")


def _finish(root: ET.Element, geom: ET.Element) -> str:
    root.append(geom)
    ET.indent(root)
    return "<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>\n" + ET.tostring(root, encoding="unicode")


def _categorized(root: ET.Element, attr: str, cats: Sequence[tuple[str, str, dict]], kind: str) -> None:
    r = ET.SubElement(root, "renderer-v2", {"type": "categorizedSymbol", "attr": attr,
                                            "symbollevels": "0", "enableorderby": "0", "forceraster": "0"})
    categories = ET.SubElement(r, "categories")
    symbols = ET.SubElement(r, "symbols")
    for i, (value, label, sym) in enumerate(cats):
        ET.SubElement(categories, "category", {"symbol": str(i), "value": value, "label": label, "render": "true"})
        _symbol(symbols, str(i), kind, **sym)


def _single(root: ET.Element, kind: str, **sym) -> None:
    r = ET.SubElement(root, "renderer-v2", {"type": "singleSymbol", "symbollevels": "0",
                                            "enableorderby": "0", "forceraster": "0"})
    symbols = ET.SubElement(r, "symbols")
    _symbol(symbols, "0", kind, **sym)


def bands_qml(bands: Sequence[Band], threshold_v_per_m: float) -> str:
    """Bands filled with the action-level scale's colours, categorised on ``band_index``."""
    root, geom = _doc(2)
    colors = band_colors(bands, threshold_v_per_m)
    cats = [(str(i), b.label, {"color": c, "alpha": 235, "outline": c, "width_mm": 0.0, "outline_style": "no"})
            for i, (b, c) in enumerate(zip(bands, colors, strict=True))]
    _categorized(root, "band_index", cats, "fill")
    return _finish(root, geom)


def readings_qml(threshold_v_per_m: float, unit: str) -> str:
    """Readings as dots graded on the action-level scale (the same colours as the bands).

    Parameters
    ----------
    threshold_v_per_m : float
        Action level, V/m.
    unit : str
        Display unit of the range labels.
    """
    root, geom = _doc(0)
    r = ET.SubElement(root, "renderer-v2", {"type": "graduatedSymbol", "attr": "value_v_per_m",
                                            "graduatedMethod": "GraduatedColor", "symbollevels": "0",
                                            "enableorderby": "0", "forceraster": "0"})
    ranges = ET.SubElement(r, "ranges")
    symbols = ET.SubElement(r, "symbols")
    inner = cs.edges_v_per_m(threshold_v_per_m)
    edges = (-OPEN_END_V_PER_M, *inner, OPEN_END_V_PER_M)
    labels = [label for _, label in reversed(cs.legend_rows(threshold_v_per_m, unit))]
    for i, (lo, hi) in enumerate(zip(edges[:-1], edges[1:], strict=True)):
        ET.SubElement(ranges, "range", {"symbol": str(i), "lower": f"{lo:.10g}", "upper": f"{hi:.10g}",
                                        "label": labels[i], "render": "true"})
        colour = cs.interval_hex(-math.inf if i == 0 else lo, math.inf if i == len(edges) - 2 else hi,
                                 threshold_v_per_m)
        _symbol(symbols, str(i), "marker", colour, outline="#202020", width_mm=0.2, size_mm=2.2)
    return _finish(root, geom)


def contours_qml() -> str:
    """Thin grey lines labelled with their level along the line."""
    root, geom = _doc(1)
    _single(root, "line", color=CONTOUR_COLOR, width_mm=0.35)
    _labels(root, "label", placement=3, size_pt=7.0, color=CONTOUR_COLOR)
    return _finish(root, geom)


def hotspots_qml() -> str:
    """Hotspots outlined (dark red positive, dark blue negative), not filled, labelled with ids."""
    root, geom = _doc(2)
    cats = [(pol, pol, {"color": HOTSPOT_COLORS[pol], "style": "no", "outline": HOTSPOT_COLORS[pol],
                        "width_mm": 0.9}) for pol in ("positive", "negative")]
    _categorized(root, "polarity", cats, "fill")
    _labels(root, "hotspot_id", placement=1, size_pt=10.0, bold=True)
    return _finish(root, geom)


def outline_qml(color: str, *, width_mm: float = 0.6, dashed: bool = False, label: str | None = None,
                fill: str | None = None) -> str:
    """A polygon layer drawn as an outline (optionally filled and labelled)."""
    root, geom = _doc(2)
    _single(root, "fill", color=fill or color, alpha=90 if fill else 255, style="solid" if fill else "no",
            outline=color, width_mm=width_mm, outline_style="dash" if dashed else "solid")
    if label:
        _labels(root, label, placement=1, size_pt=8.0, color=color)
    return _finish(root, geom)


def assets_qml() -> str:
    """Assets grey (lines and polygons), labelled with their names."""
    root, geom = _doc(2)
    _single(root, "fill", color=ASSET_COLOR, alpha=110, outline=ASSET_COLOR, width_mm=0.5)
    _labels(root, "name", placement=1, size_pt=7.0, color="#333333")
    return _finish(root, geom)


def advice_qml() -> str:
    """Suggested next readings as green rings labelled with their rank."""
    root, geom = _doc(0)
    _single(root, "marker", color=ADVICE_COLOR, alpha=0, outline=ADVICE_COLOR, width_mm=0.6, size_mm=3.5)
    _labels(root, "rank", placement=0, size_pt=8.0, color=ADVICE_COLOR)
    return _finish(root, geom)


@dataclass(frozen=True)
class LayerStyle:
    """A style for one layer of the GeoPackage.

    Attributes
    ----------
    table : str
        Layer (table) name.
    qml : str
        QGIS QML document.
    description : str
        What the style shows.
    """

    table: str
    qml: str
    description: str


#: The desktop-GIS ``layer_styles`` table.
LAYER_STYLES_DDL = (
    "CREATE TABLE layer_styles (id INTEGER PRIMARY KEY AUTOINCREMENT, f_table_catalog TEXT(256), "
    "f_table_schema TEXT(256), f_table_name TEXT(256), f_geometry_column TEXT(256), styleName TEXT(30), "
    "styleQML TEXT, styleSLD TEXT, useAsDefault BOOLEAN, description TEXT, owner TEXT(30), ui TEXT(30), "
    "update_time DATETIME DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ','now')))"
)


def write_layer_styles(conn: sqlite3.Connection, styles: Sequence[LayerStyle]) -> None:
    """Create ``layer_styles`` in an open GeoPackage, register it in ``gpkg_contents``, fill it.

    Parameters
    ----------
    conn : sqlite3.Connection
        Connection to the GeoPackage (the caller commits).
    styles : sequence of LayerStyle
        One per styled layer; each becomes that layer's default style.
    """
    conn.execute(LAYER_STYLES_DDL)
    now = to_utc_text(utc_now()).replace("+00:00", "Z")
    conn.execute(
        "INSERT INTO gpkg_contents (table_name, data_type, identifier, description, last_change) "
        "VALUES ('layer_styles', 'attributes', 'layer_styles', 'default styles of the layers', ?)",
        (now,),
    )
    geom_cols = dict(conn.execute("SELECT table_name, column_name FROM gpkg_geometry_columns").fetchall())
    conn.executemany(
        "INSERT INTO layer_styles (f_table_catalog, f_table_schema, f_table_name, f_geometry_column, "
        "styleName, styleQML, styleSLD, useAsDefault, description, owner, ui, update_time) "
        "VALUES ('', '', ?, ?, ?, ?, '', 1, ?, 'mapper', '', ?)",
        [(s.table, geom_cols.get(s.table, "geom"), s.table, s.qml, s.description, now) for s in styles],
    )


__all__ = [
    "LAYER_STYLES_DDL",
    "LayerStyle",
    "band_colors",
    "text_color_on",
    "value_color",
    "write_layer_styles",
]
