"""OGC Styled Layer Descriptor (SLD 1.0.0, OGC 02-070) versions of our QML styles.

Tools that read SLD rather than QML get the same colours: the converter reads the small subset
of QML that :mod:`mapper.export.styles` writes (single, categorised and graduated symbol
renderers of simple fills, lines and markers, simple labels, and single-band pseudocolour
rasters) and writes the matching SLD rules. Sizes in millimetres become pixels of 0.28 mm, the
standard rendering pixel of SLD/SE.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

SLD = "http://www.opengis.net/sld"
OGC = "http://www.opengis.net/ogc"
XSI = "http://www.w3.org/2001/XMLSchema-instance"
#: Standard rendering pixel, mm (OGC 05-077r4 Symbology Encoding, 10.2).
PIXEL_MM = 0.28

ET.register_namespace("", SLD)
ET.register_namespace("ogc", OGC)
ET.register_namespace("xsi", XSI)


def _s(parent: ET.Element, tag: str, text: str | None = None, **attrs) -> ET.Element:
    el = ET.SubElement(parent, f"{{{SLD}}}{tag}", attrs)
    if text is not None:
        el.text = text
    return el


def _o(parent: ET.Element, tag: str, text: str | None = None) -> ET.Element:
    el = ET.SubElement(parent, f"{{{OGC}}}{tag}")
    if text is not None:
        el.text = text
    return el


def _hex_alpha(qcolor: str) -> tuple[str, float]:
    parts = [int(v) for v in qcolor.split(",")[:4]]
    r, g, b = parts[:3]
    a = parts[3] if len(parts) > 3 else 255
    return f"#{r:02x}{g:02x}{b:02x}", a / 255.0


def _px(mm: str) -> str:
    return f"{float(mm) / PIXEL_MM:.3g}"


def _param(parent: ET.Element, tag: str, name: str, value: str) -> None:
    _s(parent, tag if tag else "CssParameter", value, name=name)


def _stroke(parent: ET.Element, colour: str, width_mm: str, dashed: bool) -> None:
    stroke = _s(parent, "Stroke")
    hexc, alpha = _hex_alpha(colour)
    _param(stroke, "CssParameter", "stroke", hexc)
    _param(stroke, "CssParameter", "stroke-width", _px(width_mm))
    if alpha < 1:
        _param(stroke, "CssParameter", "stroke-opacity", f"{alpha:.3g}")
    if dashed:
        _param(stroke, "CssParameter", "stroke-dasharray", "8 4")


def _fill(parent: ET.Element, colour: str) -> None:
    fill = _s(parent, "Fill")
    hexc, alpha = _hex_alpha(colour)
    _param(fill, "CssParameter", "fill", hexc)
    _param(fill, "CssParameter", "fill-opacity", f"{alpha:.3g}")


def _symbolizer(rule: ET.Element, symbol: ET.Element) -> None:
    for layer in symbol.findall("layer"):
        props = {p.get("k"): p.get("v") for p in layer.findall("prop")}
        cls = layer.get("class")
        if cls == "SimpleFill":
            sym = _s(rule, "PolygonSymbolizer")
            if props.get("style") != "no":
                _fill(sym, props["color"])
            if props.get("outline_style") != "no":
                _stroke(sym, props["outline_color"], props.get("outline_width", "0.26"),
                        props.get("outline_style") == "dash")
        elif cls == "SimpleLine":
            sym = _s(rule, "LineSymbolizer")
            _stroke(sym, props["line_color"], props.get("line_width", "0.26"), props.get("line_style") == "dash")
        elif cls == "SimpleMarker":
            sym = _s(rule, "PointSymbolizer")
            graphic = _s(sym, "Graphic")
            mark = _s(graphic, "Mark")
            _s(mark, "WellKnownName", props.get("name", "circle"))
            if _hex_alpha(props["color"])[1] > 0:
                _fill(mark, props["color"])
            _stroke(mark, props["outline_color"], props.get("outline_width", "0.2"), False)
            _s(graphic, "Size", _px(props.get("size", "2")))


def _equal(rule: ET.Element, attr: str, value: str) -> None:
    flt = _o(rule, "Filter")
    eq = _o(flt, "PropertyIsEqualTo")
    _o(eq, "PropertyName", attr)
    _o(eq, "Literal", value)


def _range(rule: ET.Element, attr: str, lower: str, upper: str) -> None:
    flt = _o(rule, "Filter")
    both = _o(flt, "And")
    ge = _o(both, "PropertyIsGreaterThanOrEqualTo")
    _o(ge, "PropertyName", attr)
    _o(ge, "Literal", lower)
    lt = _o(both, "PropertyIsLessThan")
    _o(lt, "PropertyName", attr)
    _o(lt, "Literal", upper)


def _label_rule(fts: ET.Element, settings: ET.Element) -> None:
    text = settings.find("text-style")
    rule = _s(fts, "Rule")
    _s(rule, "Name", "labels")
    sym = _s(rule, "TextSymbolizer")
    label = _s(sym, "Label")
    _o(label, "PropertyName", text.get("fieldName"))
    font = _s(sym, "Font")
    _param(font, "CssParameter", "font-family", text.get("fontFamily", "Sans Serif"))
    _param(font, "CssParameter", "font-size", f"{float(text.get('fontSize', '8')) / 0.75:.3g}")
    _param(font, "CssParameter", "font-weight", "bold" if text.get("fontWeight") == "75" else "normal")
    halo = _s(sym, "Halo")
    _s(halo, "Radius", "1.5")
    hfill = _s(halo, "Fill")
    _param(hfill, "CssParameter", "fill", "#ffffff")
    colour, _ = _hex_alpha(text.get("textColor", "0,0,0,255"))
    tfill = _s(sym, "Fill")
    _param(tfill, "CssParameter", "fill", colour)


def _document(name: str, title: str) -> tuple[ET.Element, ET.Element]:
    root = ET.Element(f"{{{SLD}}}StyledLayerDescriptor", {
        "version": "1.0.0",
        f"{{{XSI}}}schemaLocation": "http://www.opengis.net/sld "
                                    "http://schemas.opengis.net/sld/1.0.0/StyledLayerDescriptor.xsd",
    })
    layer = _s(root, "NamedLayer")
    _s(layer, "Name", name)
    style = _s(layer, "UserStyle")
    _s(style, "Name", name)
    _s(style, "Title", title)
    return root, _s(style, "FeatureTypeStyle")


def _text(root: ET.Element) -> str:
    ET.indent(root)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode")


def sld_from_qml(qml: str, name: str, title: str = "") -> str:
    """SLD 1.0.0 document matching one of our QML styles.

    Parameters
    ----------
    qml : str
        A QML document written by :mod:`mapper.export.styles`.
    name : str
        Layer name (``NamedLayer/Name``).
    title : str, optional
        Style title.
    """
    body = qml.split("\n", 1)[1] if qml.startswith("<!DOCTYPE") else qml
    q = ET.fromstring(body)
    root, fts = _document(name, title or name)
    raster = q.find("pipe/rasterrenderer")
    if raster is not None:
        _raster_rules(fts, raster)
        return _text(root)
    renderer = q.find("renderer-v2")
    kind = renderer.get("type")
    symbols = {s.get("name"): s for s in renderer.find("symbols")}
    if kind == "singleSymbol":
        rule = _s(fts, "Rule")
        _s(rule, "Name", name)
        _symbolizer(rule, symbols["0"])
    elif kind == "categorizedSymbol":
        attr = renderer.get("attr")
        for cat in renderer.find("categories"):
            rule = _s(fts, "Rule")
            _s(rule, "Name", cat.get("label") or cat.get("value"))
            _equal(rule, attr, cat.get("value"))
            _symbolizer(rule, symbols[cat.get("symbol")])
    elif kind == "graduatedSymbol":
        attr = renderer.get("attr")
        for rng in renderer.find("ranges"):
            rule = _s(fts, "Rule")
            _s(rule, "Name", rng.get("label"))
            _range(rule, attr, rng.get("lower"), rng.get("upper"))
            _symbolizer(rule, symbols[rng.get("symbol")])
    else:  # pragma: no cover - styles.py writes only the three renderers above
        raise ValueError(f"no SLD for renderer {kind!r}")
    settings = q.find("labeling/settings")
    if settings is not None:
        _label_rule(fts, settings)
    return _text(root)


def _raster_rules(fts: ET.Element, raster: ET.Element) -> None:
    shader = raster.find("rastershader/colorrampshader")
    rule = _s(fts, "Rule")
    _s(rule, "Name", "field")
    sym = _s(rule, "RasterSymbolizer")
    _s(sym, "Opacity", "1")
    channels = _s(sym, "ChannelSelection")
    gray = _s(channels, "GrayChannel")
    _s(gray, "SourceChannelName", raster.get("band", "1"))
    discrete = shader.get("colorRampType") == "DISCRETE"
    cmap = _s(sym, "ColorMap", type="intervals" if discrete else "ramp")
    for item in shader.findall("item"):
        value = item.get("value")
        # SLD intervals colour values below each entry's quantity; no infinity in SLD numbers.
        quantity = "3.4e38" if value == "inf" else value
        _s(cmap, "ColorMapEntry", color=item.get("color"), quantity=quantity, label=item.get("label", ""),
           opacity="1")


__all__ = ["sld_from_qml"]
