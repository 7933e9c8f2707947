"""Open a GeoPackage (and GeoTIFF) with the desktop GIS's Python bindings and report what it sees.

Run with the system Python that has ``qgis.core`` (Debian's ``python3-qgis``), headless:
``QT_QPA_PLATFORM=offscreen /usr/bin/python3 tests/export/qgis_check.py OUT.gpkg [OUT.tif] [PNG]``.
Prints one JSON document: per layer whether it loaded, its renderer type and whether its stored
style was applied; the stored project's layer order; the labels drawn when rendering the project
(or all layers) to ``PNG``. Exits 3 when ``qgis.core`` cannot be imported.
"""

from __future__ import annotations

import json
import os
import sqlite3
import sys
import tempfile
from pathlib import Path


def main(argv: list[str]) -> int:
    try:
        from qgis.core import (
            QgsApplication,
            QgsMapRendererParallelJob,
            QgsMapSettings,
            QgsProject,
            QgsRasterLayer,
            QgsVectorLayer,
        )
        from qgis.PyQt.QtCore import QSize
        from qgis.PyQt.QtGui import QColor
    except ImportError as exc:
        print(json.dumps({"skip": f"cannot import qgis.core: {exc}"}))
        return 3
    gpkg = Path(argv[0]).resolve()
    tif = Path(argv[1]) if len(argv) > 1 and argv[1] else None
    png = Path(argv[2]) if len(argv) > 2 else Path(tempfile.mkdtemp()) / "map.png"
    app = QgsApplication([], False)
    app.initQgis()
    out: dict = {"version": __import__("qgis.core", fromlist=["Qgis"]).Qgis.QGIS_VERSION, "layers": {}}
    conn = sqlite3.connect(gpkg)
    contents = conn.execute("SELECT table_name, data_type FROM gpkg_contents").fetchall()
    styled = {r[0] for r in conn.execute("SELECT f_table_name FROM layer_styles")}
    has_project = bool(conn.execute(
        "SELECT count(*) FROM sqlite_master WHERE name = 'qgis_projects'").fetchone()[0])
    conn.close()
    project = QgsProject.instance()
    layers = []
    if has_project:
        ok = project.read(f"geopackage:{gpkg}?projectName=map")
        out["project_read"] = bool(ok)
        root = project.layerTreeRoot()
        out["project_order"] = [n.name() for n in root.findLayers()]
        layers = [n.layer() for n in root.findLayers() if n.layer() is not None and n.isVisible()]
        out["project_valid"] = {n.name(): bool(n.layer() and n.layer().isValid()) for n in root.findLayers()}
        out["project_renderers"] = {n.name(): n.layer().renderer().type() for n in root.findLayers()
                                    if n.layer() is not None and n.layer().isValid()}
    for table, kind in contents:
        if kind == "features":
            layer = QgsVectorLayer(f"{gpkg}|layername={table}", table, "ogr")
            info = {"kind": kind, "valid": layer.isValid(), "features": layer.featureCount() if layer.isValid() else 0}
            if layer.isValid():
                info["renderer"] = layer.renderer().type()
                info["labels"] = bool(layer.labelsEnabled())
                info["geometry"] = layer.geometryType()
        elif kind in ("2d-gridded-coverage", "tiles"):
            layer = QgsRasterLayer(f"GPKG:{gpkg}:{table}", table, "gdal")
            info = {"kind": kind, "valid": layer.isValid()}
            if layer.isValid():
                info["renderer"] = layer.renderer().type()
                info["unit_nodata"] = layer.dataProvider().sourceNoDataValue(1)
        else:
            continue
        info["has_stored_style"] = table in styled
        out["layers"][table] = info
    if tif is not None:
        layer = QgsRasterLayer(str(tif), "tif", "gdal")
        out["tif"] = {"valid": layer.isValid(), "renderer": layer.renderer().type() if layer.isValid() else None,
                      "rotated": None}
        if layer.isValid():
            shader = layer.renderer().shader() if hasattr(layer.renderer(), "shader") else None
            ramp = shader.rasterShaderFunction() if shader else None
            out["tif"]["classes"] = len(ramp.colorRampItemList()) if ramp else 0
            out["tif"]["ramp_type"] = int(ramp.colorRampType()) if ramp else None
            out["tif"]["band"] = layer.renderer().band() if hasattr(layer.renderer(), "band") else None
    if not layers:
        order = ["hotspots", "probable_exceedance", "advice", "readings", "assets", "asset_lines", "zones",
                 "site", "contours", "bands", "field_estimate"]
        for name in order:
            if name in out["layers"] and out["layers"][name]["valid"]:
                if out["layers"][name]["kind"] == "features":
                    lyr = QgsVectorLayer(f"{gpkg}|layername={name}", name, "ogr")
                else:
                    lyr = QgsRasterLayer(f"GPKG:{gpkg}:{name}", name, "gdal")
                project.addMapLayer(lyr)
                layers.append(lyr)
    settings = QgsMapSettings()
    settings.setLayers(layers)
    settings.setDestinationCrs(layers[0].crs())
    extent = None
    for lyr in layers:
        if lyr.name() == "site" or extent is None:
            extent = lyr.extent()
    site = [lyr for lyr in layers if lyr.name() in ("site", "common_region")]
    if site:
        extent = site[0].extent()
    extent.scale(1.1)
    settings.setExtent(extent)
    settings.setOutputSize(QSize(1200, 900))
    settings.setBackgroundColor(QColor("white"))
    job = QgsMapRendererParallelJob(settings)
    job.start()
    job.waitForFinished()
    image = job.renderedImage()
    image.save(str(png), "PNG")
    results = job.takeLabelingResults()
    drawn: dict[str, list[str]] = {}
    if results is not None:
        for label in results.allLabels():
            name = project.mapLayer(label.layerID).name() if project.mapLayer(label.layerID) else label.layerID
            drawn.setdefault(name, []).append(label.labelText)
    out["labels_drawn"] = drawn
    out["png"] = str(png)
    print(json.dumps(out), flush=True)
    # Leave without tearing the GIS down: its exit with layers still alive can crash the process
    # after the report is out, which would hide a good result behind a signal.
    os._exit(0)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
