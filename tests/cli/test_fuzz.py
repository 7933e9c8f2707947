"""Property-based fuzzing of the two loaders a user feeds by hand: readings CSV and site files.

The property is the rule of DEVELOPERS.md for bad input, not a value: whatever the text, the
command ends with exit 0 or 2 (never 3, an internal error, never a traceback), and a refused
import leaves the survey file byte for byte as it was (a refused ``mapper new`` leaves no file).
Hypothesis (property-based testing; hypothesis.readthedocs.io) draws the inputs; the runs are
derandomized so every run tries the same examples.
"""

from __future__ import annotations

import contextlib
import csv
import io
import itertools
import shutil
import sqlite3
import warnings
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from mapper.cli.main import main
from tests.conftest import BOX_SITE

FUZZ = settings(max_examples=120, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow])

# --------------------------------------------------------------------------- building blocks
NUMBERS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-10**30, 10**30).map(str),
    st.sampled_from(["1", "5,5", "-0", "1e308", "1e309", "nan", "inf", "-inf", "0x10", "", " ", "1_0", "١٢"]),
)
TIMES = st.one_of(
    st.datetimes().map(lambda t: t.isoformat()),
    st.datetimes(timezones=st.timezones()).map(lambda t: t.isoformat()),
    st.sampled_from(["0001-01-01T00:00:00+01:00", "9999-12-31T23:59:59-01:00", "2026-11-17T07:30:00Z",
                     "2026-02-30T00:00:00", "yesterday", ""]),
)
TEXT = st.text(alphabet=st.characters(codec="utf-8"), max_size=12)
CELL = st.one_of(NUMBERS, TIMES, TEXT,
                 st.sampled_from(["V/m", "kV/m", "V/in", "kV/in", "V/cm", "field", "zero", "reference",
                                  "calibration", "A1", "meter1", "5 V/m", "125 V/in", '"', "\n", "\r\n", "\u2028"]))
COLUMNS = ["x", "y", "lon", "lat", "value", "unit", "time", "height_m", "note", "kind", "meter", "point"]
OPTIONAL = ["time", "height_m", "note", "kind", "meter", "point"]


def junk(draw, chance: float) -> bool:
    """True with about the given chance (a uniform draw, so not bent towards Hypothesis's simplest
    values, which would make every case junk or none)."""
    spread = (draw(st.integers(0, 1 << 20)) * 2654435761 + (1 << 19)) % (1 << 20)  # Knuth's multiplicative hash
    return spread / (1 << 20) < chance


GOOD_CELLS = {
    "x": st.floats(0, 10).map(lambda v: f"{v:.2f}"),
    "y": st.floats(0, 6).map(lambda v: f"{v:.2f}"),
    "lon": st.floats(13.00001, 13.00013).map(lambda v: f"{v:.6f}"),
    "lat": st.floats(51.00001, 51.00004).map(lambda v: f"{v:.6f}"),
    "value": st.floats(-500, 500).map(lambda v: f"{v:.3f}"),
    "unit": st.sampled_from(["V/m", "kV/m", "V/in", ""]),
    "time": TIMES,
    "height_m": st.floats(0, 3).map(lambda v: f"{v:.2f}"),
    "note": TEXT,
    "kind": st.sampled_from(["field", "zero", "reference", "calibration", ""]),
    "meter": st.sampled_from(["meter1", ""]),
    "point": st.sampled_from(["A1", "B2", ""]),
}


@st.composite
def readings_csv(draw) -> bytes:
    """A readings file that is mostly right (a usable header, rows of plausible cells) with some
    cells, the header or the layout drawn from the junk."""
    header = draw(st.sampled_from([["x", "y"], ["lon", "lat"]])) + ["value", "unit"]
    header += draw(st.lists(st.sampled_from(OPTIONAL), unique=True, max_size=len(OPTIONAL)))
    if junk(draw, 1 / 16):
        header = draw(st.lists(st.one_of(st.sampled_from(COLUMNS), TEXT), max_size=8))
    rows = []
    for _ in range(draw(st.integers(1, 6))):
        row = [draw(CELL) if junk(draw, 1 / 8) else draw(GOOD_CELLS.get(name, CELL)) for name in header]
        if junk(draw, 1 / 16):  # a short or long row
            row = row[: draw(st.integers(0, len(row)))] + draw(st.lists(CELL, max_size=2))
        rows.append(row)
    out = io.StringIO(newline="")
    if not junk(draw, 1 / 4):
        writer = csv.writer(out)  # well quoted (RFC 4180)
        writer.writerow(header)
        writer.writerows(rows)
    else:  # cells joined as they come: stray quotes, embedded separators and line breaks
        out.write("\n".join(",".join(r) for r in [header, *rows]))
    data = out.getvalue().encode("utf-8", "surrogatepass")
    return data + draw(st.binary(max_size=16)) if junk(draw, 1 / 16) else data


SECTIONS = ["[site]", "[outline]", "[[asset]]", "[[zone]]", "[[control_point]]", "[asset]", "[zone]"]
KEYS = ["name", "units", "crs", "timezone", "wkt", "kind", "sensitive", "walkable", "height_m", "limit",
        "x", "y", "lon", "lat", "asset", "zone", "control_point"]
WKT = st.one_of(
    st.sampled_from([
        "POLYGON ((0 0, 10 0, 10 6, 0 6, 0 "
        "0))", "POLYGON ((0 0, 10 0, 10 6, 0 6))", "POLYGON Z ((0 0 0, 1 0 0, 1 1 0, 0 0 0))",
        "POINT (1 1)", "POINT (inf 1)", "LINESTRING (1 1, 8 1)", "POLYGON ((0 0, 10 10, 10 0, 0 10, 0 0))",
        "POLYGON EMPTY", "MULTIPOLYGON (((0 0, 1 0, 1 1, 0 0)))", "GEOMETRYCOLLECTION (POINT (1 1))", "POLYGON ((",
    ]),
    st.builds(lambda a, b: f"POLYGON ((0 0, {a} 0, {a} {b}, 0 {b}, 0 0))", NUMBERS, NUMBERS),
)
TOML_VALUES = st.one_of(
    st.sampled_from(['["m"]', "nan", "inf", "5", '"foo"', "{}", "[{}]", '[{ x = 1 }]']),
    WKT.map(lambda w: f'"{w}"'),
    NUMBERS.filter(lambda t: t.strip() != "").map(lambda t: t.replace(",", ".")),
    st.sampled_from(["true", "false", '"false"', "nan", "inf", "-inf", '["m"]', "[1, 2]", "{}", '"m"', '"ft"',
                     '"EPSG:32633"', '"EPSG:4326"', '"Europe/Berlin"', '"Mars/Olympus"', '"125 V/in"', '""',
                     "1979-05-27T07:32:00Z"]),
    TEXT.map(lambda t: '"' + t.replace("\\", "\\\\").replace('"', '\\"') + '"'),
)


GOOD_TABLES = {
    "site": [("name", '"Box"'), ("units", '"m"'), ("crs", '"EPSG:32633"'), ("timezone", '"Europe/Berlin"')],
    "outline": [("wkt", '"POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))"')],
    "asset": [("name", '"belt"'), ("kind", '"conveyor"'), ("wkt", '"LINESTRING (1 1, 8 1)"'), ("height_m", "2.4"),
              ("sensitive", "false"), ("walkable", "true")],
    "zone": [("name", '"EPA"'), ("wkt", '"POLYGON ((5 3, 9 3, 9 6, 5 6, 5 3))"'), ("limit", '"125 V/in"')],
    "control_point": [("x", "0.0"), ("y", "0.0"), ("lon", "13.0"), ("lat", "51.0")],
}


@st.composite
def site_toml(draw) -> str:
    """A site file that is mostly right, with some values, keys, headers or lines drawn from the junk."""
    tables = ["site", "outline"] + draw(st.lists(st.sampled_from(["asset", "zone", "control_point"]), max_size=4))
    lines = []
    for index, table in enumerate(tables):
        many = table in ("asset", "zone", "control_point")
        header = f"[[{table}]]" if many else f"[{table}]"
        lines.append(draw(st.sampled_from(SECTIONS)) if junk(draw, 1 / 10) else header)
        for key, value in GOOD_TABLES[table]:
            if table == "control_point" and key in ("x", "lon"):  # points apart, about 10 m per 10 m
                value = f"{float(value) + index * (10.0 if key == 'x' else 0.000143):.6f}"
            if junk(draw, 1 / 32):
                continue  # key left out
            if junk(draw, 1 / 6):
                value = draw(TOML_VALUES)
            if junk(draw, 1 / 32):
                key = draw(st.sampled_from(KEYS))
            lines.append(f"{key} = {value}")
    if junk(draw, 1 / 3):  # a stray line, often at the top (a top-level key)
        at = 0 if junk(draw, 1 / 2) else draw(st.integers(0, len(lines)))
        lines.insert(at, f"{draw(st.sampled_from(KEYS))} = {draw(TOML_VALUES)}")
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- the properties
def run_quietly(argv: list[str]) -> tuple[int, str]:
    """Exit status and standard error of a command; a Python warning (numpy's RuntimeWarning
    with its source line, say) would reach the user's screen, so it counts as output too."""
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()), \
            warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        code = main(argv)
    shown = "".join(f"{w.filename}:{w.lineno}: {w.category.__name__}: {w.message}\n" for w in caught)
    return code, shown + err.getvalue()


@pytest.fixture(scope="module")
def folder(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("fuzz")


@pytest.fixture(scope="module")
def base_survey(folder: Path) -> Path:
    """A georeferenced box survey (so lon,lat files reach the transform), WAL folded in."""
    site = folder / "box.toml"
    site.write_text(BOX_SITE + "[[control_point]]\nx = 0.0\ny = 0.0\nlon = 13.0\nlat = 51.0\n"
                    "[[control_point]]\nx = 10.0\ny = 0.0\nlon = 13.000143\nlat = 51.0\n")
    path = folder / "base.survey"
    assert main(["new", str(path), "--site", str(site)]) == 0
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn.close()
    return path


@pytest.fixture(autouse=True)
def _no_debug(monkeypatch):
    monkeypatch.delenv("MAPPER_DEBUG", raising=False)


_count = itertools.count()


@FUZZ
@given(data=readings_csv(), skip_bad=st.booleans(), tz=st.sampled_from([None, "Europe/Berlin", "Pacific/Kiritimati"]),
       unit=st.sampled_from([None, "kV/m"]))
def test_csv_import_never_fails_inside(folder, base_survey, data, skip_bad, tz, unit):
    n = next(_count)
    survey = folder / f"s{n}.survey"
    shutil.copy(base_survey, survey)
    readings = folder / f"r{n}.csv"
    readings.write_bytes(data)
    before = survey.read_bytes()
    argv = ["import", str(survey), str(readings)] + ["--skip-bad"] * skip_bad
    argv += ["--tz", tz] if tz else []
    argv += ["--unit", unit] if unit else []
    code, err = run_quietly(argv)
    assert code in (0, 2), err
    assert "Traceback" not in err and "internal error" not in err and "Warning: " not in err, err
    if code == 2:
        assert not Path(f"{survey}-wal").exists() or Path(f"{survey}-wal").stat().st_size == 0
        assert survey.read_bytes() == before, err
    for leftover in folder.glob(f"[sr]{n}.*"):
        leftover.unlink()


@FUZZ
@given(text=site_toml())
def test_site_file_loader_never_fails_inside(folder, text):
    n = next(_count)
    site = folder / f"site{n}.toml"
    site.write_text(text, encoding="utf-8", errors="surrogatepass")
    survey = folder / f"n{n}.survey"
    code, err = run_quietly(["new", str(survey), "--site", str(site)])
    assert code in (0, 2), err
    assert "Traceback" not in err and "internal error" not in err and "Warning: " not in err, err
    if code == 2:
        assert not survey.exists(), err
    for leftover in folder.glob(f"n{n}.survey*"):
        leftover.unlink()
