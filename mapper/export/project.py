"""A ready map stored inside the GeoPackage: a desktop GIS project in ``qgis_projects``.

The open-source desktop GIS keeps projects in a GeoPackage as rows of a ``qgis_projects`` table
(``name``, ``metadata`` JSON, ``content``: the zipped project, hex-encoded); its layer sources
are relative (``./FILE.gpkg|layername=LAYER``), so the map keeps working when the file is moved
or handed over under the same name. The project lists the layers in drawing order with the same
styles as ``layer_styles``, in the export CRS, zoomed to the site.
"""

from __future__ import annotations

import io
import json
import sqlite3
import xml.etree.ElementTree as ET
import zipfile
from collections.abc import Sequence
from dataclasses import dataclass

from mapper.export.crs import ExportCRS

#: Name of the stored project (open it with ``geopackage:FILE.gpkg?projectName=map``).
PROJECT_NAME = "map"
PROJECTS_DDL = "CREATE TABLE IF NOT EXISTS qgis_projects(name TEXT PRIMARY KEY, metadata BLOB, content BLOB)"
_GEOMETRY = {"Point": "Point", "MultiPoint": "Point", "LineString": "Line", "MultiLineString": "Line",
             "Polygon": "Polygon", "MultiPolygon": "Polygon"}


@dataclass(frozen=True)
class ProjectLayer:
    """One layer of the stored project.

    Attributes
    ----------
    table : str
        Table in the GeoPackage.
    qml : str
        Its style (a QML document of :mod:`mapper.export.styles`).
    geometry_type : str or None
        OGR geometry type of a feature layer (``MultiPolygon`` ...); ``None`` for a raster.
    visible : bool
        Checked in the layer tree when the project opens.
    """

    table: str
    qml: str
    geometry_type: str | None
    visible: bool = True


def _id(layer: ProjectLayer) -> str:
    """Layer id in the project: the table name and a fixed tag (ids are unique within a project)."""
    return f"{layer.table}_mapper_layer"


def _srs(parent: ET.Element, ecrs: ExportCRS) -> None:
    srs = ET.SubElement(parent, "spatialrefsys")
    ET.SubElement(srs, "wkt").text = ecrs.wkt
    code = ecrs.crs.to_authority()
    if code:
        ET.SubElement(srs, "authid").text = f"{code[0]}:{code[1]}"
    ET.SubElement(srs, "description").text = ecrs.crs.name


def _extent(parent: ET.Element, tag: str, bounds: Sequence[float]) -> ET.Element:
    ext = ET.SubElement(parent, tag)
    for name, value in zip(("xmin", "ymin", "xmax", "ymax"), bounds, strict=True):
        ET.SubElement(ext, name).text = repr(float(value))
    return ext


def project_xml(layers: Sequence[ProjectLayer], gpkg_name: str, ecrs: ExportCRS, bounds: Sequence[float],
                title: str) -> str:
    """The project document (``.qgs``) for layers of one GeoPackage, first layer drawn on top.

    Parameters
    ----------
    layers : sequence of ProjectLayer
        Top to bottom.
    gpkg_name : str
        File name of the GeoPackage (sources are ``./NAME``).
    ecrs : ExportCRS
        Project CRS (the export CRS).
    bounds : sequence of float
        ``xmin, ymin, xmax, ymax`` to open on, export CRS.
    title : str
        Project title.
    """
    root = ET.Element("qgis", {"projectname": title, "version": "3.22.0-mapper"})
    ET.SubElement(root, "homePath", {"path": ""})
    ET.SubElement(root, "title").text = title
    _srs(ET.SubElement(root, "projectCrs"), ecrs)
    tree = ET.SubElement(root, "layer-tree-group")
    ET.SubElement(ET.SubElement(tree, "customproperties"), "Option")

    def source(layer: ProjectLayer) -> tuple[str, str]:
        if layer.geometry_type is None:
            return f"GPKG:./{gpkg_name}:{layer.table}", "gdal"
        return f"./{gpkg_name}|layername={layer.table}", "ogr"

    for layer in layers:
        src, provider = source(layer)
        node = ET.SubElement(tree, "layer-tree-layer", {
            "id": _id(layer), "name": layer.table, "source": src, "providerKey": provider, "expanded": "0",
            "checked": "Qt::Checked" if layer.visible else "Qt::Unchecked"})
        ET.SubElement(ET.SubElement(node, "customproperties"), "Option")
    order = ET.SubElement(tree, "custom-order", {"enabled": "0"})
    for layer in layers:
        ET.SubElement(order, "item").text = _id(layer)
    project_layers = ET.SubElement(root, "projectlayers")
    for layer in layers:
        src, provider = source(layer)
        style = ET.fromstring(layer.qml.split("\n", 1)[1])
        attrs = {"styleCategories": "AllStyleCategories", "hasScaleBasedVisibilityFlag": "0",
                 "minScale": "0", "maxScale": "0"}
        if layer.geometry_type is None:
            attrs["type"] = "raster"
        else:
            attrs.update(type="vector", geometry=_GEOMETRY.get(layer.geometry_type, "Polygon"),
                         wkbType=layer.geometry_type, labelsEnabled=style.get("labelsEnabled", "0"))
        ml = ET.SubElement(project_layers, "maplayer", attrs)
        ET.SubElement(ml, "id").text = _id(layer)
        ET.SubElement(ml, "datasource").text = src
        ET.SubElement(ml, "layername").text = layer.table
        _srs(ET.SubElement(ml, "srs"), ecrs)
        prov = ET.SubElement(ml, "provider", {"encoding": "UTF-8"} if provider == "ogr" else {})
        prov.text = provider
        for child in style:
            if child.tag != "layerGeometryType":
                ml.append(child)
    lo = ET.SubElement(root, "layerorder")
    for layer in layers:
        ET.SubElement(lo, "layer", {"id": _id(layer)})
    canvas = ET.SubElement(root, "mapcanvas", {"name": "theMapCanvas", "annotationsVisible": "1"})
    ET.SubElement(canvas, "units").text = "meters"
    _extent(canvas, "extent", bounds)
    ET.SubElement(canvas, "rotation").text = "0"
    _srs(ET.SubElement(canvas, "destinationsrs"), ecrs)
    view = ET.SubElement(root, "ProjectViewSettings", {"UseProjectScales": "0", "rotation": "0"})
    default = ET.SubElement(view, "DefaultViewExtent", dict(zip(("xmin", "ymin", "xmax", "ymax"),
                                                                 (repr(float(b)) for b in bounds), strict=True)))
    _srs(default, ecrs)
    props = ET.SubElement(root, "properties")
    paths = ET.SubElement(props, "Paths")
    ET.SubElement(paths, "Absolute", {"type": "bool"}).text = "false"
    srs_props = ET.SubElement(props, "SpatialRefSys")
    ET.SubElement(srs_props, "ProjectionsEnabled", {"type": "int"}).text = "1"
    ET.indent(root)
    return "<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>\n" + ET.tostring(root, encoding="unicode")


def write_project(conn: sqlite3.Connection, layers: Sequence[ProjectLayer], gpkg_name: str, ecrs: ExportCRS,
                  bounds: Sequence[float], title: str, now_utc: str) -> None:
    """Store the project in ``qgis_projects`` of an open GeoPackage (the caller commits).

    Parameters
    ----------
    conn : sqlite3.Connection
        Open GeoPackage.
    layers, gpkg_name, ecrs, bounds, title
        As for :func:`project_xml`.
    now_utc : str
        Modification time, ``YYYY-MM-DDTHH:MM:SS...``.
    """
    doc = project_xml(layers, gpkg_name, ecrs, bounds, title)
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr(f"{PROJECT_NAME}.qgs", doc)
    meta = json.dumps({"last_modified_time": now_utc[:19], "last_modified_user": "mapper"})
    conn.execute(PROJECTS_DDL)
    conn.execute("INSERT OR REPLACE INTO qgis_projects (name, metadata, content) VALUES (?, ?, ?)",
                 (PROJECT_NAME, meta, buffer.getvalue().hex()))


__all__ = ["PROJECT_NAME", "ProjectLayer", "project_xml", "write_project"]
