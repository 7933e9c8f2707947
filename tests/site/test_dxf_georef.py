"""A DXF site given its CRS (``--site-crs``) or control points (``--control-points``).

References: the positions are transformed by pyproj (PROJ) directly in the tests; the US survey
foot is 1200/3937 m (its definition, NIST Handbook 44 appendix C).
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
from pyproj import Transformer
from shapely.geometry import Polygon

from mapper.cli.main import main
from mapper.survey.store import Survey
from tests.cli.test_main_job import digest
from tests.readings.test_import_gis import one_line_error, run

#: A corner near the outdoor sample (UTM zone 33N, EPSG:32633), metres.
E0, N0 = 411_234.6, 5_655_321.8


def dxf(path: Path, x0: float, y0: float, width: float, depth: float) -> Path:
    """A floor plan written by GDAL's DXF driver (no CRS): one closed outline on layer WALLS."""
    walls = Polygon([(x0, y0), (x0 + width, y0), (x0 + width, y0 + depth), (x0, y0 + depth)]).exterior
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # GDAL notes that the drawing has no CRS
        gpd.GeoDataFrame({"Layer": ["WALLS"]}, geometry=[walls]).to_file(path, driver="DXF")
    return path


def lonlat_csv(path: Path, crs: str, points) -> Path:
    to_ll = Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
    lines = ["lon,lat,value,unit"]
    for k, (e, n) in enumerate(points):
        lon, lat = to_ll.transform(e, n)
        lines.append(f"{lon:.10f},{lat:.10f},{k + 1},V/m")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_site_crs_places_the_drawing_in_that_crs(capsys, tmp_path):
    plan = dxf(tmp_path / "yard.dxf", E0, N0, 30, 20)
    survey = tmp_path / "yard.survey"
    code = main(["new", str(survey), "--site", str(plan), "--site-crs", "EPSG:32633", "--role", "WALLS=outline",
                 "--spacing", "5"])
    out = capsys.readouterr().out
    assert code == 0 and "georeference: EPSG:32633" in out, out
    # readings given in lon/lat (pyproj from the drawing's own coordinates) land where the drawing has them
    at = [(E0 + 5.25, N0 + 7.5), (E0 + 29.0, N0 + 19.0)]
    readings = lonlat_csv(tmp_path / "r.csv", "EPSG:32633", at)
    code, err = run(capsys, ["import", survey, readings])
    assert code == 0, err
    with Survey.open(survey) as s:
        got = np.array([(r.x, r.y) for r in s.readings()])
        assert s.site.area_m2 == pytest.approx(600.0)
        g = s.site.georef
        assert (g.a, g.b) == (1.0, 0.0)  # identity: drawing units are the CRS's metres
    want = np.array(at) - [math.floor(E0), math.floor(N0)]
    assert np.abs(got - want).max() < 1e-3


def test_site_crs_in_us_survey_feet(capsys, tmp_path):
    # EPSG:2263, NAD83 / New York Long Island (ftUS): a 100 ft x 60 ft hall
    e0, n0 = 987_000.0, 210_000.0
    plan = dxf(tmp_path / "hall.dxf", e0, n0, 100, 60)
    survey = tmp_path / "hall.survey"
    code = main(["new", str(survey), "--site", str(plan), "--site-crs", "EPSG:2263", "--role", "WALLS=outline"])
    assert code == 0, capsys.readouterr().err
    foot = 1200 / 3937  # the US survey foot, metres (its definition)
    with Survey.open(survey) as s:
        assert s.site.area_m2 == pytest.approx(100 * 60 * foot**2, rel=1e-9)
        e, n = s.site.georef.forward(30 * foot, 20 * foot)  # site metres -> the CRS's feet
    assert (float(e), float(n)) == pytest.approx((e0 + 30, n0 + 20), abs=1e-6)


def test_control_points_fit_the_drawing(capsys, tmp_path):
    # a drawing in millimetres, turned 30 degrees from grid north on the ground
    plan = dxf(tmp_path / "plan.dxf", 0, 0, 30_000, 20_000)
    theta = math.radians(30)

    def ground(x_m, y_m):
        return (E0 + math.cos(theta) * x_m - math.sin(theta) * y_m, N0 + math.sin(theta) * x_m + math.cos(theta) * y_m)

    to_ll = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)
    rows = ["X,Y,Lon,Lat"]
    for x_mm, y_mm in [(0, 0), (30_000, 0), (30_000, 20_000), (0, 20_000)]:
        lon, lat = to_ll.transform(*ground(x_mm / 1000, y_mm / 1000))
        rows.append(f"{x_mm},{y_mm},{lon:.10f},{lat:.10f}")
    points = tmp_path / "cp.csv"
    points.write_text("\n".join(rows) + "\n", encoding="utf-8")
    survey = tmp_path / "plan.survey"
    code = main(["new", str(survey), "--site", str(plan), "--site-units", "mm", "--control-points", str(points),
                 "--role", "WALLS=outline", "--spacing", "5"])
    out = capsys.readouterr().out
    assert code == 0 and "georeference: EPSG:32633" in out, out
    with Survey.open(survey) as s:
        g = s.site.georef
    assert g.rotation_deg == pytest.approx(30.0, abs=1e-5)
    assert g.scale == pytest.approx(1.0, abs=1e-6)
    assert g.rms_m < 1e-3
    code, err = run(capsys, ["import", survey, lonlat_csv(tmp_path / "r.csv", "EPSG:32633", [ground(12.5, 7.25)])])
    assert code == 0, err
    with Survey.open(survey) as s:
        (r,) = s.readings()
    assert math.hypot(r.x - 12.5, r.y - 7.25) < 1e-3


@pytest.mark.parametrize(("options", "words"), [
    (["--site-crs", "EPSG:4326"], ["--site-crs", "not a projected CRS"]),
    (["--site-crs", "EPSG:999999"], ["--site-crs", "unknown CRS"]),
    (["--site-crs", "EPSG:32633", "--site-units", "mm"], ["--site-units", "CRS's units"]),
    (["--site-crs", "EPSG:32633", "--control-points", "cp.csv"], ["not both"]),
    (["--control-points", "cp.csv"], ["cp.csv:3: lat", "not on the Earth"]),
])
def test_bad_georeference_options_are_one_line(capsys, tmp_path, options, words):
    plan = dxf(tmp_path / "plan.dxf", 0, 0, 30, 20)
    (tmp_path / "cp.csv").write_text("x,y,lon,lat\n0,0,13.75,51.05\n30,0,51.05,113.75\n", encoding="utf-8")
    survey = tmp_path / "plan.survey"
    options = [str(tmp_path / o) if o == "cp.csv" else o for o in options]
    code, err = run(capsys, ["new", survey, "--site", plan, "--role", "WALLS=outline", *options])
    one_line_error(code, err, *words)
    assert not survey.exists()


def test_site_crs_with_a_toml_site_is_refused(capsys, tmp_path, box_site):
    code, err = run(capsys, ["new", tmp_path / "b.survey", "--site", box_site, "--site-crs", "EPSG:32633"])
    one_line_error(code, err, "box.toml", "--site-crs", "[[control_point]]")


def test_a_refused_import_into_a_dxf_site_leaves_it_alone(capsys, tmp_path):
    plan = dxf(tmp_path / "yard.dxf", E0, N0, 30, 20)
    survey = tmp_path / "yard.survey"
    assert main(["new", str(survey), "--site", str(plan), "--site-crs", "EPSG:32633", "--role", "WALLS=outline"]) == 0
    capsys.readouterr()
    before = digest(survey)
    bad = lonlat_csv(tmp_path / "far.csv", "EPSG:32633", [(E0 + 5, N0 + 5), (E0 + 500, N0 + 5)])
    code, err = run(capsys, ["import", survey, bad])
    one_line_error(code, err, "far.csv:3: lon", "outside the site outline")
    assert digest(survey) == before
