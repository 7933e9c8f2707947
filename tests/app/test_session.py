"""The walk's logic without the user interface: entry, moving, recording, undo, resume."""

from __future__ import annotations

from datetime import timedelta

import pytest

from mapper.app.session import (
    CURRENT_POINT_KEY,
    WalkSession,
    direction_arrow,
    parse_conditions,
    parse_entry,
    parse_xy,
)
from mapper.errors import MapperError
from mapper.survey.store import Survey


def test_parse_entry_units_and_sign():
    # 1 in = 0.0254 m exactly (international yard and pound agreement, 1959): 125 V/in = 4921.26 V/m.
    e = parse_entry("125V/in", "kV/m", "physics")
    assert e.entered_value == 125 and e.entered_unit == "V/in"
    assert e.value_v_per_m == pytest.approx(4921.2598, abs=1e-3)
    # A bare number takes the display unit.
    assert parse_entry("2.1", "kV/m", "physics").value_v_per_m == pytest.approx(2100.0)
    # Atmospheric potential-gradient convention: fair weather reads +100 V/m, which is a
    # downward field, -100 V/m in the physics convention (Feynman Lectures II sec. 9-1).
    atm = parse_entry("100", "V/m", "atmospheric")
    assert atm.entered_value == 100 and atm.value_v_per_m == -100


@pytest.mark.parametrize("text", ["", "abc", "1..2", "nan", "inf", "2 parsecs", "4e6", "3.1MV/m"])
def test_parse_entry_refuses(text):
    # 4e6 V/m and 3.1 MV/m exceed the dielectric strength of air, about 3 MV/m (AMS Glossary).
    with pytest.raises(MapperError):
        parse_entry(text, "V/m", "physics")


def test_parse_xy_and_conditions():
    assert parse_xy("4.5, 2") == (4.5, 2.0)
    assert parse_xy("4.5 2") == (4.5, 2.0)
    with pytest.raises(MapperError):
        parse_xy("4.5")
    assert parse_conditions("45", "21.5") == (45.0, 21.5)
    assert parse_conditions("", "21") == (None, 21.0)
    for rh, t in (("", ""), ("120", "20"), ("40", "95")):
        with pytest.raises(MapperError):
            parse_conditions(rh, t)


def test_direction_arrows():
    assert direction_arrow(1, 0) == "→"
    assert direction_arrow(0, 2) == "↑"
    assert direction_arrow(-1, -1) == "↙"
    assert direction_arrow(0, 0) == ""


def test_serpentine_walk_and_neighbours(walk: WalkSession):
    # The box (10 x 6 m at 2 m) has 5 columns and 3 rows: A1..A5, then B5..B1, then C1..C5.
    labels = [p.label for p in walk.points]
    assert labels[:6] == ["A1", "A2", "A3", "A4", "A5", "B5"]
    assert walk.current.label == "A1"
    assert walk.neighbour("up").label == "B1"
    assert walk.neighbour("down") is None
    assert walk.neighbour("right").label == "A2"
    walk.jump("b5")
    assert walk.neighbour("left").label == "B4"
    assert walk.next_unvisited().label == "B4"
    assert walk.next_unvisited(step=-1).label == "A5"


def test_record_repeat_undo_and_resume(walk: WalkSession, box_survey):
    r1 = walk.record("12")
    assert (r1.point, r1.entered_value, r1.entered_unit, r1.kind) == ("A1", 12.0, "V/m", "field")
    assert walk.current.label == "A2"  # moved on in walking order
    walk.record("0.02kV/m")
    walk.jump("A1")
    walk.record("14")  # a repeat at A1
    stats = walk.stats_at("A1")
    assert [r.entered_value for r in stats.readings] == [12.0, 14.0]
    assert stats.mean_v_per_m == pytest.approx(13.0)
    assert stats.spread_v_per_m == pytest.approx(2 ** 0.5)  # sample standard deviation of 12, 14
    assert walk.current.label == "A3"  # next unvisited after A1
    undone = walk.undo()
    assert undone.entered_value == 14.0 and walk.current.label == "A1"
    assert len(walk.stats_at("A1").readings) == 1
    walk.survey.close()
    with Survey.open(box_survey, write=True) as again:
        resumed = WalkSession(again)
        assert resumed.current.label == again.get(CURRENT_POINT_KEY) == "A1"
        assert sorted(r.entered_value for r in resumed.field_readings()) == [0.02, 12.0]
        assert resumed.visited == {"A1", "A2"}


def test_invalid_entry_saves_nothing(walk: WalkSession):
    rows = walk.survey.count_rows()
    for text in ("x", "1e9", "5 V/ft"):
        with pytest.raises(MapperError):
            walk.record(text)
    assert walk.survey.count_rows() == rows and walk.current.label == "A1"


def test_free_position_reference_and_zero(walk: WalkSession):
    walk.free(3.3, 4.1)
    r = walk.record("55")
    assert r.point is None and (r.x, r.y) == (3.3, 4.1)
    with pytest.raises(MapperError, match="outside the site outline"):
        walk.free(12, 1)
    walk.go(walk.by_label["C3"])
    ref = walk.record("40", kind="reference")
    zero = walk.record("-1", kind="zero")
    assert (ref.kind, ref.point) == ("reference", "C3")  # the station is named by its point
    assert (zero.kind, zero.point) == ("zero", None)
    assert walk.current.label == "C3"  # control readings do not move on


def test_revise_value_note_flag(walk: WalkSession):
    r = walk.record("12")
    new = walk.revise(r.id, "13", "ioniser off", True)
    assert (new.entered_value, new.note, new.flags) == (13.0, "ioniser off", ("doubtful",))
    assert walk.revise(new.id, "", None, None) is None  # nothing changed, nothing written
    current = walk.survey.readings()
    assert [(c.entered_value, c.note) for c in current] == [(13.0, "ioniser off")]


def test_conditions_due_and_dry_air(walk: WalkSession):
    assert walk.conditions_due()
    walk.add_conditions(25.0, 21.0)
    assert not walk.conditions_due()
    # Below 30 % RH charging rises sharply (common practice; US Army TM 9-254, Table 8-7).
    assert walk.dry_air()
    later = walk.last_conditions.time + timedelta(minutes=31)
    assert walk.conditions_due(later)
    walk.add_conditions(55.0, None)
    assert not walk.dry_air()


def test_settings_saved_in_survey(walk: WalkSession):
    walk.set_threshold("2 kV/m")
    walk.set_display_unit("kv/m")
    assert walk.survey.threshold_v_per_m == 2000.0 and walk.survey.display_unit == "kV/m"
    with pytest.raises(MapperError):
        walk.set_threshold("-1")
    with pytest.raises(MapperError):
        walk.set_display_unit("V/ft")


def test_undo_after_edit_brings_back_the_earlier_value(walk):
    first = walk.record("120")
    walk.edit(first.id, "150")
    walk.undo()
    assert sorted(r.value_v_per_m for r in walk.readings.values()) == [120.0]
    assert [r.value_v_per_m for r in walk.survey.readings()] == [120.0]


def _summaries(walk: WalkSession) -> dict:
    """What the screen asks the walk for after each change."""
    here = {}
    for p in walk.points:
        walk.go(p)
        here[p.label] = [r.id for r in walk.readings_here()]
    return {
        "progress": walk.progress_summary(),
        "means": walk.point_means(),
        "free": [r.id for r in walk.free_field_readings()],
        "here": here,
    }


def test_running_counts_match_the_survey_file(walk: WalkSession, box_survey):
    # The walk keeps its counts, means and indexes up to date reading by reading; a walk opened
    # afresh from the file (which recounts everything) must see exactly the same.
    walk.record("12")
    walk.record("-30")
    walk.jump("A1")
    walk.record("14")                      # a repeat: the mean of A1 moves
    walk.free(3.3, 4.1)
    free = walk.record("55")
    walk.record("57")                      # a second reading at the same free position
    walk.record("9", kind="zero")
    assert [r.entered_value for r in walk.readings_here()] == [9.0, 57.0, 55.0]
    assert walk.place_summary().free_count == 2
    walk.free(3.3 + 5e-7, 4.1)             # within 1e-6 m: the same place
    assert len(walk.readings_here()) == 3
    walk.go(walk.by_label["C3"])
    walk.record("40", kind="reference")
    walk.edit(free.id, "56")               # the edited row goes to the end of the storage order
    walk.undo()                            # undoes the edit: 55 is back
    walk.go(walk.by_label["A2"])
    walk.record("-31")
    walk.undo()
    mine = _summaries(walk)
    assert mine["progress"].readings == 5 and mine["progress"].done == 2
    assert mine["means"]["A1"] == pytest.approx(13.0)
    walk.survey.close()
    with Survey.open(box_survey, write=True) as again:
        fresh = WalkSession(again)
        assert _summaries(fresh) == mine
        assert fresh.first_time == min(r.time for r in again.readings(kind=None))


def test_first_time_follows_undo(walk: WalkSession):
    first = walk.record("12")
    walk.record("13")
    assert walk.first_time == first.time
    walk.undo()
    walk.undo()                            # the earliest reading goes too
    assert walk.first_time is None and walk.field_count == 0 and walk.visited_count == 0
    again = walk.record("14")
    assert walk.first_time == again.time
