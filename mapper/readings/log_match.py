"""Meter logs: a timed series of readings placed on a walked track by time.

A log is a CSV ``time,value[,unit]`` (header optional). Each logged reading taken between two
track positions is placed by linear interpolation in time between them, provided one of the two
is within ``tolerance_s`` of the reading; otherwise the reading is reported and not placed.
Readings before the first or after the last position take that position when it is within the
tolerance. Lon/lat tracks are interpolated in degrees, which over the few seconds between fixes
differs from a straight line on the ground by far less than GPS error.
"""

from __future__ import annotations

import bisect
import csv
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, date, datetime, tzinfo
from pathlib import Path

from mapper.errors import MapperError
from mapper.readings.importing import parse_time
from mapper.readings.tracks import Track
from mapper.textfile import open_utf8
from mapper.units import parse_field, to_physics_sign

#: Largest time between a logged reading and the nearest track position for it to be placed,
#: seconds (choice, no source: a few steps at walking pace; 1 Hz GPS loggers fix every second).
DEFAULT_TOLERANCE_S = 10.0

#: A reading this close in time to a labelled fix (a grid-point arrival) takes that point's
#: label and planned position, seconds (choice, no source).
DEFAULT_SNAP_S = 5.0


@dataclass(frozen=True)
class LogEntry:
    """One line of a meter log.

    Attributes
    ----------
    line : int
        Line of the log file.
    time : datetime
        UTC.
    value : float
        The number as logged.
    unit : str
        Its unit.
    value_v_per_m : float
        The field in V/m, physics sign convention.
    """

    line: int
    time: datetime
    value: float
    unit: str
    value_v_per_m: float


@dataclass(frozen=True)
class PlacedReading:
    """A logged reading with the position the track gives it.

    Attributes
    ----------
    entry : LogEntry
        The log line.
    x, y : float
        Site metres, or lon/lat degrees when the track is lon/lat.
    point : str or None
        Grid point label when the reading was snapped to a grid-point arrival.
    nearest_fix_s : float
        Time to the nearest track position, seconds.
    """

    entry: LogEntry
    x: float
    y: float
    point: str | None
    nearest_fix_s: float


@dataclass(frozen=True)
class UnplacedReading:
    """A logged reading the track could not place.

    Attributes
    ----------
    entry : LogEntry
        The log line.
    reason : str
        Why, in one line.
    """

    entry: LogEntry
    reason: str


@dataclass(frozen=True)
class LogMatch:
    """Result of :func:`match_log_to_track`.

    Attributes
    ----------
    placed : tuple of PlacedReading
        In log order.
    unplaced : tuple of UnplacedReading
        In log order.
    lonlat : bool
        True when placed positions are lon/lat degrees.
    tolerance_s : float
        Tolerance used, seconds.
    warnings : tuple of str
        E.g. log and track not overlapping in time.
    """

    placed: tuple[PlacedReading, ...]
    unplaced: tuple[UnplacedReading, ...]
    lonlat: bool
    tolerance_s: float
    warnings: tuple[str, ...] = ()

    def report(self) -> list[str]:
        """Lines for the console: counts, then one line per unplaced reading."""
        lines = [
            f"{len(self.placed)} log readings placed, {len(self.unplaced)} not placed "
            f"(no track position within {self.tolerance_s:g} s)"
        ]
        lines += [f"line {u.entry.line}: {u.reason}" for u in self.unplaced]
        lines += list(self.warnings)
        return lines


def read_meter_log(
    path: str | Path,
    default_unit: str | None = None,
    sign: str = "physics",
    naive_tz: tzinfo = UTC,
) -> tuple[LogEntry, ...]:
    """Read a meter log ``time,value[,unit]``.

    Parameters
    ----------
    path : str or Path
        CSV file. A header line (``time,value[,unit]``) is optional; without one the columns are
        taken in that order. A value may carry its unit (``2.1 kV/m``).
    default_unit : str, optional
        Unit of values with none.
    sign : str
        Sign convention of the log (``physics`` or ``atmospheric``).
    naive_tz : tzinfo
        Zone of times written without an offset.

    Returns
    -------
    tuple of LogEntry
        In file order, which must be time order.
    """
    path = Path(path)
    handle = open_utf8(path, "log")
    entries: list[LogEntry] = []
    with handle:
        reader = csv.reader(handle)
        columns: tuple[int, int, int | None] = (0, 1, None)
        width: int | None = None
        for row in reader:
            line = reader.line_num
            cells = [c.strip() for c in row]
            if not any(cells):
                continue
            if width is None:
                lowered = [c.lower() for c in cells]
                if "time" in lowered:
                    if "value" not in lowered:
                        raise MapperError(
                            f"log header has no 'value' column; expected time,value[,unit] "
                            f"(got {', '.join(cells)})",
                            where=f"{path}:{line}",
                        )
                    columns = (
                        lowered.index("time"),
                        lowered.index("value"),
                        lowered.index("unit") if "unit" in lowered else None,
                    )
                    width = len(cells)
                    continue
                width = len(cells)
                columns = (0, 1, 2 if width >= 3 else None)
                if width not in (2, 3):
                    raise MapperError(
                        f"{width} fields; a log line is time,value[,unit]", where=f"{path}:{line}"
                    )
            where = f"{path}:{line}"
            if len(cells) != width:
                raise MapperError(f"{len(cells)} fields, expected {width}", where=where)
            it, iv, iu = columns
            try:
                t = parse_time(cells[it], naive_tz)
            except MapperError as exc:
                raise MapperError(exc.message, where=f"{where}: time") from None
            unit = cells[iu] if iu is not None and cells[iu] else default_unit
            try:
                value, unit_name, si = parse_field(cells[iv], unit)
            except MapperError as exc:
                raise MapperError(exc.message, where=f"{where}: value") from None
            if entries and t < entries[-1].time:
                raise MapperError(
                    f"time {t.isoformat()} is earlier than line {entries[-1].line}'s "
                    f"{entries[-1].time.isoformat()}; a meter log must be in time order -- sort it "
                    "or check for a clock reset",
                    where=where,
                )
            entries.append(LogEntry(line, t, value, unit_name, to_physics_sign(si, sign)))
    if not entries:
        raise MapperError("log has no readings", where=str(path))
    return tuple(entries)


def _clock(t: datetime) -> str:
    return t.strftime("%H:%M:%S")


def match_log_to_track(
    log: Sequence[LogEntry],
    track: Track,
    tolerance_s: float = DEFAULT_TOLERANCE_S,
    snap_s: float = DEFAULT_SNAP_S,
) -> LogMatch:
    """Place each logged reading on the track by linear interpolation in time.

    Parameters
    ----------
    log : sequence of LogEntry
        From :func:`read_meter_log`.
    track : Track
        From :mod:`mapper.readings.tracks`.
    tolerance_s : float
        Largest time to the nearest track position for a reading to be placed, seconds.
    snap_s : float
        Readings within this time of a labelled fix take its label and position, seconds.

    Returns
    -------
    LogMatch
        Placed and unplaced readings, both in log order.
    """
    if tolerance_s < 0 or snap_s < 0:
        raise MapperError("tolerance and snap time must not be negative (seconds)")
    fixes = track.fixes
    times = [f.time.timestamp() for f in fixes]
    placed: list[PlacedReading] = []
    unplaced: list[UnplacedReading] = []
    for entry in log:
        t = entry.time.timestamp()
        i = bisect.bisect_left(times, t)
        if i < len(times) and times[i] == t:
            before = after = i
        else:
            before, after = i - 1, i
        candidates = [j for j in (before, after) if 0 <= j < len(times)]
        nearest = min(candidates, key=lambda j: abs(times[j] - t))
        gap = abs(times[nearest] - t)
        if gap > tolerance_s:
            if before < 0:
                reason = (
                    f"{_clock(entry.time)} is {gap:.0f} s before the track starts "
                    f"({_clock(fixes[0].time)})"
                )
            elif after >= len(times):
                reason = (
                    f"{_clock(entry.time)} is {gap:.0f} s after the track ends "
                    f"({_clock(fixes[-1].time)})"
                )
            else:
                reason = (
                    f"{_clock(entry.time)} falls in a {times[after] - times[before]:.0f} s gap in "
                    f"the track ({_clock(fixes[before].time)} to {_clock(fixes[after].time)})"
                )
            unplaced.append(UnplacedReading(entry, reason))
            continue
        if 0 <= before < len(times) and 0 <= after < len(times) and times[after] > times[before]:
            w = (t - times[before]) / (times[after] - times[before])
            x = fixes[before].x + w * (fixes[after].x - fixes[before].x)
            y = fixes[before].y + w * (fixes[after].y - fixes[before].y)
        else:
            x, y = fixes[nearest].x, fixes[nearest].y
        point = None
        labelled = [j for j in candidates if fixes[j].point and abs(times[j] - t) <= snap_s]
        if labelled:
            j = min(labelled, key=lambda j: abs(times[j] - t))
            point, x, y = fixes[j].point, fixes[j].x, fixes[j].y
        placed.append(PlacedReading(entry, x, y, point, gap))
    warnings: list[str] = []
    if log and not placed:
        warnings.append(
            f"no log reading could be placed: the log runs {log[0].time.isoformat()} to "
            f"{log[-1].time.isoformat()}, the track {track.start.isoformat()} to "
            f"{track.end.isoformat()} (UTC); check both files' time zones (times without an "
            "offset are read as UTC) and the meter's clock"
        )
    return LogMatch(tuple(placed), tuple(unplaced), track.lonlat, tolerance_s, tuple(warnings))


@dataclass(frozen=True)
class LogImport:
    """A meter log ready to store.

    Attributes
    ----------
    readings : list of NewReading
        Placed readings in site metres, log order.
    match : LogMatch
        The match they came from.
    outside : tuple of UnplacedReading
        Placed readings that fell outside the site outline (not in ``readings``).
    """

    readings: list
    match: LogMatch
    outside: tuple[UnplacedReading, ...] = ()

    def report(self) -> list[str]:
        """Lines for the console: the match report plus readings outside the site."""
        lines = self.match.report()
        lines += [f"line {u.entry.line}: {u.reason}" for u in self.outside]
        return lines


def to_new_readings(
    match: LogMatch,
    site,
    *,
    meter_id: str | None = None,
    kind: str = "field",
    height_m: float | None = None,
    note: str = "",
    outline_tolerance_m: float = 0.05,
) -> LogImport:
    """Turn placed log readings into :class:`mapper.readings.model.NewReading` rows.

    Lon/lat positions are converted to site metres with the site's georeference; readings whose
    position falls outside the site outline (beyond ``outline_tolerance_m``) are reported in
    ``outside`` and not returned.

    Parameters
    ----------
    match : LogMatch
        From :func:`match_log_to_track`.
    site : mapper.site.model.Site
        The survey's site.
    meter_id : str, optional
        Meter that logged the readings (``None``: the survey's current meter).
    kind : str
        Reading kind for all of them (``field`` normally).
    height_m : float, optional
        Meter height, metres.
    note : str
        Note for every reading, e.g. the log file name.
    outline_tolerance_m : float
        How far outside the outline a position may be, metres.
    """
    import numpy as np
    import shapely

    from mapper.readings.importing import site_xy_from_lonlat
    from mapper.readings.model import NewReading

    placed = match.placed
    if match.lonlat and placed:
        xs, ys = site_xy_from_lonlat(
            site, np.array([p.x for p in placed]), np.array([p.y for p in placed])
        )
    else:
        xs = np.array([p.x for p in placed])
        ys = np.array([p.y for p in placed])
    outline = site.outline
    shapely.prepare(outline)
    rows: list = []
    outside: list[UnplacedReading] = []
    for p, x, y in zip(placed, xs, ys, strict=True):
        if outline.distance(shapely.Point(float(x), float(y))) > outline_tolerance_m:
            outside.append(
                UnplacedReading(
                    p.entry, f"position ({x:.2f}, {y:.2f}) m is outside the site outline"
                )
            )
            continue
        rows.append(
            NewReading(
                x=float(x),
                y=float(y),
                entered_value=p.entry.value,
                entered_unit=p.entry.unit,
                value_v_per_m=p.entry.value_v_per_m,
                kind=kind,
                point=p.point,
                time=p.entry.time,
                height_m=height_m,
                meter_id=meter_id,
                note=note,
            )
        )
    return LogImport(rows, match, tuple(outside))


def import_meter_log(
    log_path: str | Path,
    positions_path: str | Path,
    site,
    plan_points: Mapping[str, tuple[float, float]],
    *,
    unit: str | None = None,
    sign: str = "physics",
    tolerance_s: float = DEFAULT_TOLERANCE_S,
    snap_s: float = DEFAULT_SNAP_S,
    naive_tz: tzinfo = UTC,
    on_date: date | None = None,
    meter_id: str | None = None,
) -> LogImport:
    """Read a meter log and a position source and place the log on the site.

    This is what ``mapper import SURVEY LOG.csv --log --track TRACK`` needs: pass the survey's
    site, plan positions and sign convention, then store ``result.readings`` with
    ``Survey.add_readings`` and print ``result.report()``.

    Parameters
    ----------
    log_path : str or Path
        Meter log ``time,value[,unit]``.
    positions_path : str or Path
        Track (CSV ``time,x,y`` or ``time,lon,lat``, GPX, NMEA) or CSV ``time,point``.
    site : mapper.site.model.Site
        The survey's site (outline, georeference).
    plan_points : mapping of str to (float, float)
        Planned positions by label, site metres.
    unit : str, optional
        Unit of log values without one.
    sign : str
        Sign convention of the log (the survey's).
    tolerance_s : float
        Largest time from a reading to the nearest position, seconds.
    snap_s : float
        Readings this close to a grid-point arrival take that point, seconds.
    naive_tz : tzinfo
        Zone of times without an offset in either file.
    on_date : datetime.date, optional
        Date of a GGA-only NMEA track.
    meter_id : str, optional
        Meter that logged (``None``: the survey's current meter).
    """
    from mapper.readings.tracks import read_positions

    log = read_meter_log(log_path, default_unit=unit, sign=sign, naive_tz=naive_tz)
    track = read_positions(positions_path, plan_points, naive_tz=naive_tz, on_date=on_date)
    match = match_log_to_track(log, track, tolerance_s=tolerance_s, snap_s=snap_s)
    return to_new_readings(match, site, meter_id=meter_id, note=f"log {Path(log_path).name}")
