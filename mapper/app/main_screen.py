"""The main screen: map, current point, entry line, progress, hotspots, status."""

from __future__ import annotations

import time
from datetime import timedelta

import numpy as np
from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.screen import Screen
from textual.widgets import Footer, Input, Label, ProgressBar, Static
from textual.worker import get_current_worker

from mapper.app.entry_line import ENTRY_PATTERN, EntryLine
from mapper.app.forms import Field, FormScreen
from mapper.app.help_screen import HelpScreen
from mapper.app.hotspot_screen import HotspotScreen
from mapper.app.keys import bindings
from mapper.app.legend import Legend, legend_text
from mapper.app.map_view import MapView
from mapper.app.palette import FEATURE_COLOURS, hex_rgb
from mapper.app.raster import LAYER_TITLES, LAYERS, Markers
from mapper.app.session import DRY_AIR_RH_PERCENT, WalkSession, parse_conditions, parse_xy
from mapper.corrections.pipeline import load_meters
from mapper.errors import MapperError
from mapper.features.colour_scale import colours_rgb
from mapper.nice import nice_ceiling
from mapper.readings.serial_meter import MeterLine, SerialMeterReader
from mapper.survey.store import utc_now
from mapper.units import FIELD_UNITS, format_field, from_si
from mapper.wording import plural
from mapper.workflow import MIN_FIELD_POSITIONS, LiveResult, live_products

#: How often the clock and the conditions reminder are checked, seconds.
TICK_S = 1.0
#: Wait after a reading before the refit starts, seconds: the frame saying "saved" is drawn
#: first, and quick successive readings share one refit.
REFIT_DELAY_S = 0.1
#: The live map colours places within this many grid spacings of a reading; farther out it
#: would show extrapolation (common practice, no source).
REACH_SPACINGS = 2.0
#: Below this terminal width the side panel narrows.
NARROW_COLUMNS = 120


def _hms(seconds: float) -> str:
    seconds = int(max(seconds, 0))
    return f"{seconds // 3600}:{seconds % 3600 // 60:02d}:{seconds % 60:02d}"


class MainScreen(Screen):
    """Where the survey is walked.

    Parameters
    ----------
    session : WalkSession
        The open walk.
    ask_conditions : bool
        Ask for RH and temperature at the start and whenever they are due.
    """

    CSS_PATH = "main_screen.tcss"
    BINDINGS = bindings()

    def __init__(
        self, session: WalkSession, ask_conditions: bool = True, meter: SerialMeterReader | None = None
    ) -> None:
        super().__init__()
        self.session = session
        self.ask_conditions = ask_conditions
        #: A meter that sends one reading per line; its values land in the entry line.
        self.meter = meter
        #: Kind of the next typed value: ``field``, ``reference`` or ``zero``.
        self.armed = "field"
        self.map_layer = "estimate"
        self.live: LiveResult | None = None
        self.suggestion_index = 0
        self.last_status = ""
        self.last_saved_label = ""
        self._asked_conditions_at = 0.0
        self._refit_timer = None
        self._remember_timer = None
        self._shown: dict[str, object] = {}
        self._t_open = time.monotonic()

    # ---------------------------------------------------------------- layout
    def compose(self) -> ComposeResult:
        s = self.session
        yield Static("", id="title")
        with Horizontal(id="body"):
            yield MapView(s.site, id="map")
            with Vertical(id="side"):
                yield Static("", id="point")
                yield Static("", id="progress-text")
                yield ProgressBar(total=len(s.points), show_eta=False, id="progress")
                yield Static("", id="hotspots")
                yield Static("", id="conditions")
                yield Legend("", id="legend")
        with Horizontal(id="entry-row"):
            yield Label("", id="entry-label")
            yield EntryLine(id="entry")
        yield Static("", id="status")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.query_one("#entry", EntryLine).focus()
        self.refresh_all()
        self.set_status(f"opened {self.session.survey.path.name}: {self.resume_text()}")
        self.start_refit()
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
        n = len(s.field_readings())
        if n == 0:
            return f"new walk, start at point {s.current.label}"
        return (f"{plural(n, 'reading')}, {len(s.visited)}/{len(s.points)} points done, resuming at point "
                f"{s.current.label}")

    # ------------------------------------------------------------ refreshing
    def refresh_all(self) -> None:
        """Redraw every panel from the session (cheap; called after each change)."""
        self._title()
        self._point_panel()
        self._progress()
        self._hotspot_line()
        self._conditions_line()
        self._entry_label()
        self._draw_map()

    def _title(self) -> None:
        s = self.session
        self._show("#title",
            f" {s.survey.name} · {s.survey.path.name} · {s.display_unit}, {s.sign_convention} sign"
            " · F1 help"
        )

    def _point_panel(self) -> None:
        s = self.session
        t = Text()
        if s.free_xy is not None:
            t.append("Free position\n", style="bold")
            t.append(f"x {s.free_xy[0]:.2f} m  y {s.free_xy[1]:.2f} m\n")
            here = [r for r in s.readings_here() if r.kind == "field"]
            t.append(f"readings here: {len(here)}\n")
            t.append("arrows nudge · click places · F4 back to grid\n", style="dim")
        else:
            p = s.current
            t.append(f"Point {p.label}", style="bold reverse")
            t.append(f"  x {p.x:.2f} m, y {p.y:.2f} m\n")
            stats = s.stats_at(p.label)
            if not stats.readings:
                t.append("no reading yet\n", style="dim")
            else:
                shown = stats.readings[-3:]
                t.append(f"readings here ({len(stats.readings)}):\n")
                for r in shown:
                    local = r.time.astimezone().strftime("%H:%M:%S")
                    t.append(f"  {r.entered_value:g} {r.entered_unit}  {local}")
                    if r.flags:
                        t.append(f"  [{', '.join(r.flags)}]", style="yellow")
                    if r.note:
                        t.append(f"  “{r.note[:18]}”", style="italic")
                    t.append("\n")
                t.append(f"mean {s.fmt(stats.mean_v_per_m)}")
                if stats.spread_v_per_m is not None:
                    spread = from_si(stats.spread_v_per_m, s.display_unit)
                    t.append(f"  spread ±{spread:.3g} {s.display_unit}")
                t.append("\n")
        heading = s.heading()
        if heading is None:
            t.append("all planned points done", style="bold green")
        else:
            target, dist, arrow = heading
            t.append(f"next to do: {target.label}  {dist:.1f} m {arrow}", style="bold")
        self._show("#point", t)

    def _progress(self) -> None:
        s = self.session
        done, total = len(s.visited), len(s.points)
        n = len(s.field_readings())
        session_s = time.monotonic() - self._t_open
        first = min((r.time for r in s.readings.values()), default=None)
        since = ""
        if first is not None:
            age = (utc_now() - first).total_seconds()
            since = (f" · survey {_hms(age)}" if 0 <= age < 86400
                     else f" · since {first.astimezone():%d %b}")
        self._show("#progress-text",
            f"done {done}/{total} · {plural(n, 'reading')}\nsession {_hms(session_s)}{since}"
        )
        self.query_one("#progress", ProgressBar).update(total=total, progress=done)

    def _hotspot_line(self) -> None:
        s = self.session
        level = format_field(s.threshold_v_per_m, s.display_unit, 3)
        live = self.live
        if live is None:
            text = f"hotspots (▲ ±{level}): fitting…"
        elif live.grid is None:
            text = (f"hotspots (▲ ±{level}): {live.hotspot_count or '-'}\n"
                    f"map after {MIN_FIELD_POSITIONS} readings")
        else:
            text = f"hotspots (▲ ±{level}): {live.hotspot_count}"
            if live.suggestions:
                text += f"\nsuggested points: {len(live.suggestions)} (F3)"
        self._show("#hotspots", text)
        self.query_one("#hotspots").set_class(bool(live and live.hotspot_count), "alert")

    def _conditions_line(self) -> None:
        s = self.session
        last = s.last_conditions
        widget = self.query_one("#conditions", Static)
        if last is None:
            self._show("#conditions", "conditions: none yet (F5)")
            widget.set_class(True, "warn")
            return
        age = (utc_now() - last.time).total_seconds()
        parts = []
        if last.rh_percent is not None:
            parts.append(f"RH {last.rh_percent:g} %")
        if last.temperature_c is not None:
            parts.append(f"{last.temperature_c:g} °C")
        text = f"{' · '.join(parts)} · {_age_text(age)}"
        if s.dry_air():
            text += f"\nDRY AIR (RH < {DRY_AIR_RH_PERCENT:g} %): high charging"
        if s.conditions_due():
            text += "\nconditions due (F5)"
        self._show("#conditions", text)
        widget.set_class(s.dry_air() or s.conditions_due(), "warn")

    def _entry_label(self) -> None:
        s = self.session
        where = "free" if s.free_xy is not None else s.current.label
        label = {"field": f"{where} ›", "reference": f"REF at {where} ›", "zero": "ZERO ›"}[self.armed]
        self.query_one("#entry-label", Label).update(label)
        entry = self.query_one("#entry", EntryLine)
        entry.placeholder = f"value in {s.display_unit} (or with unit, e.g. 2.1kV/m), Enter saves"
        self.query_one("#entry-row").set_class(self.armed != "field", "armed")

    def scale(self) -> float:
        """What the map's colours are scaled to, V/m.

        The signed layers use one fixed scale tied to the action level (the same colours as the
        report and the GeoPackage styles, whatever has been read so far); the uncertainty layer
        spans its values (a round number above the largest).
        """
        s = self.session
        grid = self.live.grid if self.live else None
        if self.map_layer == "std" and grid is not None:
            std = np.asarray(grid.std, float)
            return nice_ceiling(float(np.nanmax(std))) if np.isfinite(std).any() else 1.0
        return s.threshold_v_per_m

    def _draw_map(self) -> None:
        s = self.session
        sign = -1.0 if s.sign_convention == "atmospheric" else 1.0
        grid = self.live.grid if self.live else None
        layer = self.map_layer if grid is not None else "readings"
        scale = self.scale()
        markers = self._markers(layer, sign)
        suggested = [(g.x, g.y) for g in self.live.suggestions] if self.live else []
        reach_xy = None
        if grid is not None and getattr(self, "_reach_for", None) is not grid:
            # Positions the live field was fitted to, fixed with the grid (cached by identity).
            self._reach_for = grid
            self._reach_xy = np.array([(r.x, r.y) for r in s.field_readings()], float).reshape(-1, 2)
            reach_xy = self._reach_xy
        self.query_one("#map", MapView).show(
            layer=layer, grid=grid, scale=scale, markers=markers, current=s.position,
            suggested=suggested, sign=sign, reach_xy=reach_xy, reach_m=REACH_SPACINGS * s.plan.spacing_m,
        )
        title = f"map: {LAYER_TITLES[layer]} (F9)"
        if layer != self.map_layer:
            title += f"\n{LAYER_TITLES[self.map_layer]}: needs more readings"
        self._show("#legend", Text(title + "\n", style="bold")
                   + legend_text(layer, scale, s.display_unit, s.threshold_v_per_m))

    def _markers(self, layer: str, sign: float) -> Markers:
        """Planned points (to do / done) and free-position readings as map markers."""
        s = self.session
        means = s.point_means()
        xy = np.array([(p.x, p.y) for p in s.points], float).reshape(-1, 2)
        rgb = np.empty((len(s.points), 3), np.uint8)
        rgb[:] = hex_rgb(FEATURE_COLOURS["unvisited"])
        done = np.array([p.label in means for p in s.points], bool)
        if done.any():
            if layer == "readings":
                values = np.array([means[p.label] for p, d in zip(s.points, done, strict=True) if d])
                rgb[done] = colours_rgb(sign * values, s.threshold_v_per_m)
            else:
                rgb[done] = hex_rgb(FEATURE_COLOURS["visited"])
        free = [r for r in s.field_readings() if r.point is None]
        if free:
            fxy = np.array([(r.x, r.y) for r in free], float)
            if layer == "readings":
                frgb = colours_rgb(sign * np.array([r.value_v_per_m for r in free]), s.threshold_v_per_m)
            else:
                frgb = np.tile(np.array(hex_rgb(FEATURE_COLOURS["free"]), np.uint8), (len(free), 1))
            xy, rgb = np.vstack([xy, fxy]), np.vstack([rgb, frgb])
        return Markers(xy, rgb)

    def _show(self, selector: str, content) -> None:
        """Update a Static only when its content changed (each update costs a layout pass)."""
        key = content.markup if isinstance(content, Text) else content
        if self._shown.get(selector) != key:
            self._shown[selector] = key
            self.query_one(selector, Static).update(content)

    def set_status(self, text: str, error: bool = False) -> None:
        """Show one line on the status line (errors in the error style)."""
        self.last_status = text
        stamp = time.strftime("%H:%M:%S")
        status = self.query_one("#status", Static)
        status.update(f"{stamp}  {text}")
        status.set_class(error, "error")

    def _tick(self) -> None:
        self._progress()
        self._conditions_line()
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
        worker = get_current_worker()
        s = self.session
        result = live_products(
            readings, s.site, threshold_v_per_m, s.points, cancelled=lambda: worker.is_cancelled, meters=meters,
            unit=s.display_unit,
        )
        if result is not None and not worker.is_cancelled:
            self.app.call_from_thread(self._apply_live, result)

    def _apply_live(self, result: LiveResult) -> None:
        old = self.live.notes if self.live is not None else ()
        self.live = result
        self._hotspot_line()
        self._draw_map()
        for note in result.notes:
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
        self._entry_label()

    def action_arm(self, kind: str) -> None:
        self.armed = "field" if self.armed == kind else kind
        self._entry_label()
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
    def _moved(self) -> None:
        self._point_panel()
        self._entry_label()
        self._draw_map()

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
        self._moved()

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
        self._moved()

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
        self._moved()

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
        self._moved()
        self.query_one("#entry", EntryLine).focus()

    def action_free(self) -> None:
        s = self.session
        if s.free_xy is not None:
            s.go(s.current)  # back where the walk order was left, not to the nearest point
            self.set_status(f"back on the grid at point {s.current.label}")
            self._moved()
            return
        x, y = s.position

        def submit(values: dict[str, str]) -> str:
            fx, fy = s.free(*parse_xy(values["xy"]))
            self._moved()
            return f"free position ({fx:.2f}, {fy:.2f}) m: type readings, arrows nudge, F4 back to grid"

        self.app.push_screen(
            FormScreen(
                "Free-position reading",
                [Field("xy", "position x, y (site metres)", f"{x:.2f}, {y:.2f}", "e.g. 4.5, 2",
                       r"[0-9+\-., ;eE]*")],
                submit,
                explain="For places off the grid, e.g. right beside a conveyor. After this, arrows "
                "nudge the cursor by a quarter spacing and a click on the map places it.",
                form_id="free-form",
            ),
            self._form_done,
        )

    def action_jump(self) -> None:
        s = self.session

        def submit(values: dict[str, str]) -> str:
            p = s.jump(values["label"])
            self._remember()
            self._moved()
            return f"at {p.label}"

        self.app.push_screen(
            FormScreen(
                "Go to point",
                [Field("label", "point label", placeholder=f"e.g. {s.points[len(s.points) // 2].label}")],
                submit,
                form_id="jump-form",
            ),
            self._form_done,
        )

    def _form_done(self, message: str | None) -> None:
        if message:
            self.set_status(message)
        self.refresh_all()
        self.query_one("#entry", EntryLine).focus()

    # ------------------------------------------------------ notes and edits
    def _choices_here(self, field_only: bool = False):
        s = self.session
        return [
            (str(r.id), f"#{r.id} {s.describe(r)}  {r.time.astimezone():%H:%M:%S}")
            for r in s.readings_here()
            if not field_only or r.kind == "field"
        ]

    def action_edit(self) -> None:
        s = self.session
        choices = self._choices_here()

        def submit(values: dict[str, str]) -> str:
            doubtful = values.get("check") == "1"
            if "choice" not in values:
                if not values["note"].strip():
                    raise MapperError("type a note (there is no reading here to edit)")
                s.note_place(values["note"], doubtful)
                return f"noted at {s.where} (in the survey log)"
            note = values["note"].strip() or None  # blank keeps the stored note
            new = s.revise(int(values["choice"]), values["value"], note, True if doubtful else None)
            if new is None:
                return "nothing changed"
            if values["value"].strip():
                self.start_refit()
            flag = " [doubtful]" if doubtful else ""
            note = f" “{new.note}”" if new.note else ""
            return f"saved edit {s.describe(new)}{flag}{note} (old row kept, marked replaced)"

        fields = [Field("note", "note", "", "blank keeps the note; e.g. ioniser off")]
        if choices:
            fields.insert(0, Field("value", f"new value ({s.display_unit})", "",
                                   "blank keeps the value", ENTRY_PATTERN))
        self.app.push_screen(
            FormScreen(
                f"Edit at {s.where}",
                fields,
                submit,
                explain="Changes the highlighted reading (Shift+Tab to the list to pick another); "
                "the old row stays in the file." if choices
                else "No reading here yet: the note goes into the survey log.",
                choices=choices,
                check="mark doubtful (flag for re-check)",
                form_id="edit-form",
            ),
            self._form_done,
        )

    # ------------------------------------------------------------- conditions
    def action_conditions(self) -> None:
        s = self.session
        self._asked_conditions_at = time.monotonic()
        last = s.last_conditions

        def submit(values: dict[str, str]) -> str:
            rh, temp = parse_conditions(values["rh"], values["temp"])
            s.add_conditions(rh, temp, values["note"].strip())
            msg = "saved conditions " + " · ".join(
                part for part in (f"RH {rh:g} %" if rh is not None else "",
                                  f"{temp:g} °C" if temp is not None else "") if part
            )
            if rh is not None and rh < DRY_AIR_RH_PERCENT:
                msg += f" · DRY AIR (below {DRY_AIR_RH_PERCENT:g} %): expect high charging"
                self.app.notify(
                    f"RH {rh:g} % is below {DRY_AIR_RH_PERCENT:g} %: charging rises sharply in dry air.",
                    title="Dry air", severity="warning", timeout=8,
                )
            return msg

        every = int(s.conditions_every / timedelta(minutes=1))
        self.app.push_screen(
            FormScreen(
                "Conditions",
                [
                    Field("rh", "relative humidity, %", placeholder="e.g. 45"),
                    Field("temp", "air temperature, °C", placeholder="e.g. 21.5"),
                    Field("note", "note (optional)", placeholder="e.g. ionisers on, doors closed"),
                ],
                submit,
                explain=(
                    f"Asked at the start and every {every} min. Below {DRY_AIR_RH_PERCENT:g} % RH "
                    "charging rises sharply. Esc skips."
                    + (f"\nLast: RH {last.rh_percent} %, {last.temperature_c} °C" if last else "")
                ),
                form_id="conditions-form",
            ),
            self._form_done,
        )

    # --------------------------------------------------------------- settings
    def action_settings(self) -> None:
        s = self.session

        def submit(values: dict[str, str]) -> str:
            unit_text = values["unit"].strip() or s.display_unit
            from mapper.units import canonical_unit

            unit = canonical_unit(unit_text)
            threshold_text = values["threshold"].strip()
            if threshold_text:
                s.set_threshold(threshold_text)
            if unit != s.display_unit:
                s.set_display_unit(unit)
            self.start_refit()
            return (f"threshold {format_field(s.threshold_v_per_m, s.display_unit, 4)}, "
                    f"display unit {s.display_unit}")

        self.app.push_screen(
            FormScreen(
                "Settings",
                [
                    Field("threshold", f"threshold (action level; {s.display_unit} unless a unit is typed)",
                          format_field(s.threshold_v_per_m, s.display_unit, 4)),
                    Field("unit", f"display unit: one of {', '.join(FIELD_UNITS)}", s.display_unit),
                ],
                submit,
                explain="Saved in the survey file. The limits are defaults; the site's ESD control plan decides.",
                form_id="settings-form",
            ),
            self._form_done,
        )

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



def _age_text(seconds: float) -> str:
    """How long ago, in the largest sensible unit: ``12 min ago``, ``5 h ago``, ``14 days ago``."""
    minutes = int(seconds // 60)
    if minutes < 120:
        return f"{minutes} min ago"
    if minutes < 48 * 60:
        return f"{minutes // 60} h ago"
    return f"{minutes // (24 * 60)} days ago"
