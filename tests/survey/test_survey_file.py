"""The survey file: schema, append-only readings, the writer lock, migrations."""

import sqlite3
import subprocess
import sys

import pytest

from mapper.errors import MapperError
from mapper.survey.schema import MIGRATIONS, SCHEMA_VERSION, migrate
from mapper.survey.store import NewReading, Survey


def new_reading(value=100.0, **kw):
    return NewReading(x=1.0, y=1.0, entered_value=value, entered_unit="V/m", value_v_per_m=value, **kw)


def test_file_settings(box_survey):
    conn = sqlite3.connect(box_survey)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    with Survey.open(box_survey) as s:
        assert s.conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
        assert len(s.plan.points) == 15 and s.site.name == "Box"


def test_readings_are_append_only(box_survey):
    with Survey.open(box_survey, write=True) as s:
        a = s.add_reading(new_reading(100.0, point="A1"))
        b = s.add_reading(new_reading(200.0, point="A1"))
        edited = s.supersede(a.id, "edit", {"entered_value": 110.0, "value_v_per_m": 110.0})
        s.supersede(b.id, "undo")
        assert [r.value_v_per_m for r in s.readings()] == [110.0]
        s.supersede(b.id, "restore")
        assert sorted(r.value_v_per_m for r in s.readings()) == [110.0, 200.0]
        with pytest.raises(MapperError, match="not current"):
            s.supersede(a.id, "edit", {"note": "again"})
        assert s.count_rows() == 5  # nothing was deleted
        assert s.reading(a.id).value_v_per_m == 100.0
        assert s.reading(edited).value_v_per_m == 110.0


def test_undoing_an_edit_brings_back_the_value_before_it(box_survey):
    with Survey.open(box_survey, write=True) as s:
        a = s.add_reading(new_reading(100.0, point="A1"))
        edited = s.supersede(a.id, "edit", {"entered_value": 150.0, "value_v_per_m": 150.0})
        back = s.supersede(edited, "undo")
        assert [(r.id, r.value_v_per_m) for r in s.readings()] == [(back, 100.0)]
        s.supersede(back, "undo")  # undoing the original reading itself removes it
        assert s.readings() == []
        assert s.count_rows() == 4


def test_one_writer_at_a_time_readers_welcome(box_survey):
    with Survey.open(box_survey, write=True):
        code = (
            "import sys\nfrom mapper.survey.store import Survey\nfrom mapper.errors import MapperError\n"
            f"Survey.open({str(box_survey)!r}).close()\n"
            "try:\n"
            f"    Survey.open({str(box_survey)!r}, write=True)\n"
            "except MapperError as e:\n    print(e); sys.exit(7)\n"
        )
        result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
        assert result.returncode == 7, result.stderr
        assert "open for writing by process" in result.stdout


def test_lock_of_killed_process_does_not_block(box_survey):
    code = (
        "import os, signal\nfrom mapper.survey.store import Survey\n"
        f"s = Survey.open({str(box_survey)!r}, write=True)\n"
        "os.kill(os.getpid(), signal.SIGKILL)\n"
    )
    result = subprocess.run([sys.executable, "-c", code])
    assert result.returncode == -9
    with Survey.open(box_survey, write=True) as s:
        assert s.writable


def test_foreign_keys_refuse_unknown_meter_and_point(box_survey):
    with Survey.open(box_survey, write=True) as s:
        with pytest.raises(MapperError, match="refused"):
            s.add_reading(new_reading(meter_id="nosuchmeter"))
        with pytest.raises(MapperError, match="refused"):
            s.add_readings([new_reading(), new_reading(point="Z99")])
        assert s.count_rows() == 0  # the good row of the batch was not kept either


def test_migration_from_version_one(tmp_path):
    path = tmp_path / "old.sqlite"
    conn = sqlite3.connect(path, isolation_level=None)
    conn.executescript(MIGRATIONS[0] + "PRAGMA user_version = 1;")
    assert migrate(conn) == 1
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    names = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    assert "field_models" in names


def test_not_a_survey(tmp_path):
    path = tmp_path / "x.survey"
    path.write_text("hello")
    with pytest.raises(MapperError, match="not a survey file"):
        Survey.open(path)


def test_conditions_and_events(box_survey):
    with Survey.open(box_survey, write=True) as s:
        s.add_conditions(35.0, 21.0, "doors shut")
        with pytest.raises(MapperError, match="outside 0-100"):
            s.add_conditions(120.0, 21.0)
        assert [c.rh_percent for c in s.conditions()] == [35.0]
        assert [e[1] for e in s.events()] == ["created", "conditions"]
