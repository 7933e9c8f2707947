"""The main screen's panels and lines, each a widget that draws itself from its own data.

Each widget holds what it shows in ``reactive`` attributes (small frozen summaries from the walk,
:mod:`mapper.app.session`) and redraws in its ``watch_*`` method when they change; setting the
same value again draws nothing. The screen only hands them new data. The attributes are
Textual's ``var`` reactives: the watcher draws, so a change does not also repaint the whole widget.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import TYPE_CHECKING

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.reactive import reactive, var
from textual.widgets import Label, ProgressBar, Static

from mapper.app.entry_line import EntryLine
from mapper.app.session import DRY_AIR_RH_PERCENT, ConditionsSummary, PlaceSummary, ProgressSummary
from mapper.survey.store import utc_now
from mapper.units import format_field, from_si
from mapper.wording import plural

if TYPE_CHECKING:
    from mapper.workflow import LiveResult
from mapper.field.inputs import MIN_FIELD_POSITIONS

#: How often the clocks are redrawn, seconds.
TICK_S = 1.0


def hms(seconds: float) -> str:
    """``h:mm:ss`` of a duration in seconds (negative counts as zero)."""
    seconds = int(max(seconds, 0))
    return f"{seconds // 3600}:{seconds % 3600 // 60:02d}:{seconds % 60:02d}"


def age_text(seconds: float) -> str:
    """How long ago, in the largest sensible unit: ``12 min ago``, ``5 h ago``, ``14 days ago``."""
    minutes = int(seconds // 60)
    if minutes < 120:
        return f"{minutes} min ago"
    if minutes < 48 * 60:
        return f"{minutes // 60} h ago"
    return f"{minutes // (24 * 60)} days ago"


class TitleLine(Static):
    """Survey name, file, display unit and sign convention."""

    #: ``(survey name, file name, display unit, sign convention)``.
    heading: reactive[tuple[str, str, str, str] | None] = var(None)

    def watch_heading(self, heading: tuple[str, str, str, str] | None) -> None:
        if heading is None:
            self.update("")
            return
        name, file, unit, sign = heading
        self.update(f" {name} · {file} · {unit}, {sign} sign · F1 help")


class PointPanel(Static):
    """The current place: the planned point and its readings (or the free position), and the
    next point to do.

    Parameters
    ----------
    fmt : callable
        Writes a physics-sign value (V/m) in the display unit and sign convention.
    """

    #: Where the surveyor stands and what was read there.
    place: reactive[PlaceSummary | None] = var(None)
    #: Display unit of the spread.
    unit: reactive[str] = var("V/m")

    def __init__(self, fmt, *, id: str | None = None) -> None:  # noqa: A002 - Textual's name
        super().__init__("", id=id)
        self.fmt = fmt

    def watch_place(self) -> None:
        self._draw()

    def watch_unit(self) -> None:
        self._draw()

    def _draw(self) -> None:
        place = self.place
        if place is None:
            self.update("")
            return
        t = Text()
        if place.free_xy is not None:
            t.append("Free position\n", style="bold")
            t.append(f"x {place.free_xy[0]:.2f} m  y {place.free_xy[1]:.2f} m\n")
            t.append(f"readings here: {place.free_count}\n")
            t.append("arrows nudge · click places · F4 back to grid\n", style="dim")
        else:
            p, stats = place.point, place.stats
            t.append(f"Point {p.label}", style="bold reverse")
            t.append(f"  x {p.x:.2f} m, y {p.y:.2f} m\n")
            if not stats.readings:
                t.append("no reading yet\n", style="dim")
            else:
                t.append(f"readings here ({len(stats.readings)}):\n")
                for r in stats.readings[-3:]:
                    local = r.time.astimezone().strftime("%H:%M:%S")
                    t.append(f"  {r.entered_value:g} {r.entered_unit}  {local}")
                    if r.flags:
                        t.append(f"  [{', '.join(r.flags)}]", style="yellow")
                    if r.note:
                        t.append(f"  “{r.note[:18]}”", style="italic")
                    t.append("\n")
                t.append(f"mean {self.fmt(stats.mean_v_per_m)}")
                if stats.spread_v_per_m is not None:
                    spread = from_si(stats.spread_v_per_m, self.unit)
                    t.append(f"  spread ±{spread:.3g} {self.unit}")
                t.append("\n")
        if place.heading is None:
            t.append("all planned points done", style="bold green")
        else:
            target, dist, arrow = place.heading
            t.append(f"next to do: {target.label}  {dist:.1f} m {arrow}", style="bold")
        self.update(t)


class ProgressPanel(Vertical):
    """Points done and readings, the session's clock and the survey's age, and a progress bar.

    The clock is the panel's own: it redraws itself every :data:`TICK_S`.
    """

    #: Points done, readings, first reading.
    progress: reactive[ProgressSummary | None] = var(None)
    #: The clock's reading (monotonic seconds), set by the panel's timer.
    now: reactive[float] = var(time.monotonic)

    def __init__(self, *, id: str | None = None) -> None:  # noqa: A002 - Textual's name
        super().__init__(id=id)
        self._opened = time.monotonic()
        self._shown = ""

    def compose(self) -> ComposeResult:
        yield Static("", id="progress-text")
        yield ProgressBar(total=1, show_eta=False, id="progress")

    def on_mount(self) -> None:
        self.set_interval(TICK_S, self._tick)

    def _tick(self) -> None:
        self.now = time.monotonic()

    def watch_progress(self, progress: ProgressSummary | None) -> None:
        if progress is not None and self.is_mounted:
            self.query_one("#progress", ProgressBar).update(total=progress.total, progress=progress.done)
        self._draw()

    def watch_now(self) -> None:
        self._draw()

    def _draw(self) -> None:
        progress = self.progress
        if progress is None or not self.is_mounted:
            return
        since = ""
        if progress.first_time is not None:
            age = (utc_now() - progress.first_time).total_seconds()
            since = (f" · survey {hms(age)}" if 0 <= age < 86400
                     else f" · since {progress.first_time.astimezone():%d %b}")
        text = (f"done {progress.done}/{progress.total} · {plural(progress.readings, 'reading')}\n"
                f"session {hms(self.now - self._opened)}{since}")
        if text != self._shown:  # each update costs a layout pass
            self._shown = text
            self.query_one("#progress-text", Static).update(text)


@dataclass(frozen=True)
class HotspotSummary:
    """What the hotspot line says about the latest refit.

    Attributes
    ----------
    level : str
        The action level in the display unit.
    fitted : bool
        A refit has finished.
    mapped : bool
        It made a map.
    count : int
        Hotspots found.
    suggestions : int
        Suggested points.
    """

    level: str
    fitted: bool = False
    mapped: bool = False
    count: int = 0
    suggestions: int = 0

    @classmethod
    def of(cls, live: LiveResult | None, threshold_v_per_m: float, unit: str) -> HotspotSummary:
        """The summary of a refit (``None``: none has finished yet)."""
        level = format_field(threshold_v_per_m, unit, 3)
        if live is None:
            return cls(level)
        return cls(level, True, live.grid is not None, live.hotspot_count, len(live.suggestions))


class HotspotLine(Static):
    """Hotspots at the action level on the live map, and how many points it suggests."""

    summary: reactive[HotspotSummary | None] = var(None)

    def watch_summary(self, s: HotspotSummary | None) -> None:
        if s is None:
            self.update("")
            return
        if not s.fitted:
            text = f"hotspots (▲ ±{s.level}): fitting…"
        elif not s.mapped:
            text = f"hotspots (▲ ±{s.level}): {s.count or '-'}\nmap after {MIN_FIELD_POSITIONS} readings"
        else:
            text = f"hotspots (▲ ±{s.level}): {s.count}"
            if s.suggestions:
                text += f"\nsuggested points: {s.suggestions} (F3)"
        self.update(text)
        self.set_class(bool(s.count), "alert")


class ConditionsLine(Static):
    """The newest RH and temperature, how old they are, dry air and whether a note is due.

    How old is the line's own clock: it looks again every :data:`TICK_S`.
    """

    summary: reactive[ConditionsSummary | None] = var(None)
    #: Minutes since the newest note (the line changes once a minute at most).
    age_min: reactive[int] = var(0)

    def on_mount(self) -> None:
        self.set_interval(TICK_S, self._tick)

    def _tick(self) -> None:
        last = self.summary.last if self.summary is not None else None
        if last is not None:
            self.age_min = int((utc_now() - last.time).total_seconds() // 60)

    def watch_summary(self) -> None:
        self._tick()
        self._draw()

    def watch_age_min(self) -> None:
        self._draw()

    def _draw(self) -> None:
        s = self.summary
        if s is None:
            return
        last = s.last
        if last is None:
            self.update("conditions: none yet (F5)")
            self.set_class(True, "warn")
            return
        parts = []
        if last.rh_percent is not None:
            parts.append(f"RH {last.rh_percent:g} %")
        if last.temperature_c is not None:
            parts.append(f"{last.temperature_c:g} °C")
        text = f"{' · '.join(parts)} · {age_text(60 * self.age_min)}"
        if s.dry:
            text += f"\nDRY AIR (RH < {DRY_AIR_RH_PERCENT:g} %): high charging"
        if s.due:
            text += "\nconditions due (F5)"
        self.update(text)
        self.set_class(s.dry or s.due, "warn")


class EntryRow(Horizontal):
    """The entry line with its label: where the value goes and what kind it is."""

    #: Kind of the next typed value: ``field``, ``reference`` or ``zero``.
    armed: reactive[str] = var("field")
    #: The current place: a point label, or ``free``.
    where: reactive[str] = var("")
    #: Unit of a bare number.
    unit: reactive[str] = var("V/m")

    def compose(self) -> ComposeResult:
        yield Label("", id="entry-label")
        yield EntryLine(id="entry")

    def on_mount(self) -> None:
        self._draw()

    def watch_armed(self) -> None:
        self._draw()

    def watch_where(self) -> None:
        self._draw()

    def watch_unit(self) -> None:
        self._draw()

    def _draw(self) -> None:
        if not self.is_mounted:
            return
        where = self.where
        label = {"field": f"{where} ›", "reference": f"REF at {where} ›", "zero": "ZERO ›"}[self.armed]
        self.query_one("#entry-label", Label).update(label)
        self.query_one("#entry", EntryLine).placeholder = (
            f"value in {self.unit} (or with unit, e.g. 2.1kV/m), Enter saves"
        )
        self.set_class(self.armed != "field", "armed")


@dataclass(frozen=True)
class StatusMessage:
    """One status line: its text, whether it is an error, and when it was said."""

    text: str
    error: bool = False
    stamp: str = ""


class StatusLine(Static):
    """The last thing the app said, with the time it said it (errors in the error style)."""

    message: reactive[StatusMessage | None] = var(None, always_update=True)

    def say(self, text: str, error: bool = False) -> None:
        """Show one line, stamped with the local time."""
        self.message = StatusMessage(text, error, time.strftime("%H:%M:%S"))

    def watch_message(self, message: StatusMessage | None) -> None:
        if message is None:
            return
        self.update(f"{message.stamp}  {message.text}")
        self.set_class(message.error, "error")


__all__ = [
    "TICK_S",
    "ConditionsLine",
    "EntryRow",
    "HotspotLine",
    "HotspotSummary",
    "PointPanel",
    "ProgressPanel",
    "StatusLine",
    "StatusMessage",
    "TitleLine",
    "age_text",
    "hms",
]
