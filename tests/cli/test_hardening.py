"""Regression cases from a fuzz and fault campaign (issue 15): input a user can produce that once
ended in an internal error, a hang, or a value changed on the way in.

Each case is the reproduction the campaign described. The rule checked is the one in
DEVELOPERS.md: a one-line ``mapper: error:`` naming file, line or key, exit 2, no traceback,
nothing written (the survey's SQL content unchanged, no new survey file); and a value a person
typed is stored as typed or refused by name.
"""

from __future__ import annotations

import csv
import sqlite3
import subprocess
import sys
import warnings
from pathlib import Path

import pytest

from mapper.cli.main import main
from mapper.survey.store import Survey
from tests.cli.test_bad_inputs import assert_one_line, run
from tests.cli.test_main_job import digest
from tests.conftest import ROOT, SAMPLES

OUTLINE = '[outline]\nwkt = "POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))"\n'
SITE_HEAD = '[site]\nname = "Box"\nunits = "m"\n'
CONTROL_POINTS = (
    "[[control_point]]\nx = {x0}\ny = 0.0\nlon = {lon0}\nlat = 51.0\n"
    "[[control_point]]\nx = 10.0\ny = 0.0\nlon = 13.00014\nlat = 51.0\n"
)


@pytest.fixture(autouse=True)
def _no_debug(monkeypatch):
    monkeypatch.delenv("MAPPER_DEBUG", raising=False)


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8", newline="")
    return path


# --------------------------------------------------------------------------- times near year 1 / 9999
TIMES = [
    ("0001-01-01T00:00:00+01:00", None),  # an hour before year 1 in UTC
    ("9999-12-31T23:59:59-01:00", None),  # an hour after year 9999 in UTC
    ("0001-01-01T00:00:00", "Europe/Berlin"),  # naive, read in a zone east of UTC
    ("9999-12-31T23:30:00", "America/New_York"),  # naive, read in a zone west of UTC
]


@pytest.mark.parametrize(("time", "tz"), TIMES)
def test_time_near_year_1_or_9999_is_refused_and_skipped(capsys, box_survey, tmp_path, time, tz):
    readings = write(tmp_path / "t.csv", f"x,y,value,unit,time\n1,1,5,V/m,{time}\n2,2,6,V/m,2026-11-17T08:00:00Z\n")
    tz_args = ["--tz", tz] if tz else []
    before = digest(box_survey)
    code, err = run(capsys, ["import", str(box_survey), str(readings), *tz_args])
    assert code == 2
    assert_one_line(code, err, "t.csv:2: time", time)
    assert digest(box_survey) == before
    code, err = run(capsys, ["import", str(box_survey), str(readings), "--skip-bad", *tz_args])
    assert code == 0, err
    with Survey.open(box_survey) as survey:
        assert [r.entered_value for r in survey.readings()] == [6.0]
    with (tmp_path / "t.rejected.csv").open(newline="") as handle:
        rejected = list(csv.DictReader(handle))
    assert [(r["line"], r["time"]) for r in rejected] == [("2", time)]


def test_cell_longer_than_the_csv_field_limit(capsys, box_survey, tmp_path):
    # Python's csv module refuses fields above csv.field_size_limit() (131072 by default, per the
    # Python library reference for the csv module)
    limit = csv.field_size_limit()
    readings = write(tmp_path / "big.csv", "x,y,value,unit,note\n1,1,5,V/m,ok\n1,1,5,V/m," + "a" * (limit + 1) + "\n")
    before = digest(box_survey)
    code, err = run(capsys, ["import", str(box_survey), str(readings)])
    assert code == 2
    assert_one_line(code, err, "big.csv:3", str(limit))
    assert digest(box_survey) == before


# --------------------------------------------------------------------------- site files
BAD_SITES = [
    # (site file text, words of the error line)
    ('[site]\nname = "Box"\nunits = ["m"]\n' + OUTLINE, ["s.toml:3: [site] 'units'", "unknown units"]),
    (SITE_HEAD + OUTLINE + '[asset]\nname = "a"\nwkt = "POINT (1 '
                           '1)"\n', ["s.toml:6", "[[asset]]", "single [asset] table"]),
    ('asset = "foo"\n' + SITE_HEAD + OUTLINE, ["s.toml:1", "'asset' must be [[asset]]"]),
    ('zone = "x"\n' + SITE_HEAD + OUTLINE, ["s.toml:1", "'zone' must be [[zone]]"]),
    ("asset = 5\n" + SITE_HEAD + OUTLINE, ["s.toml:1", "'asset' must be [[asset]]"]),
    ("control_point = 5\n" + SITE_HEAD + OUTLINE, ["s.toml:1", "'control_point' must be [[control_point]]"]),
    (SITE_HEAD + OUTLINE + CONTROL_POINTS.format(x0="0.0", lon0="nan"), ["s.toml:9: [[control_point]] #1 "
                                                                         "'lon'", "finite"]),
    (SITE_HEAD + OUTLINE + '[[asset]]\nname = "a"\nwkt = "POINT (1 1)"\nsensitive = '
                           'nan\n', ["s.toml:9: [[asset]] #1 'sensitive'", "finite"]),
    (SITE_HEAD + "origin = inf\n" + OUTLINE, ["s.toml:4: [site] 'origin'", "finite"]),
    (SITE_HEAD + OUTLINE + '[[asset]]\nname = "a"\nwkt = "POINT (inf '
                           '1)"\n', ["s.toml:8: [[asset]] #1 'wkt'", "finite"]),
    (SITE_HEAD + OUTLINE.replace("POLYGON ((0 0, 10 0, 10 6, 0 6, 0 "
                                 "0))", "POLYGON Z ((0 0 0, 10 0 0, 10 6 0, 0 6 0, 0 0 0))"),
     ["s.toml:5: [outline] 'wkt'", "Z coordinates"]),
    (SITE_HEAD + 'crs = 5\n' + OUTLINE, ["s.toml:4: [site] 'crs'", "must be text"]),
]


@pytest.mark.parametrize(("text", "words"), BAD_SITES, ids=[w[0] for _, w in BAD_SITES])
def test_bad_site_file_is_one_line_and_no_survey(capsys, tmp_path, text, words):
    site = write(tmp_path / "s.toml", text)
    code, err = run(capsys, ["new", str(tmp_path / "n.survey"), "--site", str(site)])
    assert code == 2
    assert_one_line(code, err, *words)
    assert not (tmp_path / "n.survey").exists()


def test_infinite_control_point_does_not_hang(tmp_path):
    # a control point at x = inf once made `mapper new` spin forever in LAPACK; a subprocess with a
    # time-out turns a hang into a failure (the bound is generous, not a speed target)
    site = write(tmp_path / "s.toml", SITE_HEAD + OUTLINE + CONTROL_POINTS.format(x0="inf", lon0="13.0"))
    result = subprocess.run([sys.executable, "-m", "mapper", "new", str(tmp_path / "n.survey"), "--site", str(site)],
                            capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert result.returncode == 2, result.stderr
    assert_one_line(result.returncode, result.stderr, "s.toml:7: [[control_point]] #1 'x'", "finite")
    assert not (tmp_path / "n.survey").exists()


GEOJSON_OUTLINE = ('{"type":"Feature","properties":{"kind":"outline"},"geometry":{"type":"Polygon","coordinates":'
                   '[[[13.0,51.0],[13.001,51.0],[13.001,51.001],[13.0,51.001],[13.0,51.0]]]}}')
BAD_GEOJSON = {
    "null_geometry.geojson": [GEOJSON_OUTLINE, '{"type":"Feature","properties":{"kind":"bench"},"geometry":null}'],
    # RFC 7946 section 3.1.6: a linear ring's first and last positions are the same; this one's are not
    "unclosed.geojson": [GEOJSON_OUTLINE, '{"type":"Feature","properties":{"kind":"bench"},"geometry":'
                         '{"type":"Polygon","coordinates":[[[13.0002,51.0002],[13.0004,51.0002],[13.0004,51.0004]]]}}'],
}


@pytest.mark.parametrize("name", sorted(BAD_GEOJSON))
def test_geojson_null_or_unclosed_geometry(capsys, tmp_path, name):
    path = write(tmp_path / name, '{"type":"FeatureCollection","features":[' + ",".join(BAD_GEOJSON[name]) + "]}")
    code, err = run(capsys, ["new", str(tmp_path / "n.survey"), "--site", str(path)])
    assert code == 2
    assert_one_line(code, err, name, "feature 1", "no geometry")
    assert not (tmp_path / "n.survey").exists()


def _dxf(path: Path, layers: list[str]) -> Path:
    """A floor plan written by GDAL's DXF driver: a closed 30 m x 20 m outline and one line per
    further layer."""
    import geopandas as gpd
    from shapely.geometry import LineString, Polygon

    walls = Polygon([(0, 0), (30, 0), (30, 20), (0, 20)]).exterior
    lines = [LineString([(2, 2 + i), (20, 2 + i)]) for i in range(len(layers) - 1)]
    frame = gpd.GeoDataFrame({"Layer": layers}, geometry=[walls, *lines])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # GDAL notes that the drawing has no CRS
        frame.to_file(path, driver="DXF")
    return path


def _insert_entity(path: Path, entity: str) -> Path:
    text = path.read_text(encoding="utf-8")
    at = text.index("  0\nENDSEC", text.index("ENTITIES"))
    path.write_text(text[:at] + entity + text[at:], encoding="utf-8")
    return path


# A SPLINE defined by fit points only (group codes 11/21/31, no 10/20/30 control points), as the
# AutoCAD DXF reference allows (SPLINE: 74 = number of fit points, 73 = number of control points).
FIT_POINT_SPLINE = "".join(
    f"{code:>3}\n{value}\n"
    for code, value in [(0, "SPLINE"), (5, "20010"), (100, "AcDbEntity"), (8, "BELTS"), (100, "AcDbSpline"),
                        (70, 8), (71, 3), (72, 0), (73, 0), (74, 3),
                        (11, 2), (21, 5), (31, 0), (11, 10), (21, 6), (31, 0), (11, 20), (21, 5), (31, 0)]
)


def test_dxf_fit_point_spline(capsys, tmp_path):
    path = _insert_entity(_dxf(tmp_path / "plan.dxf", ["WALLS", "BELTS"]), FIT_POINT_SPLINE)
    code, err = run(capsys, ["new", str(tmp_path / "n.survey"), "--site", str(path),
                             "--role", "WALLS=outline", "--role", "BELTS=conveyor"])
    assert code == 2
    assert_one_line(code, err, "plan.dxf", "SPLINE", "fit points", "line ")
    assert not (tmp_path / "n.survey").exists()


def test_dxf_malformed_content(capsys, tmp_path):
    path = _dxf(tmp_path / "plan.dxf", ["WALLS", "BELTS"])
    text = path.read_text(encoding="utf-8")
    write(path, text[: text.index("ENTITIES") + 200])  # cut inside the first entity
    code, err = run(capsys, ["new", str(tmp_path / "n.survey"), "--site", str(path), "--role", "WALLS=outline"])
    assert code == 2
    assert_one_line(code, err, "plan.dxf", "cannot be read at line")
    assert not (tmp_path / "n.survey").exists()


def test_dxf_non_ascii_layer_names(capsys, tmp_path):
    # GDAL writes UTF-8 text under a header that names code page ANSI_1252; read as written, the
    # layer is "Bänder" (UTF-8, as the DXF reference prescribes from AutoCAD 2007 on)
    path = _dxf(tmp_path / "plan.dxf", ["WALLS", "Bänder"])
    code, err = run(capsys, ["new", str(tmp_path / "n.survey"), "--site", str(path),
                             "--role", "WALLS=outline", "--role", "Förder=conveyor"])
    assert_one_line(code, err, "'Förder'", "layers: Bänder, WALLS")
    code, err = run(capsys, ["new", str(tmp_path / "n.survey"), "--site", str(path),
                             "--role", "WALLS=outline", "--role", "Bänder=conveyor"])
    assert code == 0, err
    with Survey.open(tmp_path / "n.survey") as survey:
        assert [a.kind for a in survey.site.assets] == ["conveyor"]


def test_three_d_vector_outline_makes_a_report(capsys, tmp_path):
    # a GeoPackage outline drawn with Z (all 0, as CAD and GIS programs often store a plan) is the
    # 2-D plan; the report that once failed on it is written
    import geopandas as gpd
    from shapely.geometry import Polygon

    path = tmp_path / "plan.gpkg"
    gpd.GeoDataFrame({"kind": ["outline"]}, geometry=[Polygon([(0, 0, 0), (10, 0, 0), (10, 6, 0), (0, 6, 0)])],
                     crs="EPSG:25832").to_file(path)
    survey = tmp_path / "z.survey"
    readings = write(tmp_path / "r.csv", "x,y,value,unit\n" + "".join(
        f"{x},{y},{(x * 37 + y * 11) % 50 + 5},V/m\n" for x in (1, 3, 5, 7, 9) for y in (1, 3, 5)))
    assert run(capsys, ["new", str(survey), "--site", str(path)])[0] == 0
    assert run(capsys, ["import", str(survey), str(readings)])[0] == 0
    code, err = run(capsys, ["report", str(survey), str(tmp_path / "z.pdf"), "--method", "idw"])
    assert code == 0, err
    assert (tmp_path / "z.pdf").read_bytes().rstrip().endswith(b"%%EOF")  # ISO 32000-1, 7.5.5


# --------------------------------------------------------------------------- damaged survey internals
DAMAGE = {
    "no_site_row": "DELETE FROM site",
    "bad_site_json": "UPDATE site SET json = '{not json'",
    "site_json_not_a_site": "UPDATE site SET json = '[]'",
    "negative_user_version": "PRAGMA user_version = -1",
}


@pytest.mark.parametrize("sql", DAMAGE.values(), ids=DAMAGE.keys())
@pytest.mark.parametrize("command", ["info", "import", "report"])
def test_hand_damaged_survey_is_called_damaged(capsys, box_survey, tmp_path, sql, command):
    conn = sqlite3.connect(box_survey)
    conn.execute(sql)
    conn.commit()
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn.close()
    before = box_survey.read_bytes()
    extra = {"info": [], "import": [str(write(tmp_path / "r.csv", "x,y,value,unit\n1,1,5,V/m\n"))],
             "report": [str(tmp_path / "r.pdf")]}[command]
    code, err = run(capsys, [command, str(box_survey), *extra])
    assert code == 2
    assert_one_line(code, err, str(box_survey), "damaged")
    assert box_survey.read_bytes() == before
    assert not (tmp_path / "r.pdf").exists()


# --------------------------------------------------------------------------- values changed on the way in
@pytest.fixture
def hall(tmp_path: Path) -> Path:
    """A survey of the georeferenced sample hall (EPSG:32633, near 13.734 E, 51.053 N)."""
    path = tmp_path / "hall.survey"
    assert main(["new", str(path), "--site", str(SAMPLES / "north_hall.toml")]) == 0
    return path


@pytest.mark.parametrize(("lonlat", "words"), [
    # WGS 84 (EPSG:4326): longitude -180..180, latitude -90..90 degrees; 373.75 is not 13.75
    ("373.75,51.0531", ["ll.csv:3: lon", "373.75", "-180..180"]),
    ("373.7339,51.0531", ["ll.csv:3: lon", "373.734", "-180..180"]),  # would wrap into the hall
    ("13.7339,91", ["ll.csv:3: lat", "91", "-90..90"]),
])
def test_lon_lat_out_of_range_refused_by_name(capsys, hall, tmp_path, lonlat, words):
    readings = write(tmp_path / "ll.csv", f"lon,lat,value,unit\n13.7339,51.0531,5,V/m\n{lonlat},5,V/m\n")
    before = digest(hall)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        code, err = run(capsys, ["import", str(hall), str(readings)])
    assert code == 2
    assert_one_line(code, err, *words)
    assert "nan" not in err
    assert [str(w.message) for w in caught] == []  # no numpy RuntimeWarning reaches the user
    assert digest(hall) == before


def test_notes_are_stored_as_written(capsys, box_survey, tmp_path):
    notes = ["two\nlines", "line\u2028separator", "  padded  ", "comma, \"quoted\""]
    with (tmp_path / "n.csv").open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)  # RFC 4180 quoting: line breaks and quotes inside quoted fields
        writer.writerow(["x", "y", "value", "unit", "note"])
        writer.writerows([[1, 1, 5 + i, "V/m", note] for i, note in enumerate(notes)])
    code, err = run(capsys, ["import", str(box_survey), str(tmp_path / "n.csv")])
    assert code == 0, err
    with Survey.open(box_survey) as survey:
        assert [r.note for r in survey.readings()] == notes


def test_nul_in_a_note_is_refused_with_the_reason(capsys, box_survey, tmp_path):
    readings = write(tmp_path / "nul.csv", "x,y,value,unit,note\n1,1,5,V/m,ok\n1,1,5,V/m,cut\x00here\n")
    before = digest(box_survey)
    code, err = run(capsys, ["import", str(box_survey), str(readings)])
    assert code == 2
    assert_one_line(code, err, "nul.csv:3: note", "NUL")
    assert digest(box_survey) == before


def test_error_lines_are_physical_lines(capsys, box_survey, tmp_path):
    # the quoted note of the first row spans lines 2-4 (RFC 4180, 2.6); the bad value is on line 5
    readings = write(tmp_path / "ml.csv", 'x,y,value,unit,note\n1,1,5,V/m,"one\ntwo\nthree"\n\n1,1,zz,V/m,x\n')
    code, err = run(capsys, ["import", str(box_survey), str(readings)])
    assert code == 2
    assert_one_line(code, err, "ml.csv:6: value")
    readings = write(tmp_path / "ml.csv", 'x,y,value,unit,note\n1,1,5,V/m,"one\ntwo\nthree"\n1,1,zz,V/m,x\n')
    code, err = run(capsys, ["import", str(box_survey), str(readings), "--skip-bad"])
    assert code == 0, err
    with (tmp_path / "ml.rejected.csv").open(newline="") as handle:
        assert [r["line"] for r in csv.DictReader(handle)] == ["5"]
