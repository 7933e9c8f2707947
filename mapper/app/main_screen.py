"""The main screen: map, current point, entry line, progress, hotspots, status.

The screen composes the panels (:mod:`mapper.app.panels`, :mod:`mapper.app.legend`,
:mod:`mapper.app.map_view`), binds the keys and turns each action into a call on the walk
(:class:`~mapper.app.session.WalkSession`); after a change it hands the panels fresh summaries
and each redraws itself if what it shows changed. The live refit
(:func:`mapper.workflow.live_products`) and the serial meter run in workers.
"""

from __future__ import annotations

import time
from typing import TYPE_CHECKING

from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.screen import Screen
from textual.widgets import Footer, Input
from textual.worker import get_current_worker

from mapper.app.entry_line import EntryLine
from mapper.app.help_screen import HelpScreen
from mapper.app.hotspot_screen import HotspotScreen
from mapper.app.keys import bindings
from mapper.app.legend import Legend, LegendKey
from mapper.app.map_data import LiveMap, MarkerBook, prepare_live_map
from mapper.app.map_view import MapScene, MapView
from mapper.app.panels import (
    TICK_S,
    ConditionsLine,
    EntryRow,
    HotspotLine,
    HotspotSummary,
    PointPanel,
    ProgressPanel,
    StatusLine,
    TitleLine,
)
from mapper.app.raster import LAYER_TITLES, LAYERS, Markers
from mapper.app.session import DRY_AIR_RH_PERCENT, WalkSession
from mapper.app.walk_forms import conditions_form, edit_form, free_form, jump_form, settings_form
from mapper.corrections.pipeline import load_meters
from mapper.errors import MapperError
from mapper.readings.serial_meter import MeterLine, SerialMeterReader
from mapper.units import format_field
from mapper.wording import plural

if TYPE_CHECKING:
    from mapper.workflow import LiveResult

#: Wait after a reading before the refit starts, seconds: the frame saying "saved" is drawn
#: first, and quick successive readings share one refit.
REFIT_DELAY_S = 0.1
#: Below this terminal width the side panel narrows.
NARROW_COLUMNS = 120


class MainScreen(Screen):
    """Where the survey is walked.

    Parameters
    ----------
    session : WalkSession
        The open walk.
    ask_conditions : bool
        Ask for RH and temperature at the start and whenever they are due.
    meter : SerialMeterReader, optional
        A meter that sends one reading per line; its values land in the entry line.
    """

    CSS_PATH = "main_screen.tcss"
    BINDINGS = bindings()

    def __init__(
        self, session: WalkSession, ask_conditions: bool = True, meter: SerialMeterReader | None = None
    ) -> None:
        super().__init__()
        self.session = session
        self.ask_conditions = ask_conditions
        self.meter = meter
        self.map_layer = "estimate"
        #: The latest refit (``None`` until one finished) and the same ready to draw.
        self.live: LiveResult | None = None
        self.live_map: LiveMap | None = None
        self.marks = MarkerBook(session)
        self.suggestion_index = 0
        self.last_status = ""
        self.last_saved_label = ""
        self._asked_conditions_at = 0.0
        self._refit_timer = None
        self._remember_timer = None

    # ---------------------------------------------------------------- layout
    def compose(self) -> ComposeResult:
        yield TitleLine("", id="title")
        with Horizontal(id="body"):
            yield MapView(self.session.site, id="map")
            with Vertical(id="side"):
                yield PointPanel(self.session.fmt, id="point")
                yield ProgressPanel(id="progress-panel")
                yield HotspotLine("", id="hotspots")
                yield ConditionsLine("", id="conditions")
                yield Legend("", id="legend")
        yield EntryRow(id="entry-row")
        yield StatusLine("", id="status")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.query_one("#entry", EntryLine).focus()
        self.refresh_all()
        self.set_status(f"opened {self.session.survey.path.name}: {self.resume_text()}")
        self.schedule_refit()  # after the first frame is drawn
        self.set_interval(TICK_S, self._tick)
        if self.ask_conditions and self.session.conditions_due():
            self.call_after_refresh(self.action_conditions)
        if self.meter is not None:
            self._meter_worker(self.meter)

    def on_resize(self, event) -> None:
        self.set_class(event.size.width < NARROW_COLUMNS, "-narrow")

    def resume_text(self) -> str:
        """One line on where the walk stands."""
        s = self.session
        n = s.field_count
        if n == 0:
            return f"new walk, start at point {s.current.label}"
        return (f"{plural(n, 'reading')}, {s.visited_count}/{len(s.points)} points done, resuming at point "
                f"{s.current.label}")

    @property
    def armed(self) -> str:
        """Kind of the next typed value: ``field``, ``reference`` or ``zero``."""
        return self.query_one(EntryRow).armed

    @armed.setter
    def armed(self, kind: str) -> None:
        self.query_one(EntryRow).armed = kind

    # ------------------------------------------------------------ refreshing
    def refresh_all(self) -> None:
        """Hand every panel its data from the session; each redraws only what changed.

        Nothing here goes through all readings of the survey: the session keeps its counts,
        means and markers up to date reading by reading.
        """
        s = self.session
        self.query_one(TitleLine).heading = (s.survey.name, s.survey.path.name, s.display_unit, s.sign_convention)
        point = self.query_one(PointPanel)
        point.unit = s.display_unit
        point.place = s.place_summary()
        self.query_one(ProgressPanel).progress = s.progress_summary()
        self.query_one(HotspotLine).summary = HotspotSummary.of(self.live, s.threshold_v_per_m, s.display_unit)
        self.query_one(ConditionsLine).summary = s.conditions_summary()
        row = self.query_one(EntryRow)
        row.where, row.unit = ("free" if s.free_xy is not None else s.current.label), s.display_unit
        self._draw_map()

    def _draw_map(self) -> None:
        s = self.session
        live = self.live_map
        layer = self.map_layer if live is not None and live.grid is not None else "readings"
        scale = live.scale(layer, s.threshold_v_per_m) if live is not None else s.threshold_v_per_m
        suggested = tuple((g.x, g.y) for g in live.result.suggestions) if live is not None else ()
        self.query_one(MapView).scene = MapScene(
            layer, live, scale, self.marks.planned(layer), self.marks.free(layer), s.position, suggested,
        )
        self.query_one(Legend).key = LegendKey(layer, self.map_layer, scale, s.display_unit, s.threshold_v_per_m)

    def _markers(self, layer: str, sign: float) -> Markers:
        """Planned points (to do / done) and free-position readings as map markers."""
        return self.marks.markers(layer, sign)

    def set_status(self, text: str, error: bool = False) -> None:
        """Show one line on the status line (errors in the error style)."""
        self.last_status = text
        self.query_one(StatusLine).say(text, error)

    def _tick(self) -> None:
        self.query_one(ConditionsLine).summary = self.session.conditions_summary()
        if (
            self.ask_conditions
            and self.session.conditions_due()
            and self.app.screen is self
            and time.monotonic() - self._asked_conditions_at > self.session.conditions_every.total_seconds()
        ):
            self.action_conditions()

    # ------------------------------------------------------------- live map
    def start_refit(self) -> None:
        """Refit the live field in a worker; a newer refit cancels this one."""
        s = self.session
        self._refit_worker(list(s.readings.values()), s.threshold_v_per_m, load_meters(s.survey))

    def schedule_refit(self, delay_s: float = REFIT_DELAY_S) -> None:
        """Refit shortly, once the screen has shown the change; a newer call restarts the wait."""
        if self._refit_timer is not None:
            self._refit_timer.stop()
        self._refit_timer = self.set_timer(delay_s, self.start_refit)

    @work(thread=True, exclusive=True, group="refit", description="live refit")
    def _refit_worker(self, readings: list, threshold_v_per_m: float, meters: dict) -> None:
        from mapper.workflow import live_products  # the field engine loads here, not before the first screen

        worker = get_current_worker()
        s = self.session
        result = live_products(
            readings, s.site, threshold_v_per_m, s.points, cancelled=lambda: worker.is_cancelled, meters=meters,
            unit=s.display_unit,
        )
        if result is None or worker.is_cancelled:
            return
        live = prepare_live_map(result, readings, s.sign_convention, s.plan.spacing_m)
        if not worker.is_cancelled:
            self.app.call_from_thread(self._apply_live, live)

    def _apply_live(self, live: LiveMap) -> None:
        old = self.live.notes if self.live is not None else ()
        self.live_map, self.live = live, live.result
        s = self.session
        self.query_one(HotspotLine).summary = HotspotSummary.of(self.live, s.threshold_v_per_m, s.display_unit)
        self._draw_map()
        for note in live.result.notes:
            if note not in old:  # say each once, not after every refit
                self.set_status(note, error=True)

    # ------------------------------------------------------------- live meter
    @work(thread=True, exclusive=True, group="meter", description="serial meter")
    def _meter_worker(self, meter: SerialMeterReader) -> None:
        """Read the meter's lines until the screen goes; each one is offered in the entry line."""
        worker = get_current_worker()
        try:
            meter.open()
        except MapperError as exc:
            self.app.call_from_thread(self.set_status, f"meter: {exc}", True)
            return
        try:
            while not worker.is_cancelled:
                line = meter.read_line()
                if line is not None:
                    self.app.call_from_thread(self.offer_meter_line, line)
        finally:
            meter.close()

    def offer_meter_line(self, line: MeterLine) -> None:
        """Put a value the meter sent into the entry line; Enter records it where the surveyor is."""
        if not line.ok:
            self.set_status(f"meter line ignored: {line.error}", error=True)
            return
        entry = self.query_one("#entry", EntryLine)
        entry.value = f"{line.value:g}{line.unit}"
        entry.cursor_position = len(entry.value)
        self.set_status(f"meter sent {line.value:g} {line.unit}: Enter records it at {self.session.where}")

    # ------------------------------------------------------------- recording
    @on(Input.Submitted, "#entry")
    def _submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.record(event.value)

    def record(self, text: str) -> None:
        """Save a typed value at the current place; refuse it in place when it is not valid."""
        s = self.session
        entry = self.query_one("#entry", EntryLine)
        kind = self.armed
        try:
            stored = s.record(text, kind=kind, remember=False)
        except MapperError as exc:
            entry.add_class("invalid")
            self.set_status(f"not saved: {exc}", error=True)
            return
        # Committed: only now say so.
        entry.value = ""
        entry.remove_class("invalid")
        self.armed = "field"
        self.last_saved_label = stored.point or ""
        self.set_status(f"saved {s.describe(stored)}")
        self.refresh_all()
        # After the frame showing "saved": store where to resume (a second, separate commit) and
        # start the refit, whose thread would otherwise compete with drawing that frame.
        self.call_after_refresh(s.remember_position)
        if kind == "field":
            self.schedule_refit()

    def action_clear(self) -> None:
        entry = self.query_one("#entry", EntryLine)
        entry.value = ""
        entry.remove_class("invalid")
        if self.armed != "field":
            self.set_status(f"{self.armed} entry cancelled")
        self.armed = "field"

    def action_arm(self, kind: str) -> None:
        self.armed = "field" if self.armed == kind else kind
        if self.armed != "field":
            self.set_status(f"type the {kind} reading and press Enter (Esc cancels)")

    def action_undo(self) -> None:
        try:
            undone = self.session.undo()
        except MapperError as exc:
            self.set_status(str(exc), error=True)
            return
        self.set_status(f"undone {self.session.describe(undone)} (kept in the file, marked undone)")
        self.refresh_all()
        self.schedule_refit()

    # ---------------------------------------------------------------- moving
    def action_move(self, direction: str) -> None:
        s = self.session
        if s.free_xy is not None:
            step = s.plan.spacing_m / 4
            dx, dy = {"up": (0, step), "down": (0, -step), "left": (-step, 0), "right": (step, 0)}[direction]
            try:
                s.free(s.free_xy[0] + dx, s.free_xy[1] + dy)
            except MapperError as exc:
                self.set_status(str(exc), error=True)
                return
        else:
            target = s.neighbour(direction)
            if target is None:
                self.set_status(f"no planned point {direction} of point {s.current.label}")
                return
            s.go(target)
            self._remember()
        self.refresh_all()

    def _remember(self) -> None:
        # Debounced: store the position once the surveyor stops moving for a moment.
        if self._remember_timer is not None:
            self._remember_timer.stop()
        self._remember_timer = self.set_timer(1.0, self.session.remember_position)

    def action_unvisited(self, step: int) -> None:
        s = self.session
        target = s.next_unvisited(step=step)
        if target is None:
            self.set_status("every planned point has a reading")
            return
        s.go(target)
        self._remember()
        self.refresh_all()

    def action_suggested(self) -> None:
        sugg = self.live.suggestions if self.live else ()
        if not sugg:
            self.set_status("no suggested point yet (needs a live map)")
            return
        g = sugg[self.suggestion_index % len(sugg)]
        self.suggestion_index += 1
        s = self.session
        if g.label and g.label in s.by_label:
            s.go(s.by_label[g.label])
            self._remember()
        else:
            s.free(g.x, g.y)
        self.set_status(f"suggested: {g.why}")
        self.refresh_all()

    @on(MapView.Clicked)
    def _clicked(self, event: MapView.Clicked) -> None:
        s = self.session
        if s.free_xy is not None:
            try:
                s.free(event.x, event.y)
            except MapperError as exc:
                self.set_status(str(exc), error=True)
                return
        else:
            s.go(s.nearest_point(event.x, event.y))
            self._remember()
        self.refresh_all()
        self.query_one("#entry", EntryLine).focus()

    def action_free(self) -> None:
        s = self.session
        if s.free_xy is not None:
            s.go(s.current)  # back where the walk order was left, not to the nearest point
            self.set_status(f"back on the grid at point {s.current.label}")
            self.refresh_all()
            return
        self.app.push_screen(free_form(s, self.refresh_all), self._form_done)

    def action_jump(self) -> None:
        self.app.push_screen(jump_form(self.session, self.refresh_all, self._remember), self._form_done)

    def _form_done(self, message: str | None) -> None:
        if message:
            self.set_status(message)
        self.refresh_all()
        self.query_one("#entry", EntryLine).focus()

    # ------------------------------------------- notes, edits, conditions, settings
    def action_edit(self) -> None:
        self.app.push_screen(edit_form(self.session, self.start_refit), self._form_done)

    def action_conditions(self) -> None:
        self._asked_conditions_at = time.monotonic()

        def warn_dry(rh: float) -> None:
            self.app.notify(
                f"RH {rh:g} % is below {DRY_AIR_RH_PERCENT:g} %: charging rises sharply in dry air.",
                title="Dry air", severity="warning", timeout=8,
            )

        self.app.push_screen(conditions_form(self.session, warn_dry), self._form_done)

    def action_settings(self) -> None:
        self.app.push_screen(settings_form(self.session, self.start_refit), self._form_done)

    # ---------------------------------------------------------- other screens
    def action_layer(self) -> None:
        self.map_layer = LAYERS[(LAYERS.index(self.map_layer) + 1) % len(LAYERS)]
        self._draw_map()
        self.set_status(f"map shows {LAYER_TITLES[self.map_layer]}")

    def action_help(self) -> None:
        self.app.push_screen(HelpScreen())

    def action_hotspots(self) -> None:
        s = self.session
        live = self.live
        hotspots = live.hotspots if live else ()

        def done(peak: tuple[float, float] | None) -> None:
            if peak is not None:
                s.go(s.nearest_point(*peak))
                self._remember()
                self.set_status(f"at point {s.current.label}, the planned point nearest the hotspot peak")
            self.refresh_all()
            self.query_one("#entry", EntryLine).focus()

        self.app.push_screen(
            HotspotScreen(
                hotspots, format_field(s.threshold_v_per_m, s.display_unit, 3),
                live.engine if live else "no map yet", s.display_unit,
            ),
            done,
        )
