"""The command line: the main job end to end, and one-line errors that leave files unchanged."""

import hashlib
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from tests.conftest import SAMPLES


def mapper(*args, env=None, cwd=None):
    return subprocess.run(
        [sys.executable, "-m", "mapper", *map(str, args)], capture_output=True, text=True, env=env, cwd=cwd
    )


def digest(path: Path) -> str:
    """Content of a survey as SQL text (independent of WAL checkpointing)."""
    conn = sqlite3.connect(path)
    text = "\n".join(conn.iterdump())
    conn.close()
    return hashlib.sha256(text.encode()).hexdigest()


def assert_one_line_error(result, *words):
    assert result.returncode != 0
    assert "Traceback" not in result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    for word in words:
        assert word in lines[0], lines[0]


def test_new_import_info_on_sample(tmp_path):
    survey = tmp_path / "hall.survey"
    r = mapper("new", survey, "--site", SAMPLES / "north_hall.toml", "--spacing", "2", "--unit", "kV/m")
    assert r.returncode == 0, r.stderr
    assert "336 points" in r.stdout and "EPSG:32633" in r.stdout
    r = mapper("import", survey, SAMPLES / "north_hall_readings.csv")
    assert r.returncode == 0, r.stderr
    info = json.loads(mapper("info", survey, "--json").stdout)
    assert info["points"] == 336 and info["readings"] == 348
    assert info["readings_by_kind"] == {"field": 348, "reference": 5, "zero": 2}


def test_outdoor_sample_lonlat_and_atmospheric_sign(tmp_path):
    survey = tmp_path / "yard.survey"
    r = mapper("new", survey, "--site", SAMPLES / "east_yard.geojson", "--spacing", "8", "--sign", "atmospheric")
    assert r.returncode == 0, r.stderr
    r = mapper("import", survey, SAMPLES / "east_yard_readings.csv")
    assert r.returncode == 0, r.stderr
    from mapper.survey.store import Survey

    with Survey.open(survey) as s:
        values = [r.value_v_per_m for r in s.readings()]
        entered = [r.entered_value for r in s.readings()]
    # the file's potential-gradient values are negative under the storm; physics sign flips them
    assert all(v > 0 for v in values) and all(e < 0 for e in entered)


BAD_ROWS = [
    ("x,y,value,unit\n1,1,abc,V/m\n", "line 2"),
    ("x,y,value,unit\n1,1,nan,V/m\n", "value"),
    ("x,y,value,unit\n1,1,5,V/furlong\n", "unknown field unit"),
    ("x,y,value,unit\n1,1,4,MV/m\n", "dielectric strength"),
    ("x,y,value,unit\n100,1,5,V/m\n", "outside the site"),
    ("x,y,value,unit\n1,1,,V/m\n", "empty value"),
    ("x,y,value\n1,1,5\n", "unit"),
    ("x,y,value,unit,time\n1,1,5,V/m,yesterday\n", "ISO 8601"),
    ("x,y,value,unit,kind\n1,1,5,V/m,guess\n", "unknown kind"),
    ("a,b,c\n1,2,3\n", "accepted: x,y, easting,northing"),
]


@pytest.mark.parametrize(("content", "word"), BAD_ROWS)
def test_bad_import_rows_one_line_error_and_file_unchanged(box_survey, tmp_path, content, word):
    good = "x,y,value,unit\n1,1,5,V/m\n3,1,6,V/m\n"
    csv = tmp_path / "in.csv"
    # a good first row, then the bad one: all or nothing means neither is stored
    csv.write_text(good + content.split("\n", 1)[1] if content.startswith("x,y,value,unit\n") else content)
    before = digest(box_survey)
    result = mapper("import", box_survey, csv)
    assert_one_line_error(result, str(csv))
    assert word.replace("line 2", "") in result.stderr
    assert digest(box_survey) == before


def test_error_names_file_line_and_column(box_survey, tmp_path):
    csv = tmp_path / "in.csv"
    csv.write_text("x,y,value,unit\n1,1,5,V/m\n1,1,oops,V/m\n")
    result = mapper("import", box_survey, csv)
    assert_one_line_error(result, f"{csv}:3: value")


def test_skip_bad_writes_rejected_beside_input(box_survey, tmp_path):
    csv = tmp_path / "in.csv"
    csv.write_text("x,y,value,unit\n1,1,5,V/m\n1,1,oops,V/m\n3,3,7,kV/m\n")
    result = mapper("import", box_survey, csv, "--skip-bad")
    assert result.returncode == 0, result.stderr
    assert "imported 2 readings" in result.stdout
    rejected = (tmp_path / "in.rejected.csv").read_text()
    assert "3," in rejected and "not a field value" in rejected


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["new", "{tmp}/a.survey", "--site", "{tmp}/missing.toml"], ["site file not found"]),
        (["new", "{tmp}/a.survey", "--site", "{site}", "--spacing", "-2"], ["positive"]),
        (["new", "{tmp}/a.survey", "--site", "{site}", "--unit", "V/ft"], ["unknown field unit"]),
        (["new", "{tmp}/a.survey", "--site", "{site}", "--sign", "up"], ["invalid choice"]),
        (["new", "{tmp}/a.survey", "--site", "{site}", "--threshold", "x"], ["not a field value"]),
        (["new", "{survey}", "--site", "{site}"], ["already exists"]),
        (["info", "{tmp}/nothing.survey"], ["survey file not found"]),
        (["info", "{site}"], ["not a survey file"]),
        (["import", "{survey}", "{tmp}/none.csv"], ["file not found"]),
    ],
)
def test_command_errors_are_one_line(tmp_path, box_site, box_survey, args, words):
    fill = {"tmp": tmp_path, "site": box_site, "survey": box_survey}
    before = digest(box_survey)
    result = mapper(*[a.format(**fill) for a in args])
    assert_one_line_error(result, *words)
    assert digest(box_survey) == before


def test_bad_site_file_one_line(tmp_path):
    site = tmp_path / "bad.toml"
    site.write_text('[site]\nname = "b"\n[outline]\nwkt = "POLYGON ((0 0, 4 4, 4 0, 0 4, 0 0))"\n')
    result = mapper("new", tmp_path / "b.survey", "--site", site)
    assert_one_line_error(result, f"{site}:4", "Self-intersection")
    assert not (tmp_path / "b.survey").exists()


def test_second_writer_refused_by_cli(box_survey, tmp_path):
    from mapper.survey.store import Survey

    csv = tmp_path / "in.csv"
    csv.write_text("x,y,value,unit\n1,1,5,V/m\n")
    with Survey.open(box_survey, write=True):
        result = mapper("import", box_survey, csv)
    assert_one_line_error(result, "open for writing")


def test_sigkill_during_import_leaves_file_intact(box_survey, tmp_path):
    rows = "".join(f"{1 + (i % 5) * 2},{1 + (i // 5 % 3) * 2},{i % 97},V/m\n" for i in range(3000))
    csv = tmp_path / "big.csv"
    csv.write_text("x,y,value,unit\n" + rows)
    env = dict(os.environ, MAPPER_TEST_IMPORT_DELAY="0.05")
    proc = subprocess.Popen(
        [sys.executable, "-m", "mapper", "import", str(box_survey), str(csv)],
        env=env, stderr=subprocess.PIPE, text=True,
    )
    # the test hook announces when the import's transaction is open and has started inserting
    assert proc.stderr.readline().strip() == "mapper: import transaction open"
    time.sleep(0.3)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert proc.returncode == -9
    conn = sqlite3.connect(box_survey)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert conn.execute("SELECT COUNT(*) FROM readings").fetchone()[0] == 0  # all or nothing
    conn.close()
    result = mapper("import", box_survey, csv)  # the lock died with the process
    assert result.returncode == 0, result.stderr
    assert "imported 3000 readings" in result.stdout


def test_second_import_of_same_file_refused_unless_again(box_survey, tmp_path):
    csv = tmp_path / "in.csv"
    csv.write_text("x,y,value,unit\n1,1,5,V/m\n3,1,6,V/m\n")
    assert mapper("import", box_survey, csv).returncode == 0
    before = digest(box_survey)
    result = mapper("import", box_survey, csv)
    assert_one_line_error(result, "already imported", "--again")
    assert digest(box_survey) == before
    result = mapper("import", box_survey, csv, "--again")
    assert result.returncode == 0 and "imported 2 readings" in result.stdout


def test_help_lists_every_command_without_the_numerical_stack():
    # `mapper --help` imports no sub-command module (numpy, scipy, shapely ... load only when a
    # command runs), and still lists each command with its one-line help.
    from mapper.cli.commands import COMMANDS

    code = (
        "import sys\n"
        "from mapper.cli.main import main\n"
        "try:\n    main(['--help'])\nexcept SystemExit:\n    pass\n"
        "heavy = [m for m in ('numpy', 'scipy', 'shapely', 'geopandas', 'matplotlib', 'textual') "
        "if m in sys.modules]\n"
        "print('HEAVY', heavy)\n"
    )
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "HEAVY []" in r.stdout
    for name, (_, text) in COMMANDS.items():
        assert name in r.stdout and text.split()[0] in r.stdout


def test_info_counts_every_kind_with_plurals_and_the_operator(tmp_path):
    survey = tmp_path / "hall.survey"
    r = mapper("new", survey, "--site", SAMPLES / "north_hall.toml", "--spacing", "2", "--unit", "kV/m",
               "--operator", "R. Osei")
    assert r.returncode == 0, r.stderr
    assert "residuals [-]" not in r.stdout
    assert mapper("import", survey, SAMPLES / "north_hall_readings.csv").returncode == 0
    out = mapper("info", survey).stdout
    assert "355 readings (field 348, reference 5, zero 2)" in out
    assert "operator  R. Osei" in out and "1 zone" in out and "1 zones" not in out
    # local time with its offset (the sample site's timezone is Europe/Berlin, UTC+1 in November)
    assert "Europe/Berlin (UTC+01:00)" in out
    # the drift rate in the survey's display unit
    drift = next(line for line in out.splitlines() if line.startswith("drift"))
    assert "kV/m per hour" in drift and "V/m per hour" not in drift.replace("kV/m per hour", "")


def test_swapped_lon_lat_gets_a_hint(tmp_path):
    # The outdoor sample yard lies near 13.75 E, 51.05 N; a row with the two swapped lands
    # thousands of kilometres away: refused by name, with the likely cause.
    survey = tmp_path / "yard.survey"
    assert mapper("new", survey, "--site", SAMPLES / "east_yard.geojson", "--spacing", "8").returncode == 0
    lines = (SAMPLES / "east_yard_readings.csv").read_text().splitlines()
    t, lon, lat, *rest = lines[1].split(",")
    bad = tmp_path / "swapped.csv"
    bad.write_text("\n".join([lines[0], ",".join([t, lat, lon, *rest])]) + "\n")
    before = digest(survey)
    r = mapper("import", survey, bad)
    assert_one_line_error(r, "swapped.csv:2", "outside the site outline", "did you swap lon and lat?")
    assert digest(survey) == before


def test_long_commands_show_their_step_on_a_terminal_and_stay_quiet_otherwise(tmp_path):
    import pty

    survey = tmp_path / "hall.survey"
    assert mapper("new", survey, "--site", SAMPLES / "north_hall.toml", "--spacing", "2").returncode == 0
    assert mapper("import", survey, SAMPLES / "north_hall_readings.csv").returncode == 0
    # Not a terminal: stderr carries no spinner, stdout is what scripts read.
    quiet = mapper("report", survey, tmp_path / "a.pdf")
    assert quiet.returncode == 0, quiet.stderr
    assert "report:" not in quiet.stderr and "…" not in quiet.stderr
    # stderr a terminal (a pseudo-terminal here): the spinner names the step as it goes.
    leader, follower = pty.openpty()
    env = dict(os.environ, COLUMNS="100", TERM="xterm")
    proc = subprocess.Popen([sys.executable, "-m", "mapper", "report", str(survey), str(tmp_path / "b.pdf")],
                            stdout=subprocess.PIPE, stderr=follower, env=env)
    os.close(follower)
    seen = b""
    while True:
        try:
            chunk = os.read(leader, 4096)
        except OSError:
            break
        if not chunk:
            break
        seen += chunk
    out, _ = proc.communicate(timeout=300)
    os.close(leader)
    assert proc.returncode == 0
    assert b"report:" in seen and (b"field model" in seen or b"drawing the pages" in seen)
    assert b"wrote" in out and b"report:" not in out
