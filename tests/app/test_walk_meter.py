"""A meter on a serial line feeds the entry line; Enter records its value where the surveyor is.

A pseudo-terminal pair stands in for the meter's serial port.
"""

from __future__ import annotations

import asyncio
import os

from mapper.app.walk_app import WalkApp
from mapper.readings.serial_meter import SerialMeterReader
from mapper.survey.store import Survey


async def wait_for(predicate, pilot, seconds: float = 5.0) -> bool:
    for _ in range(int(seconds / 0.05)):
        if predicate():
            return True
        await pilot.pause(0.05)
    return predicate()


async def test_meter_lines_land_in_entry_and_enter_records(box_survey):
    master, slave = os.openpty()
    port = os.ttyname(slave)
    survey = Survey.open(box_survey, write=True)
    app = WalkApp(survey, ask_conditions=False, meter=SerialMeterReader(port, default_unit="V/m"))
    try:
        async with app.run_test(size=(120, 40)) as pilot:
            entry = app.screen.query_one("#entry")
            os.write(master, b"E=+2.50 kV/m\r\n")
            assert await wait_for(lambda: entry.value == "2.5kV/m", pilot)
            assert "Enter records it at point A1" in app.screen.last_status
            await pilot.press("enter")
            await pilot.pause()
            os.write(master, b"garbage\r\n")
            assert await wait_for(lambda: "meter line ignored" in app.screen.last_status, pilot)
            os.write(master, b"-130\r\n")  # no unit: the survey's display unit
            assert await wait_for(lambda: entry.value == "-130V/m", pilot)
            await pilot.press("enter")
            await pilot.pause()
            app.workers.cancel_group(app.screen, "meter")
            await asyncio.sleep(0.3)  # the reader notices the cancel within its 0.2 s timeout
    finally:
        survey.close()
        os.close(master)
        os.close(slave)
    with Survey.open(box_survey) as s:
        got = [(r.point, r.value_v_per_m) for r in s.readings()]
    assert got == [("A1", 2500.0), ("A2", -130.0)]
