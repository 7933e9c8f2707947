"""The ``mapper walk`` application: opens the survey for writing and shows the main screen."""

from __future__ import annotations

from datetime import timedelta

from textual.app import App

from mapper.app.main_screen import MainScreen
from mapper.app.session import CONDITIONS_EVERY, WalkSession
from mapper.readings.serial_meter import SerialMeterReader
from mapper.survey.store import Survey


class WalkApp(App[None]):
    """Walk a survey's grid and record readings.

    Parameters
    ----------
    survey : Survey
        Opened for writing; the app closes it when it exits.
    conditions_every : timedelta
        Ask for RH and temperature when none is younger than this.
    ask_conditions : bool
        Whether to ask at all (tests and benchmarks switch it off).
    meter : SerialMeterReader, optional
        A meter sending one reading per line; each value is offered in the entry line.
    """

    TITLE = "mapper walk"
    ENABLE_COMMAND_PALETTE = False

    def __init__(
        self,
        survey: Survey,
        conditions_every: timedelta = CONDITIONS_EVERY,
        ask_conditions: bool = True,
        meter: SerialMeterReader | None = None,
    ) -> None:
        super().__init__()
        self.survey = survey
        self.session = WalkSession(survey, conditions_every)
        self.ask_conditions = ask_conditions
        self.meter = meter

    def on_mount(self) -> None:
        self.push_screen(MainScreen(self.session, self.ask_conditions, self.meter))

    async def action_quit(self) -> None:
        self.session.remember_position()
        self.exit()
