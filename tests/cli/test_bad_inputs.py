"""Bad input, as a practitioner hits it: one line on stderr, non-zero exit, the survey unchanged.

Each case runs the command in-process through ``mapper.cli.main.main`` and checks the rule from
DEVELOPERS.md: one ``mapper...: error:`` line naming where the problem is (after any warnings
about the data), no traceback and no
"internal error", exit status not 0, and the survey's SQL content the same before and after.
"""

from __future__ import annotations

import os
import shutil
import sqlite3
from pathlib import Path

import pytest

from mapper.cli.main import main
from tests.cli.test_main_job import digest
from tests.conftest import SAMPLES

# A few readings spread over the 10 m x 6 m box site, enough to build a field model.
READINGS = "x,y,value,unit\n" + "".join(
    f"{x},{y},{(x * 37 + y * 11) % 50 + 5},V/m\n" for x in (1, 3, 5, 7, 9) for y in (1, 3, 5)
)


@pytest.fixture
def survey(box_survey: Path, tmp_path: Path) -> Path:
    """The box survey with 15 readings imported."""
    csv = tmp_path / "good.csv"
    csv.write_text(READINGS)
    assert main(["import", str(box_survey), str(csv)]) == 0
    return box_survey


@pytest.fixture(autouse=True)
def _no_debug(monkeypatch):
    monkeypatch.delenv("MAPPER_DEBUG", raising=False)


def run(capsys, argv: list[str]) -> tuple[int, str]:
    capsys.readouterr()
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse refuses the arguments
        code = exc.code
    return code, capsys.readouterr().err


def assert_one_line(code: int, err: str, *words: str) -> None:
    assert code not in (0, None), err
    assert "Traceback" not in err and "internal error" not in err, err
    # warnings about the data (no calibration due date, no zero readings) may come first; the
    # error itself is one line, and the last
    lines = [line for line in err.strip().splitlines() if not line.startswith("mapper: warning: ")]
    assert len(lines) == 1, err
    assert err.strip().splitlines()[-1] == lines[0], err
    assert lines[0].startswith("mapper"), lines[0]
    assert ": error: " in lines[0], lines[0]
    for word in words:
        assert word in lines[0], lines[0]


# --------------------------------------------------------------------------- input files
FILES = {
    "binary.csv": bytes(range(128, 256)) * 3,
    "utf16.csv": "x,y,value,unit\n1,1,5,V/m\n".encode("utf-16"),
    "short.csv": b"x,y,value,unit\n1,1\n",
    "dupcol.csv": b"x,y,x,value,unit\n1,1,1,5,V/m\n",
    "semicolon.csv": b"x;y;value;unit\n1;1;5;V/m\n",
    "cond_dup.csv": b"time,rh_percent,rh_percent\n2026-11-17T07:28:00Z,30,40\n",
    "log.csv": b"time,value,unit\n2026-11-17T07:30:00Z,5,V/m\n2026-11-17T07:30:10Z,6,V/m\n",
    "track.csv": b"time,x,y\n2026-11-17T07:30:00Z,1,1\n2026-11-17T07:30:20Z,5,1\n",
    "cal_binary.csv": b"plate_voltage_v,gap_m,reading\n\xff\xfe\x00\x01",
    "gpx_binary.gpx": b"<gpx>\xff\xfe\x00</gpx>",
    "site_binary.toml": b"\x97\x98\x99 not text",
    "site_bom.toml": (
        "\ufeff[site]\nname = \"b\"\n[outline]\nwkt = \"POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))\"\n"
    ).encode(),
    "site_badcrs.toml": (
        b'[site]\nname = "b"\ncrs = "EPSG:99999"\n[outline]\nwkt = "POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))"\n'
        b"[[control_point]]\nx = 0\ny = 0\nlon = 13.7\nlat = 51.0\n"
        b"[[control_point]]\nx = 10\ny = 0\nlon = 13.7002\nlat = 51.0\n"
    ),
}


@pytest.fixture
def files(tmp_path: Path) -> Path:
    folder = tmp_path / "in"
    folder.mkdir()
    for name, data in FILES.items():
        (folder / name).write_bytes(data)
    return folder


BAD_COMMANDS = [
    # readings and condition CSVs
    (["import", "{survey}", "{in}/binary.csv"], ["binary.csv:1", "not UTF-8"]),
    (["import", "{survey}", "{in}/utf16.csv"], ["utf16.csv:1", "not UTF-8"]),
    (["import", "{survey}", "{in}/short.csv"], ["short.csv:2: value"]),
    (["import", "{survey}", "{in}/dupcol.csv"], ["dupcol.csv:1", "'x' appears twice"]),
    (["import", "{survey}", "{in}/semicolon.csv"], ["semicolon.csv:1", "semicolons"]),
    (["import", "{survey}", "{in}/cond_dup.csv"], ["cond_dup.csv:1", "'rh_percent' appears twice"]),
    (["import", "{survey}", "{in}"], ["is a folder"]),
    # meter logs and tracks
    (["import", "{survey}", "{in}/binary.csv", "--log", "--track", "{in}/track.csv"],
     ["binary.csv:1", "log is not UTF-8"]),
    (["import", "{survey}", "{in}/log.csv", "--log", "--track", "{in}/binary.csv"], ["binary.csv:1", "track file is "
        "not UTF-8"]),
    (["import", "{survey}", "{in}/log.csv", "--log", "--track", "{in}/gpx_binary.gpx"],
     ["gpx_binary.gpx:1", "GPX file is not UTF-8"]),
    # meters
    (["meter", "check", "{survey}", "meter1", "{in}/cal_binary.csv"], ["cal_binary.csv:2", "calibration file is not "
        "UTF-8"]),
    (["meter", "add", "{survey}", "meter1"], ["'meter1' already exists", "nothing stored"]),
    # field model
    (["grid", "{survey}", "--neighbors", "1"], ["--neighbors", "at least 3"]),
    (["grid", "{survey}", "--neighbors", "four"], ["--neighbors", "not a whole number"]),
    (["grid", "{survey}", "--cell", "1e9"], ["no grid node inside the site outline"]),
    (["export", "{survey}", "{tmp}/out.gpkg", "--cell", "1e9"], ["no grid node inside the site outline"]),
    (["report", "{survey}", "{tmp}/out.pdf", "--cell", "1e9"], ["no grid node inside the site outline"]),
    # outputs
    (["compare", "{survey}", "{survey}", "--out", "{tmp}/missing/diff.gpkg"], ["--out", "does not exist"]),
    (["demo", "--out", "{in}/log.csv"], ["log.csv", "is a file"]),
    # site files
    (["new", "{tmp}/n.survey", "--site", "{in}/site_binary.toml"], ["site_binary.toml:1", "not UTF-8"]),
    (["new", "{tmp}/n.survey", "--site", "{in}/site_badcrs.toml"], ["site_badcrs.toml:3: [site] 'crs'", "unknown CRS"]),
    (["new", "{tmp}/n.survey", "--site", str(SAMPLES / "east_yard.geojson"), "--role", "walls=outline"],
     ["layer 'walls'"]),
    (["new", "{tmp}/n.survey", "--site", str(SAMPLES / "east_yard.geojson"), "--role", "=outline"], ["LAYER=ROLE"]),
]


@pytest.mark.parametrize(("argv", "words"), BAD_COMMANDS, ids=[" ".join(a[:1] + a[2:3]) for a, _ in BAD_COMMANDS])
def test_bad_input_is_one_line_and_survey_unchanged(capsys, survey, files, tmp_path, argv, words):
    fill = {"survey": survey, "in": files, "tmp": tmp_path}
    before = digest(survey)
    code, err = run(capsys, [a.format(**fill) for a in argv])
    assert_one_line(code, err, *words)
    assert digest(survey) == before
    assert not (tmp_path / "n.survey").exists()
    assert not (tmp_path / "out.gpkg").exists() and not (tmp_path / "out.pdf").exists()


def test_site_file_with_byte_order_mark_is_read(capsys, files, tmp_path):
    code, err = run(capsys, ["new", str(tmp_path / "n.survey"), "--site", str(files / "site_bom.toml")])
    assert code == 0, err


def test_site_warnings_reach_the_user(capsys, tmp_path):
    site = tmp_path / "one_cp.toml"
    site.write_text(
        '[site]\nname = "b"\n[outline]\nwkt = "POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))"\n'
        "[[control_point]]\nx = 0\ny = 0\nlon = 13.7\nlat = 51.0\n"
    )
    code, err = run(capsys, ["new", str(tmp_path / "n.survey"), "--site", str(site)])
    assert code == 0, err
    assert "one control point is not enough" in err


# --------------------------------------------------------------------------- damaged survey files
def _truncated(src: Path, dst: Path) -> Path:
    data = src.read_bytes()
    dst.write_bytes(data[: len(data) // 2])
    return dst


def _overwritten(src: Path, dst: Path) -> Path:
    shutil.copy(src, dst)
    with dst.open("r+b") as handle:
        handle.seek(4096)  # past the header page: into the tables' b-tree pages
        handle.write(b"\xde\xad" * 2048)
    return dst


def _checkpointed(path: Path) -> Path:
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn.close()
    return path


@pytest.mark.parametrize("damage", [_truncated, _overwritten])
@pytest.mark.parametrize(
    "argv",
    [["info"], ["review", "--exclude", "1"], ["meter", "add", "{s}", "m2"], ["grid"], ["hotspots"],
     ["import", "{s}", "{csv}"]],
    ids=["info", "review", "meter-add", "grid", "hotspots", "import"],
)
def test_damaged_survey_is_refused_before_any_write(capsys, survey, tmp_path, damage, argv):
    bad = damage(_checkpointed(survey), tmp_path / "bad.survey")
    csv = tmp_path / "more.csv"
    csv.write_text("x,y,value,unit\n2,2,5,V/m\n")
    before = bad.read_bytes()
    args = [a.format(s=bad, csv=csv) for a in argv]
    if "{s}" not in argv:
        args.insert(1 if argv[0] != "meter" else 2, str(bad))
    code, err = run(capsys, args)
    assert_one_line(code, err, str(bad), "damaged", ".recover")
    assert bad.read_bytes() == before


def test_newer_schema_is_refused(capsys, survey):
    conn = sqlite3.connect(survey)
    conn.execute("PRAGMA user_version = 999")
    conn.close()
    before = digest(survey)
    code, err = run(capsys, ["review", str(survey), "--exclude", "1"])
    assert_one_line(code, err, str(survey), "schema version 999")
    assert digest(survey) == before


# --------------------------------------------------------------------------- permissions
def _deny_write(monkeypatch, denied: Path) -> None:
    """Make the survey store see ``denied`` as not writable (root ignores chmod)."""
    import mapper.survey.store as store

    real = os.access

    def access(path, mode, *args, **kwargs):
        if Path(path) == denied and mode & os.W_OK:
            return False
        return real(path, mode, *args, **kwargs)

    monkeypatch.setattr(store.os, "access", access)


@pytest.mark.parametrize(
    "argv", [["review", "--exclude", "1"], ["grid"], ["import"]], ids=["review", "grid", "import"]
)
def test_read_only_survey_refuses_writes_up_front(capsys, monkeypatch, survey, tmp_path, argv):
    csv = tmp_path / "more.csv"
    csv.write_text("x,y,value,unit\n2,2,5,V/m\n")
    _deny_write(monkeypatch, survey)
    before = digest(survey)
    args = [argv[0], str(survey), *argv[1:]] + ([str(csv)] if argv[0] == "import" else [])
    code, err = run(capsys, args)
    assert_one_line(code, err, str(survey), "read-only")
    assert digest(survey) == before


def test_survey_in_read_only_folder_can_be_read(capsys, monkeypatch, survey):
    _checkpointed(survey)
    for extra in (Path(f"{survey}-wal"), Path(f"{survey}-shm")):
        extra.unlink(missing_ok=True)
    _deny_write(monkeypatch, survey.parent)
    before = digest(survey)
    code, err = run(capsys, ["info", str(survey)])
    assert code == 0, err
    assert not Path(f"{survey}-shm").exists()  # opened immutable: nothing made beside it
    assert digest(survey) == before


def test_survey_in_read_only_folder_with_pending_wal_is_refused(capsys, monkeypatch, survey):
    wal = Path(f"{survey}-wal")
    wal.write_bytes(b"\0" * 64)  # a -wal file that holds something not yet in the main file
    _deny_write(monkeypatch, survey.parent)
    code, err = run(capsys, ["info", str(survey)])
    assert_one_line(code, err, str(survey), "read-only folder", wal.name)


def test_skip_bad_that_imports_nothing_is_not_success(box_survey, tmp_path, capsys):
    from mapper.cli.main import main

    csv = tmp_path / "all_bad.csv"
    csv.write_text("x,y,value,unit\n1,1,abc,V/m\n2,1,,V/m\n", encoding="utf-8")
    before = box_survey.read_bytes()
    assert main(["import", str(box_survey), str(csv), "--skip-bad"]) == 2
    err = capsys.readouterr().err.strip()
    assert "nothing imported" in err and "all 2 data rows are bad" in err and len(err.splitlines()) == 1
    assert box_survey.read_bytes() == before
