"""Readings from GIS point layers (GeoJSON, GeoPackage, Shapefile) and projected CSVs.

The reference for every input is the sample's own CSV import: the same readings written by
geopandas (the layers) or the csv module, with coordinates transformed by pyproj directly in the
test (PROJ, the reference implementation of the EPSG transformations), must land at the same
site positions within 1 mm (the issue asks for 1 cm) with the values exactly as in the CSV.
"""

from __future__ import annotations

import csv
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
from pyproj import Transformer
from shapely.geometry import LineString, Point

from mapper.cli.main import main
from mapper.survey.store import Survey
from tests.cli.test_main_job import digest
from tests.conftest import SAMPLES

HALL, HALL_CSV = SAMPLES / "north_hall.toml", SAMPLES / "north_hall_readings.csv"
YARD, YARD_CSV = SAMPLES / "east_yard.geojson", SAMPLES / "east_yard_readings.csv"
#: Position agreement asked for: 1 mm (the issue's acceptance is 1 cm).
TOL_M = 1e-3


def run(capsys, argv):
    code = main([str(a) for a in argv])
    captured = capsys.readouterr()
    return code, captured.err


def one_line_error(code, err, *words):
    assert code == 2
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    for word in words:
        assert word in lines[0], lines[0]


def new_survey(capsys, path: Path, site: Path) -> Path:
    spacing = "2" if site == HALL else "8"  # the hall's readings name points of its 2 m plan
    code, err = run(capsys, ["new", path, "--site", site, "--spacing", spacing])
    assert code == 0, err
    return path


def imported(capsys, tmp_path: Path, name: str, site: Path, readings: Path, *options) -> list:
    survey = new_survey(capsys, tmp_path / f"{name}.survey", site)
    code, err = run(capsys, ["import", survey, readings, *options])
    assert code == 0, err
    with Survey.open(survey) as s:
        return s.readings(kind=None)


def same_readings(got: list, want: list) -> None:
    assert len(got) == len(want)
    xy_got = np.array([(r.x, r.y) for r in got])
    xy_want = np.array([(r.x, r.y) for r in want])
    assert np.abs(xy_got - xy_want).max() < TOL_M
    for g, w in zip(got, want, strict=True):
        assert (g.entered_value, g.entered_unit, g.value_v_per_m) == (w.entered_value, w.entered_unit, w.value_v_per_m)
        assert (g.time, g.kind, g.point, g.note, g.height_m) == (w.time, w.kind, w.point, w.note, w.height_m)


def csv_rows(path: Path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def frame_of(rows: list[dict], positions: tuple[np.ndarray, np.ndarray], crs: str | None, drop: tuple[str, ...]):
    """The rows as a point layer: numbers as numbers (``float`` of the cell text), text as text."""
    columns = {}
    for name in rows[0]:
        if name in drop:
            continue
        cells = [r[name] for r in rows]
        if name in ("value", "height_m"):
            columns[name] = [float(c) if c else None for c in cells]
        else:
            columns[name] = cells
    return gpd.GeoDataFrame(columns, geometry=gpd.points_from_xy(*positions), crs=crs)


@pytest.fixture(scope="module")
def hall_site():
    from mapper.site.site_file import load_site

    return load_site(HALL)


def hall_in(crs: str, hall_site, rows):
    """The hall's readings in ``crs``: site metres -> the site's CRS (its georeference) -> ``crs`` by pyproj."""
    x = np.array([float(r["x"]) for r in rows])
    y = np.array([float(r["y"]) for r in rows])
    e, n = hall_site.georef.forward(x, y)
    if crs == hall_site.georef.crs:
        return e, n
    return Transformer.from_crs(hall_site.georef.crs, crs, always_xy=True).transform(e, n)


@pytest.mark.parametrize(("suffix", "crs"), [(".geojson", "EPSG:4326"), (".gpkg", "EPSG:4326"),
                                             (".gpkg", "EPSG:32633"), (".shp", "EPSG:3857")])
def test_hall_layers_match_the_csv(capsys, tmp_path, hall_site, suffix, crs):
    rows = csv_rows(HALL_CSV)
    layer = frame_of(rows, hall_in(crs, hall_site, rows), crs, drop=("x", "y"))
    path = tmp_path / f"readings{suffix}"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the Shapefile driver notes its field-width limits
        layer.to_file(path)
    want = imported(capsys, tmp_path, "csv", HALL, HALL_CSV)
    same_readings(imported(capsys, tmp_path, "layer", HALL, path), want)


def test_yard_geojson_and_utm_gpkg_match_the_lonlat_csv(capsys, tmp_path):
    rows = csv_rows(YARD_CSV)
    lon = np.array([float(r["lon"]) for r in rows])
    lat = np.array([float(r["lat"]) for r in rows])
    frame_of(rows, (lon, lat), "EPSG:4326", ("lon", "lat")).to_file(tmp_path / "yard.geojson")
    e, n = Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True).transform(lon, lat)
    frame_of(rows, (e, n), "EPSG:32633", ("lon", "lat")).to_file(tmp_path / "yard.gpkg", layer="readings")
    want = imported(capsys, tmp_path, "csv", YARD, YARD_CSV)
    same_readings(imported(capsys, tmp_path, "json", YARD, tmp_path / "yard.geojson"), want)
    same_readings(imported(capsys, tmp_path, "gpkg", YARD, tmp_path / "yard.gpkg"), want)


def write_csv(path: Path, header: list[str], rows: list[list]) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(header)
        writer.writerows(rows)
    return path


@pytest.mark.parametrize("names", [("easting", "northing"), ("E", "N"), ("x", "y"), ("Easting", "NORTHING")])
def test_projected_csv_with_crs_matches_the_lonlat_csv(capsys, tmp_path, names):
    rows = csv_rows(YARD_CSV)
    lon = np.array([float(r["lon"]) for r in rows])
    lat = np.array([float(r["lat"]) for r in rows])
    e, n = Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True).transform(lon, lat)
    rest = [k for k in rows[0] if k not in ("lon", "lat")]
    path = write_csv(tmp_path / "utm.csv", [*names, *rest],
                     [[f"{a:.4f}", f"{b:.4f}", *(r[k] for k in rest)] for a, b, r in zip(e, n, rows, strict=True)])
    want = imported(capsys, tmp_path, "csv", YARD, YARD_CSV)
    same_readings(imported(capsys, tmp_path, "utm", YARD, path, "--crs", "EPSG:32633"), want)


def test_hall_projected_csv_in_its_crs(capsys, tmp_path, hall_site):
    rows = csv_rows(HALL_CSV)
    e, n = hall_in("EPSG:32633", hall_site, rows)
    rest = list(rows[0])  # x,y (site metres) stay beside E,N: with --crs the projected pair counts
    path = write_csv(tmp_path / "en.csv", ["E", "N", *rest],
                     [[f"{a:.4f}", f"{b:.4f}", *(r[k] for k in rest)] for a, b, r in zip(e, n, rows, strict=True)])
    want = imported(capsys, tmp_path, "csv", HALL, HALL_CSV)
    same_readings(imported(capsys, tmp_path, "en", HALL, path, "--crs", "EPSG:32633"), want)


@pytest.mark.parametrize("names", [("longitude", "latitude"), ("Long", "Lat"), ("LON", "LAT")])
def test_lonlat_header_spellings(capsys, tmp_path, names):
    text = YARD_CSV.read_text(encoding="utf-8").splitlines()
    header = text[0].replace("lon", names[0]).replace("lat", names[1])
    path = tmp_path / "spelled.csv"
    path.write_text("\n".join([header, *text[1:]]) + "\n", encoding="utf-8")
    want = imported(capsys, tmp_path, "csv", YARD, YARD_CSV)
    same_readings(imported(capsys, tmp_path, "spelled", YARD, path), want)


def test_site_xy_in_capitals(capsys, tmp_path):
    text = HALL_CSV.read_text(encoding="utf-8").splitlines()
    path = tmp_path / "caps.csv"
    path.write_text("\n".join([text[0].replace(",x,y,", ",X,Y,"), *text[1:]]) + "\n", encoding="utf-8")
    want = imported(capsys, tmp_path, "csv", HALL, HALL_CSV)
    same_readings(imported(capsys, tmp_path, "caps", HALL, path), want)


@pytest.mark.parametrize(("header", "words"), [
    ("lng,lat,value,unit", ["lng,lat are not a pair", "longitude,latitude", "easting,northing", "x,y"]),
    ("pos_a,pos_b,value,unit", ["no position columns", "accepted: x,y"]),
    ("easting,northing,value,unit", ["--crs EPSG:NNNN"]),
    ("x,X,value,unit", ["name the same position"]),
])
def test_unknown_position_header_is_one_line_at_line_1(capsys, tmp_path, header, words):
    survey = new_survey(capsys, tmp_path / "h.survey", YARD)
    path = tmp_path / "odd.csv"
    path.write_text(f"{header}\n13.7532,51.0481,5,V/m\n", encoding="utf-8")
    before = digest(survey)
    code, err = run(capsys, ["import", survey, path])
    one_line_error(code, err, "odd.csv:1", *words)
    assert digest(survey) == before


def test_lonlat_with_a_projected_crs_is_refused(capsys, tmp_path):
    survey = new_survey(capsys, tmp_path / "h.survey", YARD)
    code, err = run(capsys, ["import", survey, YARD_CSV, "--crs", "EPSG:32633"])
    one_line_error(code, err, "east_yard_readings.csv:1", "degrees", "projected")


def bad_geojson(tmp_path: Path, geometry) -> Path:
    rows = csv_rows(YARD_CSV)[:3]
    points = [Point(float(r["lon"]), float(r["lat"])) for r in rows]
    points[1] = geometry
    frame = gpd.GeoDataFrame({"value": [float(r["value"]) for r in rows], "unit": [r["unit"] for r in rows],
                              "time": [r["time"] for r in rows]}, geometry=points, crs="EPSG:4326")
    path = tmp_path / "bad.geojson"
    frame.to_file(path)
    return path


@pytest.mark.parametrize(("geometry", "words"), [
    (None, "no geometry"),
    (LineString([(13.7532, 51.0480), (13.7533, 51.0481)]), "LineString, not a point"),
])
def test_bad_geometry_names_the_feature_and_leaves_the_survey_alone(capsys, tmp_path, geometry, words):
    survey = new_survey(capsys, tmp_path / "y.survey", YARD)
    path = bad_geojson(tmp_path, geometry)
    before = digest(survey)
    code, err = run(capsys, ["import", survey, path])
    one_line_error(code, err, "bad.geojson: feature 1: geometry", words)
    assert digest(survey) == before
    code, err = run(capsys, ["import", survey, path, "--skip-bad"])
    assert code == 0, err
    assert "1 bad features not imported" in err
    rejected = csv_rows(tmp_path / "bad.rejected.csv")
    assert [r["feature"] for r in rejected] == ["1"] and words in rejected[0]["reason"]
    with Survey.open(survey) as s:
        assert len(s.readings(kind=None)) == 2


def test_bad_value_in_a_layer_uses_the_csv_checks(capsys, tmp_path):
    rows = csv_rows(YARD_CSV)[:2]
    frame = gpd.GeoDataFrame({"value": ["-977", "abc"], "unit": ["V/m", "V/m"]},
                             geometry=[Point(float(r["lon"]), float(r["lat"])) for r in rows], crs="EPSG:4326")
    frame.to_file(tmp_path / "v.gpkg", layer="readings")
    survey = new_survey(capsys, tmp_path / "y.survey", YARD)
    before = digest(survey)
    code, err = run(capsys, ["import", survey, tmp_path / "v.gpkg"])
    one_line_error(code, err, "v.gpkg: layer 'readings': feature 2: value", "not a field value")
    assert digest(survey) == before


def test_swapped_lonlat_layer_gets_the_hint(capsys, tmp_path):
    rows = csv_rows(YARD_CSV)[:2]
    frame = gpd.GeoDataFrame({"value": [1.0, 2.0], "unit": ["V/m", "V/m"]},
                             geometry=[Point(float(r["lat"]), float(r["lon"])) for r in rows], crs="EPSG:4326")
    frame.to_file(tmp_path / "swapped.geojson")
    survey = new_survey(capsys, tmp_path / "y.survey", YARD)
    code, err = run(capsys, ["import", survey, tmp_path / "swapped.geojson"])
    one_line_error(code, err, "feature 0: geometry", "outside the site outline", "did you swap lon and lat?")


def test_layer_without_crs(capsys, tmp_path, box_site):
    frame = gpd.GeoDataFrame({"value": [5.0, 7.0], "unit": ["V/m", "V/m"]}, geometry=[Point(1, 1), Point(9.5, 5)])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # GDAL notes the missing CRS
        frame.to_file(tmp_path / "local.gpkg", layer="readings")
    # a local site: the layer is site metres
    got = imported(capsys, tmp_path, "box", box_site, tmp_path / "local.gpkg")
    assert [(r.x, r.y, r.entered_value) for r in got] == [(1.0, 1.0, 5.0), (9.5, 5.0, 7.0)]
    # a georeferenced site: a one-line error, the survey untouched
    survey = new_survey(capsys, tmp_path / "hall.survey", HALL)
    before = digest(survey)
    code, err = run(capsys, ["import", survey, tmp_path / "local.gpkg"])
    one_line_error(code, err, "local.gpkg: layer 'readings'", "no CRS", "--crs")
    assert digest(survey) == before


def test_several_layers_need_layer(capsys, tmp_path, box_site):
    for name in ("morning", "afternoon"):
        frame = gpd.GeoDataFrame({"value": [5.0], "unit": ["V/m"]}, geometry=[Point(1, 1)])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            frame.to_file(tmp_path / "two.gpkg", layer=name)
    survey = new_survey(capsys, tmp_path / "box.survey", box_site)
    code, err = run(capsys, ["import", survey, tmp_path / "two.gpkg"])
    one_line_error(code, err, "2 layers", "--layer NAME", "morning", "afternoon")
    code, err = run(capsys, ["import", survey, tmp_path / "two.gpkg", "--layer", "lunch"])
    one_line_error(code, err, "no layer 'lunch'")
    code, err = run(capsys, ["import", survey, tmp_path / "two.gpkg", "--layer", "afternoon"])
    assert code == 0, err


@pytest.mark.parametrize("suffix", [".gpkg", ".shp", ".geojson"])
def test_times_stored_as_datetimes(capsys, tmp_path, suffix):
    # a GIS writes a time as a DATETIME field (GeoPackage, GeoJSON) or as GDAL's text form of one
    # (a Shapefile has no date-time type): both read as the CSV's ISO 8601 times
    import pandas as pd

    rows = csv_rows(YARD_CSV)
    frame = frame_of(rows, ([float(r["lon"]) for r in rows], [float(r["lat"]) for r in rows]), "EPSG:4326",
                     ("lon", "lat"))
    frame["time"] = pd.to_datetime(frame["time"], utc=True)
    path = tmp_path / f"timed{suffix}"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the Shapefile driver notes it writes the times as text
        frame.to_file(path)
    want = imported(capsys, tmp_path, "csv", YARD, YARD_CSV)
    same_readings(imported(capsys, tmp_path, "timed", YARD, path), want)


def test_layer_in_mappers_local_grid_is_site_metres(capsys, tmp_path, box_site):
    from pyproj import CRS

    from mapper.site.georef import LOCAL_CRS_WKT

    frame = gpd.GeoDataFrame({"value": [5.0], "unit": ["V/m"]}, geometry=[Point(2.5, 3.5)],
                             crs=CRS.from_wkt(LOCAL_CRS_WKT))
    frame.to_file(tmp_path / "grid.gpkg", layer="readings")
    got = imported(capsys, tmp_path, "box", box_site, tmp_path / "grid.gpkg")
    assert [(r.x, r.y) for r in got] == [(2.5, 3.5)]
