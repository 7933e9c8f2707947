"""The app driven headless with Textual's pilot: the survey file holds exactly what was typed."""

from __future__ import annotations

from pathlib import Path

import pytest
from textual.worker import WorkerCancelled

from mapper.app.main_screen import MainScreen
from mapper.app.walk_app import WalkApp
from mapper.survey.store import Survey


async def _type(pilot, text: str) -> None:
    await pilot.press(*text)


async def _enter(pilot, text: str) -> None:
    await _type(pilot, text)
    await pilot.press("enter")
    await pilot.pause()


async def settle(app: WalkApp) -> None:
    """Wait for the live refit; a refit cancelled by a newer one is fine."""
    for _ in range(20):
        try:
            await app.workers.wait_for_complete()
            return
        except WorkerCancelled:
            continue


def _main(app: WalkApp) -> MainScreen:
    screen = app.screen_stack[1]
    assert isinstance(screen, MainScreen)
    return screen


@pytest.mark.asyncio
async def test_readings_repeat_undo_and_refusals(box_survey: Path):
    survey = Survey.open(box_survey, write=True)
    app = WalkApp(survey, ask_conditions=False)
    async with app.run_test(size=(120, 40)) as pilot:
        main = _main(app)
        await _enter(pilot, "12")                      # A1
        assert main.last_status == "saved point A1 = 12 V/m"
        await _enter(pilot, "0.015kV/m")               # A2, unit suffix overrides V/m
        await _enter(pilot, "-8")                      # A3
        assert app.session.current.label == "A4"
        # Invalid entries are refused in place: nothing saved, text kept, position kept.
        rows = survey.count_rows()
        await _enter(pilot, "9e9")                     # beyond the breakdown strength of air
        assert main.last_status.startswith("not saved:") and "dielectric strength" in main.last_status
        assert main.query_one("#entry").value == "9e9"
        await pilot.press("escape")
        await _enter(pilot, "5 V/")                    # unknown unit
        assert main.last_status.startswith("not saved:")
        await pilot.press("escape")
        # What is typed is what is parsed: nothing is dropped silently (a filter once turned
        # '2,5' into 25 and '3O' into 3).
        await _enter(pilot, "3O")                      # letter O, not zero
        assert main.last_status.startswith("not saved:") and main.query_one("#entry").value == "3O"
        await pilot.press("escape")
        await _enter(pilot, "hello")
        assert main.last_status.startswith("not saved:") and main.query_one("#entry").value == "hello"
        await pilot.press("escape")
        await _enter(pilot, "1,2,3")                   # several commas: ambiguous, refused
        assert main.last_status.startswith("not saved:") and "ambiguous" in main.last_status
        await pilot.press("escape")
        assert survey.count_rows() == rows and app.session.current.label == "A4"
        await _enter(pilot, "2,5")                     # a decimal comma is a decimal mark
        assert main.last_status == "saved point A4 = 2.5 V/m"
        await pilot.press("ctrl+z")                    # undo it: the rest of the test expects A4 open
        await pilot.pause()
        rows = survey.count_rows()
        # Back to A3 with the arrow key for a repeat reading, then a second repeat.
        await pilot.press("left")
        assert app.session.current.label == "A3"
        await _enter(pilot, "-9")
        assert app.session.current.label == "A4"       # next unvisited after A3
        await pilot.press("left")
        await _enter(pilot, "-10")
        # Undo the last repeat: superseded, and back at A3.
        await pilot.press("ctrl+z")
        await pilot.pause()
        assert main.last_status.startswith("undone point A3 = -10 V/m")
        assert app.session.current.label == "A3"
        await settle(app)
        await pilot.press("ctrl+q")
    survey.close()
    with Survey.open(box_survey) as s:
        field = s.readings()
        assert [(r.point, r.entered_value, r.entered_unit) for r in field] == [
            ("A1", 12.0, "V/m"), ("A2", 0.015, "kV/m"), ("A3", -8.0, "V/m"), ("A3", -9.0, "V/m"),
        ]
        assert field[1].value_v_per_m == pytest.approx(15.0)
        # 6 records and 2 undo rows: the undone readings stay in the file, superseded.
        assert s.count_rows() == 8
        assert s.get("app_current_point") == "A3"


@pytest.mark.asyncio
async def test_conditions_note_free_position_reference(box_survey: Path):
    survey = Survey.open(box_survey, write=True)
    app = WalkApp(survey, ask_conditions=False)
    async with app.run_test(size=(120, 40)) as pilot:
        main = _main(app)
        await _enter(pilot, "-8")                      # A1
        await pilot.press("left")
        # Conditions form: RH and temperature.
        await pilot.press("f5")
        await _type(pilot, "28")
        await pilot.press("enter")
        await _type(pilot, "21.5")
        await pilot.press("enter", "enter")            # the note is optional
        assert main.last_status.startswith("saved conditions RH 28 % · 21.5 °C · DRY AIR")
        # Note and flag on the reading at A1 (value left blank: unchanged).
        await pilot.press("f6")
        await pilot.press("enter")                     # value: blank keeps it
        await _type(pilot, "belt")
        await pilot.press("tab", "space", "shift+tab", "enter")   # tick "doubtful", save
        assert main.last_status.startswith("saved edit point A1 = -8 V/m [doubtful] “belt”")
        # Free position off the grid.
        left_at = app.session.current.label
        await pilot.press("f4", "ctrl+u")
        await _type(pilot, "3.3, 4.1")
        await pilot.press("enter")
        await _enter(pilot, "31")
        assert main.last_status == "saved (3.30, 4.10) m = 31 V/m"
        await pilot.press("f4")                        # back to the grid
        # F4 from the free position returns to where the walk order was left, not the nearest point
        assert app.session.current.label == left_at
        assert main.last_status == f"back on the grid at point {left_at}"
        # A reference-station reading at the current point.
        await pilot.press("f7")
        await _enter(pilot, "20")
        assert main.last_status.startswith("saved reference")
        await settle(app)
        await pilot.press("ctrl+q")
    survey.close()

    with Survey.open(box_survey) as s:
        field = s.readings()
        got = [(r.point, r.entered_value, r.entered_unit, r.note, r.flags) for r in field]
        assert got == [("A1", -8.0, "V/m", "belt", ("doubtful",)), (None, 31.0, "V/m", "", ())]
        assert (field[1].x, field[1].y) == (3.3, 4.1)
        refs = s.readings(kind="reference")
        assert [(r.entered_value, r.point) for r in refs] == [(20.0, left_at)]
        assert [(c.rh_percent, c.temperature_c) for c in s.conditions()] == [(28.0, 21.5)]
        # 3 records and 1 edit row (the pre-edit A1 row is kept, superseded).
        assert s.count_rows() == 4


@pytest.mark.asyncio
async def test_moving_and_resume(box_survey: Path):
    with Survey.open(box_survey, write=True) as survey:
        app = WalkApp(survey, ask_conditions=False)
        async with app.run_test(size=(100, 30)) as pilot:
            main = _main(app)
            await pilot.press("up", "up", "right")
            assert app.session.current.label == "C2"
            await pilot.press("pagedown")              # next to do in walking order after C2
            assert app.session.current.label == "C3"
            await pilot.press("pageup")
            assert app.session.current.label == "C2"
            await pilot.press("f2")
            await pilot.pause()
            await _type(pilot, "B4")
            await pilot.press("enter")
            await pilot.pause()
            assert app.session.current.label == "B4"
            await pilot.press("f2")
            await pilot.pause()
            await _type(pilot, "Z9")
            await pilot.press("enter")
            await pilot.pause()
            assert "no planned point" in str(app.screen.query_one("#form-error").render())
            await pilot.press("escape")
            await _enter(pilot, "7")
            assert main.last_status == "saved point B4 = 7 V/m"
            # A click on the map goes to the nearest planned point.
            frame = main.query_one("#map").frame
            col, row = frame.to_pixel(9.0, 1.0)        # point A5 sits at (9, 1)
            await pilot.click("#map", offset=(col, row // 2))
            assert app.session.current.label == "A5"
            await pilot.press("f9")                    # map layer switches
            await pilot.press("f1")
            await pilot.pause()
            assert app.screen.__class__.__name__ == "HelpScreen"
            await pilot.press("escape")
            await pilot.press("ctrl+q")
    with Survey.open(box_survey, write=True) as survey:
        app = WalkApp(survey, ask_conditions=False)
        async with app.run_test(size=(100, 30)) as pilot:
            main = _main(app)
            assert app.session.current.label == "A5"   # position restored
            assert "1 reading, 1/15 points done" in main.last_status  # singular
            await pilot.press("ctrl+q")


@pytest.mark.asyncio
async def test_conditions_asked_at_start(box_survey: Path):
    with Survey.open(box_survey, write=True) as survey:
        app = WalkApp(survey)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.pause()
            assert app.screen.query_one("#conditions-form")
            await _type(pilot, "150")                  # refused in place: outside 0-100 %
            await pilot.press("enter", "enter", "enter")
            await pilot.pause()
            assert "outside 0-100 %" in str(app.screen.query_one("#form-error").render())
            await pilot.press("escape")                # skipped: nothing saved
            await pilot.pause()
            assert isinstance(app.screen, MainScreen)
            await pilot.press("ctrl+q")
        assert survey.conditions() == []


@pytest.mark.asyncio
async def test_map_colours_do_not_rescale_as_readings_arrive(box_survey: Path):
    # One scale tied to the action level: a reading keeps its colour when a far larger one
    # arrives (the scale once stretched from ±127 to ±635 V/in during a walk).
    from mapper.features.colour_scale import colour_hex

    survey = Survey.open(box_survey, write=True)
    app = WalkApp(survey, ask_conditions=False)
    async with app.run_test(size=(120, 40)) as pilot:
        main = _main(app)
        t = app.session.threshold_v_per_m
        await _enter(pilot, "100")                     # A1
        first = tuple(int(c) for c in main._markers("readings", 1.0).rgb[0])
        await _enter(pilot, "90000")                   # A2, eighteen times the 125 V/in level
        await settle(app)
        again = tuple(int(c) for c in main._markers("readings", 1.0).rgb[0])
        assert first == again
        c = colour_hex(100.0, t).lstrip("#")
        assert first == (int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16))
        legend = main.query_one("#legend").render()
        assert "action level" in str(legend)
        await pilot.press("ctrl+q")
    survey.close()
