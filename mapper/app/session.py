"""The walk: where the surveyor stands, what has been recorded, and every change to the file.

:class:`WalkSession` is the terminal app's model and holds no user-interface code, so tests and
benchmarks drive it directly. Every method that changes the survey commits through
:class:`~mapper.survey.store.Survey` before it returns; the caller may then say "saved".
"""

from __future__ import annotations

import itertools
import math
import statistics
from collections.abc import Iterable
from dataclasses import dataclass
from datetime import datetime, timedelta

import shapely

from mapper.errors import MapperError
from mapper.plan.grid import PlanPoint
from mapper.readings.model import DOUBTFUL_FLAG, Conditions, NewReading, Reading
from mapper.survey.store import Survey, utc_now
from mapper.units import canonical_unit, format_field, parse_field, parse_number, to_physics_sign

#: Survey meta key holding the label of the point the surveyor stands at.
CURRENT_POINT_KEY = "app_current_point"
#: Below this relative humidity, percent, charging rises sharply (common practice; e.g. walking
#: on carpet gives about 35 kV at 10-20 % RH and 1.5 kV at 65-90 % RH, US Army TM 9-254,
#: Table 8-7).
DRY_AIR_RH_PERCENT = 30.0
#: Ask for conditions again after this long without a note (common practice, no source).
CONDITIONS_EVERY = timedelta(minutes=30)
#: Moves of the arrow keys: (row step, column step). Row A is the lowest y, drawn at the bottom.
DIRECTIONS = {"up": (1, 0), "down": (-1, 0), "left": (0, -1), "right": (0, 1)}
#: Arrows for eight compass sectors of the map (x right, y up), starting at +x, counter-clockwise.
_ARROWS = ("→", "↗", "↑", "↖", "←", "↙", "↓", "↘")


@dataclass(frozen=True)
class Entry:
    """A typed field value, checked.

    Attributes
    ----------
    entered_value : float
        The number as typed, in ``entered_unit`` and the survey's sign convention.
    entered_unit : str
        Canonical unit it was typed in.
    value_v_per_m : float
        The field in V/m, physics sign convention.
    """

    entered_value: float
    entered_unit: str
    value_v_per_m: float


def parse_entry(text: str, display_unit: str, sign_convention: str) -> Entry:
    """Parse what was typed on the entry line.

    Parameters
    ----------
    text : str
        A number, optionally with a unit suffix (``2.1``, ``2.1kV/m``, ``-40 V/in``).
    display_unit : str
        Unit of a bare number.
    sign_convention : str
        ``physics`` or ``atmospheric``: how the meter signs its readings.

    Returns
    -------
    Entry
        Raises :class:`MapperError` with the reason for text, unknown units, NaN, infinity or a
        magnitude beyond the breakdown strength of air.
    """
    value, unit, v_si = parse_field(text, display_unit)
    return Entry(value, unit, to_physics_sign(v_si, sign_convention))


def parse_xy(text: str) -> tuple[float, float]:
    """Parse ``"x, y"`` (site metres; comma, semicolon or space between)."""
    parts = [p for p in text.replace(";", ",").replace(" ", ",").split(",") if p]
    if len(parts) != 2:
        raise MapperError(f"{text.strip()!r} is not a position; expected 'x, y' in metres, e.g. '4.5, 2'")
    return parse_number(parts[0]), parse_number(parts[1])


def parse_conditions(rh_text: str, temp_text: str) -> tuple[float | None, float | None]:
    """Parse relative humidity (percent) and temperature (°C); blank means not measured."""
    rh = parse_number(rh_text.rstrip("% ")) if rh_text.strip() else None
    temp = parse_number(temp_text.replace("°C", "").replace("C", "").strip()) if temp_text.strip() else None
    if rh is None and temp is None:
        raise MapperError("enter the relative humidity (%) or the temperature (°C), or press Esc to skip")
    if rh is not None and not 0 <= rh <= 100:
        raise MapperError(f"relative humidity {rh:g} % is outside 0-100 %")
    if temp is not None and not -60 <= temp <= 80:
        raise MapperError(f"temperature {temp:g} °C is outside -60..80 °C")
    return rh, temp


def direction_arrow(dx: float, dy: float) -> str:
    """Arrow for a displacement on the map (x right, y up); empty for no displacement."""
    if dx == 0 and dy == 0:
        return ""
    sector = round(math.degrees(math.atan2(dy, dx)) / 45.0) % 8
    return _ARROWS[sector]


@dataclass(frozen=True)
class PointStats:
    """Current field readings at one place.

    Attributes
    ----------
    readings : tuple of Reading
        Oldest first.
    mean_v_per_m : float or None
        Mean, V/m (physics sign).
    spread_v_per_m : float or None
        Sample standard deviation, V/m; ``None`` for fewer than two readings.
    """

    readings: tuple[Reading, ...]
    mean_v_per_m: float | None
    spread_v_per_m: float | None


@dataclass(frozen=True)
class PlaceSummary:
    """Where the surveyor stands and what has been read there (what the point panel shows).

    Attributes
    ----------
    point : PlanPoint
        The planned point the walk is at (left for the moment in free-position mode).
    free_xy : (float, float) or None
        Off-grid position, site metres, in free-position mode.
    stats : PointStats or None
        Field readings at ``point`` (``None`` in free-position mode).
    free_count : int
        Field readings at the free position.
    heading : (PlanPoint, float, str) or None
        Next point to do, its distance (metres) and direction arrow; ``None`` when all are done.
    """

    point: PlanPoint
    free_xy: tuple[float, float] | None
    stats: PointStats | None
    free_count: int
    heading: tuple[PlanPoint, float, str] | None


@dataclass(frozen=True)
class ProgressSummary:
    """How far the walk has come.

    Attributes
    ----------
    done, total : int
        Planned points with a current field reading, and all planned points.
    readings : int
        Current field readings.
    first_time : datetime or None
        Earliest current reading of any kind (UTC).
    """

    done: int
    total: int
    readings: int
    first_time: datetime | None


@dataclass(frozen=True)
class ConditionsSummary:
    """The newest condition note and what it means for the walk.

    Attributes
    ----------
    last : Conditions or None
        Newest note.
    dry : bool
        The newest RH is below :data:`DRY_AIR_RH_PERCENT`.
    due : bool
        No note is younger than the session's ``conditions_every``.
    """

    last: Conditions | None
    dry: bool
    due: bool


class WalkSession:
    """A survey being walked.

    Parameters
    ----------
    survey : Survey
        Opened for writing.
    conditions_every : timedelta
        Ask for conditions when none has been noted for this long.
    """

    def __init__(self, survey: Survey, conditions_every: timedelta = CONDITIONS_EVERY) -> None:
        if not survey.writable:
            raise MapperError("the walk needs the survey open for writing", where=str(survey.path))
        self.survey = survey
        self.site = survey.site
        self.plan = survey.plan
        self.points: tuple[PlanPoint, ...] = self.plan.points
        self.by_label = {p.label: p for p in self.points}
        self.by_cell = {(p.row, p.col): p for p in self.points}
        self.conditions_every = conditions_every
        self.display_unit = survey.display_unit
        self.sign_convention = survey.sign_convention
        self.threshold_v_per_m = survey.threshold_v_per_m
        self.outline = self.site.outline
        shapely.prepare(self.outline)
        #: Current readings of every kind, by id, in the order they were stored.
        self.readings: dict[int, Reading] = {}
        #: Bumped by every change to :attr:`readings` (views cache what they drew by it).
        self.revision = 0
        #: Bumped when a free-position field reading stops counting (the others only grow).
        self.free_epoch = 0
        self._by_point: dict[str, list[int]] = {}  # field readings at each planned point
        self._means: dict[str, float] = {}  # their means, V/m
        self._at_point: dict[str, list[int]] = {}  # readings of any kind at each planned point
        self._at_free: dict[tuple[int, int], list[int]] = {}  # readings off the plan, by position
        self._free_field: dict[int, Reading] = {}  # field readings off the plan, in storage order
        self._field_count = 0
        self._first_time: datetime | None = None
        self._first_stale = False
        for r in sorted(survey.readings(kind=None), key=lambda r: r.id):
            self._add(r)
        self._conditions: list[Conditions] = survey.conditions()
        saved = survey.get(CURRENT_POINT_KEY)
        self.current: PlanPoint = self.by_label.get(saved or "") or self._first_unvisited() or self.points[0]
        #: Off-grid position (site metres) while taking free-position readings, else ``None``.
        self.free_xy: tuple[float, float] | None = None
        self.started = utc_now()

    # ------------------------------------------------------------- indexes
    # Kept up to date reading by reading, so nothing the screen asks for after each Enter has to
    # go through every reading of the survey.
    def _add(self, r: Reading) -> None:
        self.readings[r.id] = r
        self.revision += 1
        if r.point:
            self._at_point.setdefault(r.point, []).append(r.id)
        else:
            self._at_free.setdefault(_bucket(r.x, r.y), []).append(r.id)
        if self._first_time is None or r.time < self._first_time:
            if not self._first_stale:
                self._first_time = r.time
        if r.kind != "field":
            return
        self._field_count += 1
        if r.point:
            self._by_point.setdefault(r.point, []).append(r.id)
            self._update_mean(r.point)
        else:
            self._free_field[r.id] = r

    def _remove(self, reading: Reading) -> None:
        r = self.readings.pop(reading.id, None)
        if r is None:
            return
        self.revision += 1
        if r.point:
            _drop(self._at_point, r.point, r.id)
        else:
            _drop(self._at_free, _bucket(r.x, r.y), r.id)
        if r.time == self._first_time:
            self._first_stale = True
        if r.kind != "field":
            return
        self._field_count -= 1
        if r.point:
            _drop(self._by_point, r.point, r.id)
            self._update_mean(r.point)
        else:
            del self._free_field[r.id]
            self.free_epoch += 1

    def _update_mean(self, label: str) -> None:
        ids = self._by_point.get(label)
        if ids:
            self._means[label] = math.fsum(self.readings[i].value_v_per_m for i in ids) / len(ids)
        else:
            self._means.pop(label, None)

    def _replace(self, old: Reading, new: Reading | None) -> None:
        self._remove(old)
        if new is not None:
            self._add(new)

    # ---------------------------------------------------------- read access
    @property
    def visited(self) -> set[str]:
        """Labels of planned points with at least one current field reading."""
        return set(self._by_point)

    @property
    def visited_count(self) -> int:
        """Number of planned points with at least one current field reading."""
        return len(self._by_point)

    @property
    def field_count(self) -> int:
        """Number of current field readings (planned and free positions)."""
        return self._field_count

    @property
    def first_time(self) -> datetime | None:
        """Time of the earliest current reading of any kind, or ``None`` without readings."""
        if self._first_stale:
            self._first_time = min((r.time for r in self.readings.values()), default=None)
            self._first_stale = False
        return self._first_time

    def point_means(self) -> dict[str, float]:
        """Mean current field reading at each visited planned point, V/m (physics sign)."""
        return dict(self._means)

    def field_readings(self) -> list[Reading]:
        """Current field readings (planned and free positions), in storage order."""
        return [r for r in self.readings.values() if r.kind == "field"]

    @property
    def free_field_count(self) -> int:
        """Number of current field readings off the plan."""
        return len(self._free_field)

    def free_field_readings(self) -> list[Reading]:
        """Current field readings off the plan (free positions), in storage order."""
        return list(self._free_field.values())

    def newest_free_field_readings(self, count: int) -> list[Reading]:
        """The ``count`` most recently stored of :meth:`free_field_readings`, in storage order."""
        if count <= 0:
            return []
        return list(itertools.islice(reversed(self._free_field.values()), count))[::-1]

    def stats_at(self, label: str) -> PointStats:
        """Current field readings at a planned point, their mean and spread."""
        rs = tuple(self.readings[i] for i in self._by_point.get(label, []))
        values = [r.value_v_per_m for r in rs]
        mean = statistics.fmean(values) if values else None
        spread = statistics.stdev(values) if len(values) > 1 else None
        return PointStats(rs, mean, spread)

    @property
    def position(self) -> tuple[float, float]:
        """Where the next reading goes, site metres."""
        return self.free_xy if self.free_xy is not None else (self.current.x, self.current.y)

    @property
    def where(self) -> str:
        """The current place in words: a label, or a free position."""
        if self.free_xy is not None:
            return f"free position ({self.free_xy[0]:.2f}, {self.free_xy[1]:.2f}) m"
        return f"point {self.current.label}"

    def next_unvisited(self, after: PlanPoint | None = None, step: int = 1) -> PlanPoint | None:
        """The next (``step=1``) or previous (``step=-1``) unvisited point in walking order.

        Wraps around the plan; ``None`` when every point has a reading.
        """
        start = (after or self.current).order
        n = len(self.points)
        visited = self._by_point
        for k in range(1, n + 1):
            p = self.points[(start + step * k) % n]
            if p.label not in visited:
                return p
        return None

    def _first_unvisited(self) -> PlanPoint | None:
        return next((p for p in self.points if p.label not in self._by_point), None)

    def neighbour(self, direction: str) -> PlanPoint | None:
        """The nearest planned point in a grid direction (``up``/``down``/``left``/``right``).

        Skips holes in the plan (blocked or outside cells); ``None`` at the edge.
        """
        dr, dc = DIRECTIONS[direction]
        rows = max(p.row for p in self.points) + 1
        cols = max(p.col for p in self.points) + 1
        r, c = self.current.row + dr, self.current.col + dc
        while 0 <= r < rows and 0 <= c < cols:
            if (r, c) in self.by_cell:
                return self.by_cell[(r, c)]
            r, c = r + dr, c + dc
        return None

    def nearest_point(self, x: float, y: float) -> PlanPoint:
        """The planned point nearest to a site position (metres)."""
        return min(self.points, key=lambda p: (p.x - x) ** 2 + (p.y - y) ** 2)

    def heading(self) -> tuple[PlanPoint, float, str] | None:
        """Next unvisited point after the current place: ``(point, distance_m, arrow)``."""
        target = self.next_unvisited()
        if target is None:
            return None
        x, y = self.position
        dx, dy = target.x - x, target.y - y
        return target, math.hypot(dx, dy), direction_arrow(dx, dy)

    def place_summary(self) -> PlaceSummary:
        """The current place and its readings (a planned point's, or the free position's count)."""
        if self.free_xy is not None:
            here = sum(1 for r in self.readings_here() if r.kind == "field")
            return PlaceSummary(self.current, self.free_xy, None, here, self.heading())
        return PlaceSummary(self.current, None, self.stats_at(self.current.label), 0, self.heading())

    def progress_summary(self) -> ProgressSummary:
        """Points done, readings and when the survey started; independent of the survey's size."""
        return ProgressSummary(self.visited_count, len(self.points), self._field_count, self.first_time)

    def conditions_summary(self, now: datetime | None = None) -> ConditionsSummary:
        """The newest condition note, whether the air is dry and whether a new note is due."""
        return ConditionsSummary(self.last_conditions, self.dry_air(), self.conditions_due(now))

    # ------------------------------------------------------------- moving
    def go(self, point: PlanPoint) -> PlanPoint:
        """Stand at a planned point (leaves free-position mode)."""
        self.current = point
        self.free_xy = None
        return point

    def jump(self, label: str) -> PlanPoint:
        """Stand at a planned point given by its label (any letter case)."""
        point = self.by_label.get(label.strip().upper())
        if point is None:
            first, last = self.points[0].label, self.points[-1].label
            raise MapperError(f"no planned point {label.strip()!r}; labels run like {first} ... {last}")
        return self.go(point)

    def free(self, x: float, y: float) -> tuple[float, float]:
        """Take the next readings at an off-grid position inside the site (metres)."""
        if not self.outline.covers(shapely.Point(x, y)):
            beyond = self.outline.distance(shapely.Point(x, y))
            raise MapperError(f"position ({x:g}, {y:g}) m is outside the site outline ({beyond:.2f} m beyond it)")
        self.free_xy = (float(x), float(y))
        return self.free_xy

    def remember_position(self) -> None:
        """Store the current point label in the survey so reopening resumes here."""
        if self.survey.get(CURRENT_POINT_KEY) != self.current.label:
            self.survey.set(CURRENT_POINT_KEY, self.current.label)

    # ----------------------------------------------------------- recording
    def record(self, text: str, kind: str = "field", advance: bool = True, remember: bool = True) -> Reading:
        """Record a typed value at the current place; committed when this returns.

        Parameters
        ----------
        text : str
            Number with optional unit suffix.
        kind : str
            ``field``, ``reference`` or ``zero``.
        advance : bool
            For a field reading at a planned point, move on to the next unvisited point.
        remember : bool
            Store the new position in the survey at once (the app does it after the screen
            shows "saved", to keep that path to one commit).

        Returns
        -------
        Reading
            The stored reading.
        """
        entry = parse_entry(text, self.display_unit, self.sign_convention)
        x, y = self.position
        on_grid = self.free_xy is None
        point = self.current.label if on_grid and kind != "zero" else None
        stored = self.survey.add_reading(
            NewReading(
                x=x, y=y, entered_value=entry.entered_value, entered_unit=entry.entered_unit,
                value_v_per_m=entry.value_v_per_m, kind=kind, point=point,
            ),
            source="walk",
        )
        self._add(stored)
        if advance and kind == "field" and on_grid:
            nxt = self.next_unvisited()
            if nxt is not None:
                self.current = nxt
            if remember:
                self.remember_position()
        return stored

    def undo(self) -> Reading:
        """Supersede the most recent current reading (kept in the file as undone).

        Undoing an edit brings back the value from before the edit. Returns the reading that no
        longer counts; the surveyor is taken back to its point.
        """
        last = self.survey.last_live_reading()
        if last is None:
            raise MapperError("nothing to undo: no current reading in this survey")
        new_id = self.survey.supersede(last.id, "undo")
        restored = self.survey.reading(new_id) if self.survey.is_current(new_id) else None
        self._replace(self.readings.get(last.id, last), restored)
        if last.point in self.by_label and last.kind == "field":
            self.go(self.by_label[last.point])
            self.remember_position()
        return last

    def edit(self, reading_id: int, text: str) -> Reading:
        """Replace a reading's value by a newly typed one (the old row is kept, superseded)."""
        new = self.revise(reading_id, text)
        if new is None:
            raise MapperError(f"{text.strip()!r} is the value already stored; nothing changed")
        return new

    def revise(self, reading_id: int, value_text: str = "", note: str | None = None,
               doubtful: bool | None = None) -> Reading | None:
        """Change a reading's value, note or ``doubtful`` flag in one edit row (the old row is kept).

        Parameters
        ----------
        reading_id : int
            A current reading.
        value_text : str
            New value as typed (blank keeps the value).
        note : str or None
            New note (``None`` keeps it).
        doubtful : bool or None
            Set or clear the ``doubtful`` flag (``None`` keeps the flags).

        Returns
        -------
        Reading or None
            The new row, or ``None`` when nothing changed (nothing is written).
        """
        old = self.readings.get(reading_id)
        if old is None:
            raise MapperError(f"reading {reading_id} is not current; nothing to edit")
        changes: dict = {}
        if value_text.strip():
            entry = parse_entry(value_text, self.display_unit, self.sign_convention)
            if (entry.entered_value, entry.entered_unit) != (old.entered_value, old.entered_unit):
                changes.update(entered_value=entry.entered_value, entered_unit=entry.entered_unit,
                               value_v_per_m=entry.value_v_per_m)
        if note is not None and note.strip() != old.note:
            changes["note"] = note.strip()
        if doubtful is not None and doubtful != (DOUBTFUL_FLAG in old.flags):
            flags = tuple(f for f in old.flags if f != DOUBTFUL_FLAG) + ((DOUBTFUL_FLAG,) if doubtful else ())
            changes["flags"] = ",".join(flags)
        if not changes:
            return None
        new = self.survey.reading(self.survey.supersede(reading_id, "edit", changes))
        self._replace(old, new)
        return new

    def note_place(self, note: str, doubtful: bool) -> None:
        """Note something at the current place when no reading is there (event log)."""
        x, y = self.position
        self.survey.log(
            "note",
            {"point": None if self.free_xy else self.current.label, "x_m": x, "y_m": y,
             "note": note.strip(), "flags": [DOUBTFUL_FLAG] if doubtful else []},
        )

    def readings_here(self) -> list[Reading]:
        """Current readings (any kind) at the current place, newest first."""
        if self.free_xy is None:
            found = [self.readings[i] for i in self._at_point.get(self.current.label, ())]
        else:
            fx, fy = self.free_xy
            bx, by = _bucket(fx, fy)
            near = (i for dx in (-1, 0, 1) for dy in (-1, 0, 1) for i in self._at_free.get((bx + dx, by + dy), ()))
            found = [r for r in map(self.readings.__getitem__, near) if math.hypot(r.x - fx, r.y - fy) < 1e-6]
        return sorted(found, key=lambda r: r.id, reverse=True)

    # ----------------------------------------------------------- conditions
    def add_conditions(self, rh_percent: float | None, temperature_c: float | None, note: str = "") -> Conditions:
        """Note RH (percent) and temperature (°C); committed when this returns."""
        stored = self.survey.add_conditions(rh_percent, temperature_c, note)
        self._conditions.append(stored)
        return stored

    @property
    def last_conditions(self) -> Conditions | None:
        """Newest condition note, or ``None``."""
        return self._conditions[-1] if self._conditions else None

    def conditions_due(self, now: datetime | None = None) -> bool:
        """True when no condition note is younger than :attr:`conditions_every`."""
        last = self.last_conditions
        return last is None or (now or utc_now()) - last.time >= self.conditions_every

    def dry_air(self) -> bool:
        """True when the newest RH is below :data:`DRY_AIR_RH_PERCENT`."""
        last = next((c for c in reversed(self._conditions) if c.rh_percent is not None), None)
        return last is not None and last.rh_percent < DRY_AIR_RH_PERCENT

    # ------------------------------------------------------------- settings
    def set_threshold(self, text: str) -> float:
        """Change the survey's action level (typed with optional unit); returns V/m."""
        _, _, v = parse_field(text, self.display_unit)
        if v <= 0:
            raise MapperError(f"threshold {text.strip()!r} must be positive, e.g. '125 V/in'")
        self.survey.set("threshold_v_per_m", repr(float(v)))
        self.threshold_v_per_m = float(v)
        return self.threshold_v_per_m

    def set_display_unit(self, unit: str) -> str:
        """Change the survey's display and entry unit."""
        unit = canonical_unit(unit)
        self.survey.set("display_unit", unit)
        self.display_unit = unit
        return unit

    # ------------------------------------------------------------- display
    def fmt(self, value_v_per_m: float | None) -> str:
        """A physics-sign V/m value in the display unit and the survey's sign convention."""
        if value_v_per_m is None:
            return "-"
        return format_field(to_physics_sign(value_v_per_m, self.sign_convention), self.display_unit)

    def describe(self, r: Reading) -> str:
        """``point A7 = 2.1 kV/m`` as typed (kind named unless a field reading)."""
        where = f"point {r.point}" if r.point else f"({r.x:.2f}, {r.y:.2f}) m"
        kind = "" if r.kind == "field" else f"{r.kind} "
        return f"{kind}{where} = {r.entered_value:g} {r.entered_unit}"


#: Side of the squares that index readings off the plan by position, metres (far above the
#: 1e-6 m within which two positions are the same place).
_BUCKET_M = 1e-3


def _bucket(x: float, y: float) -> tuple[int, int]:
    return math.floor(x / _BUCKET_M), math.floor(y / _BUCKET_M)


def _drop(index: dict, key, reading_id: int) -> None:
    ids = index.get(key)
    if ids and reading_id in ids:
        ids.remove(reading_id)
        if not ids:
            del index[key]


def field_positions(readings: Iterable[Reading]) -> tuple[list[tuple[float, float]], list[float]]:
    """Positions (metres) and raw values (V/m, physics sign) of field readings."""
    xy, values = [], []
    for r in readings:
        if r.kind == "field":
            xy.append((r.x, r.y))
            values.append(r.value_v_per_m)
    return xy, values
