"""The hand-over opened in the open-source desktop GIS, headless, through its own Python bindings.

Debian packages the bindings as ``python3-qgis`` for the system Python, so the check runs in a
subprocess (``/usr/bin/python3 tests/export/qgis_check.py``) with ``QT_QPA_PLATFORM=offscreen``;
it is skipped, with the reason printed, when that Python cannot import ``qgis.core``.
"""

from __future__ import annotations

import json
import os
import sqlite3
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from mapper.export.compare_gpkg import PROJECT_ORDER as COMPARE_ORDER
from mapper.export.gpkg import PROJECT_ORDER

SYSTEM_PYTHON = Path("/usr/bin/python3")
SCRIPT = Path(__file__).with_name("qgis_check.py")


def _env() -> dict:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTHON", "VIRTUAL_ENV"))}
    env["QT_QPA_PLATFORM"] = "offscreen"
    return env


@pytest.fixture(scope="module")
def qgis_available():
    if not SYSTEM_PYTHON.exists():
        reason = f"{SYSTEM_PYTHON} not found; install python3-qgis to run the desktop GIS check"
        print(reason)
        pytest.skip(reason)
    probe = subprocess.run([str(SYSTEM_PYTHON), "-c", "import qgis.core"], capture_output=True, text=True,
                           env=_env(), timeout=120)
    if probe.returncode != 0:
        reason = (f"{SYSTEM_PYTHON} cannot import qgis.core ({probe.stderr.strip().splitlines()[-1:]}); "
                  "install python3-qgis qgis-providers to run the desktop GIS check")
        print(reason)
        pytest.skip(reason)


def _check(gpkg: Path, tif: Path | None, png: Path) -> dict:
    run = subprocess.run([str(SYSTEM_PYTHON), str(SCRIPT), str(gpkg), str(tif or ""), str(png)],
                         capture_output=True, text=True, env=_env(), timeout=600)
    assert run.returncode == 0, run.stderr[-2000:]
    return json.loads(run.stdout.strip().splitlines()[-1])


def _stored(gpkg: Path) -> dict[str, ET.Element]:
    conn = sqlite3.connect(gpkg)
    try:
        rows = conn.execute("SELECT f_table_name, styleQML FROM layer_styles").fetchall()
    finally:
        conn.close()
    return {t: ET.fromstring(q.split("\n", 1)[1]) for t, q in rows}


def _assert_styles_applied(seen: dict, stored: dict[str, ET.Element]) -> None:
    for name, info in seen.items():
        assert info["valid"], name
        if name not in stored:
            continue
        qml = stored[name]
        renderer = qml.find("renderer-v2")
        if renderer is not None:
            # The renderer type the stored style names; a layer without its style would get the
            # GIS's default single symbol and no labels.
            assert info["renderer"] == renderer.get("type"), name
            assert info["labels"] == (qml.get("labelsEnabled") == "1"), name
        else:
            # A single-band float raster opens as grey without a style.
            assert info["renderer"] == "singlebandpseudocolor", name


def test_survey_geopackage_in_the_desktop_gis(qgis_available, hall, tmp_path):
    gpkg, tif = hall["result"].gpkg.path, hall["result"].tif
    png = tmp_path / "map.png"
    seen = _check(gpkg, tif, png)
    stored = _stored(gpkg)
    layers = seen["layers"]
    assert {"assets", "asset_lines", "asset_points", "hotspots", "bands", "field_estimate"} <= set(layers)
    _assert_styles_applied(layers, stored)
    styled_by_kind = {n: i["renderer"] for n, i in layers.items() if n in stored}
    assert styled_by_kind["bands"] == "categorizedSymbol" and styled_by_kind["readings"] == "graduatedSymbol"
    assert layers["asset_lines"]["labels"] and layers["asset_lines"]["features"] == 2  # belt 1, belt 2
    assert layers["field_estimate"]["unit_nodata"] < -1e38
    # The GeoTIFF opens with its .qml: single-band pseudocolour on band 1, 15 discrete classes.
    assert seen["tif"] == {**seen["tif"], "valid": True, "renderer": "singlebandpseudocolor", "band": 1,
                           "classes": 15, "ramp_type": 1}  # QgsColorRampShader.Discrete == 1
    # The stored project: every layer loads, in our order, with its style.
    assert seen["project_read"] is True
    assert seen["project_order"] == [n for n in PROJECT_ORDER if n in stored]
    assert all(seen["project_valid"].values())
    for name, renderer in seen["project_renderers"].items():
        assert renderer == layers[name]["renderer"], name
    # Rendering the project: the labelling engine placed every hotspot id (the image holds what
    # it placed), beside the probable-exceedance labels.
    ids = sorted({h.id for h in (*hall["products"].findings.hotspots, *hall["products"].findings.zone_hotspots)})
    assert ids and sorted(set(seen["labels_drawn"]["hotspots"])) == ids
    assert seen["labels_drawn"].get("probable_exceedance")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_comparison_geopackage_in_the_desktop_gis(qgis_available, comparison, tmp_path):
    gpkg = comparison["path"]
    seen = _check(gpkg, None, tmp_path / "diff.png")
    stored = _stored(gpkg)
    assert set(stored) >= set(COMPARE_ORDER)
    _assert_styles_applied(seen["layers"], stored)
    assert seen["layers"]["difference"]["renderer"] == "singlebandpseudocolor"
    assert seen["project_order"] == list(COMPARE_ORDER) and all(seen["project_valid"].values())
    after = [h.id for h in comparison["cmp"].hotspots_after]
    assert sorted(seen["labels_drawn"].get("hotspots_after", [])) == sorted(after)
