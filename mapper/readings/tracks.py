"""Walked tracks: timestamped positions from CSV, GPX or NMEA, and grid-point arrival times.

A track tells where the operator was at each moment, so a meter's timed log can be placed
(:mod:`mapper.readings.log_match`). Positions are returned as read: site metres for a CSV with
``x,y`` columns, WGS 84 longitude/latitude in degrees for GPX, NMEA and CSV with ``lon,lat``
columns (``Track.lonlat`` says which); converting lon/lat to site metres is the site
georeference's job.

Times are timezone-aware UTC. Times written without a UTC offset are read in ``naive_tz``
(UTC unless told otherwise).
"""

from __future__ import annotations

import csv
import math
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta, tzinfo
from pathlib import Path

from mapper.errors import MapperError
from mapper.readings.importing import parse_time
from mapper.textfile import open_utf8, read_utf8
from mapper.units import parse_number

#: File name endings read as NMEA 0183 sentences.
NMEA_SUFFIXES = (".nmea", ".nma", ".gps")


@dataclass(frozen=True)
class TrackFix:
    """One timestamped position.

    Attributes
    ----------
    time : datetime
        UTC.
    x, y : float
        Site metres, or longitude and latitude in degrees when the track is lon/lat.
    where : str
        Where it came from (``file:line`` or ``file: track 1 segment 1 point 7``).
    point : str or None
        Grid point label when the fix is a grid-point arrival.
    """

    time: datetime
    x: float
    y: float
    where: str
    point: str | None = None


@dataclass(frozen=True)
class Track:
    """Timestamped positions in time order.

    Attributes
    ----------
    fixes : tuple of TrackFix
        Non-decreasing in time.
    lonlat : bool
        True when ``x, y`` are WGS 84 longitude and latitude, degrees.
    source : str
        File the track came from.
    skipped : int
        Sentences or points skipped as invalid (bad checksum, no fix).
    """

    fixes: tuple[TrackFix, ...]
    lonlat: bool
    source: str = ""
    skipped: int = 0

    @property
    def start(self) -> datetime:
        """Time of the first fix."""
        return self.fixes[0].time

    @property
    def end(self) -> datetime:
        """Time of the last fix."""
        return self.fixes[-1].time


@dataclass(frozen=True)
class PointVisit:
    """The time a planned grid point was reached.

    Attributes
    ----------
    time : datetime
        UTC.
    point : str
        Grid point label.
    line : int
        Line of the file.
    """

    time: datetime
    point: str
    line: int


def _check_order(fixes: Sequence[TrackFix]) -> None:
    for prev, fix in zip(fixes, fixes[1:], strict=False):
        if fix.time < prev.time:
            raise MapperError(
                f"time {fix.time.isoformat()} is earlier than the previous position's "
                f"{prev.time.isoformat()} ({prev.where}); a track must be in time order",
                where=fix.where,
            )


def _open_csv(path: Path) -> tuple[list[str], csv.reader, object]:
    handle = open_utf8(path, "track file")
    reader = csv.reader(handle)
    try:
        header = [h.strip().lower() for h in next(reader)]
    except StopIteration:
        handle.close()
        raise MapperError("file is empty; expected a header line", where=str(path)) from None
    return header, reader, handle


def _data_rows(reader, header: Sequence[str], path: Path) -> Iterator[tuple[int, str, list[str]]]:
    """The non-blank rows after the header as ``(line, where, cells)``; a wrong field count is refused."""
    for row in reader:
        line = reader.line_num
        if not any(c.strip() for c in row):
            continue
        where = f"{path}:{line}"
        if len(row) != len(header):
            raise MapperError(f"{len(row)} fields, header has {len(header)}", where=where)
        yield line, where, row


def read_track_csv(path: str | Path, naive_tz: tzinfo = UTC) -> Track:
    """Read a CSV track with columns ``time,x,y`` (site metres) or ``time,lon,lat`` (degrees).

    Parameters
    ----------
    path : str or Path
        The file; a header line is required.
    naive_tz : tzinfo
        Zone of times without an offset.
    """
    path = Path(path)
    header, reader, handle = _open_csv(path)
    with handle:  # type: ignore[attr-defined]
        if "time" not in header:
            raise MapperError(f"no 'time' column (header: {', '.join(header)})", where=f"{path}:1")
        if {"x", "y"} <= set(header):
            cols, lonlat = ("x", "y"), False
        elif {"lon", "lat"} <= set(header):
            cols, lonlat = ("lon", "lat"), True
        else:
            raise MapperError(
                f"expected columns time,x,y (site metres) or time,lon,lat (degrees); header: "
                f"{', '.join(header)}",
                where=f"{path}:1",
            )
        it, ix, iy = header.index("time"), header.index(cols[0]), header.index(cols[1])
        ip = header.index("point") if "point" in header else None
        fixes: list[TrackFix] = []
        for _line, where, row in _data_rows(reader, header, path):
            column = "time"
            try:
                t = parse_time(row[it], naive_tz)
                column = cols[0]
                x = parse_number(row[ix])
                column = cols[1]
                y = parse_number(row[iy])
            except MapperError as exc:
                raise MapperError(exc.message, where=f"{where}: {column}") from None
            if lonlat:
                _check_lonlat(x, y, where)
            point = row[ip].strip() or None if ip is not None else None
            fixes.append(TrackFix(t, x, y, where, point))
    if not fixes:
        raise MapperError("track has no positions", where=str(path))
    _check_order(fixes)
    return Track(tuple(fixes), lonlat, str(path))


def _check_lonlat(lon: float, lat: float, where: str) -> None:
    if not (-180.0 <= lon <= 180.0 and -90.0 <= lat <= 90.0):
        raise MapperError(
            f"lon {lon}, lat {lat} is not a WGS 84 position (lon -180..180, lat -90..90)",
            where=where,
        )


def read_gpx(path: str | Path) -> Track:
    """Read the track points of a GPX file (with gpxpy) as lon/lat fixes in time order.

    Parameters
    ----------
    path : str or Path
        GPX 1.0 or 1.1 file; every track point needs a ``<time>``.
    """
    import gpxpy
    import gpxpy.gpx

    path = Path(path)
    text = read_utf8(path, "GPX file")
    try:
        gpx = gpxpy.parse(text)
    except gpxpy.gpx.GPXException as exc:
        raise MapperError(f"not a readable GPX file: {exc}", where=str(path)) from None
    fixes: list[TrackFix] = []
    for ti, trk in enumerate(gpx.tracks, 1):
        for si, seg in enumerate(trk.segments, 1):
            for pi, pt in enumerate(seg.points, 1):
                where = f"{path}: track {ti} segment {si} point {pi}"
                if pt.time is None:
                    raise MapperError("track point has no <time>; a track needs times", where=where)
                t = pt.time if pt.time.tzinfo else pt.time.replace(tzinfo=UTC)
                _check_lonlat(pt.longitude, pt.latitude, where)
                fixes.append(TrackFix(t.astimezone(UTC), pt.longitude, pt.latitude, where))
    if not fixes:
        raise MapperError("GPX file has no track points (<trkpt>)", where=str(path))
    _check_order(fixes)
    return Track(tuple(fixes), True, str(path))


def read_nmea(path: str | Path, on_date: date | None = None) -> Track:
    """Read NMEA 0183 position sentences (with pynmea2) as lon/lat fixes.

    RMC sentences (valid status ``A``) carry date and time and are used when present; otherwise
    GGA sentences with a fix (quality > 0) are dated with ``on_date``, rolling over midnight.
    Sentences with a bad checksum or no fix are skipped and counted in ``Track.skipped``.

    Parameters
    ----------
    path : str or Path
        Text file with one sentence per line.
    on_date : datetime.date, optional
        UTC date of a GGA-only file.
    """
    import pynmea2

    path = Path(path)
    try:
        lines = path.read_text(encoding="ascii", errors="replace").splitlines()
    except OSError as exc:
        raise MapperError(f"cannot read NMEA file: {exc.strerror}", where=str(path)) from None
    rmc: list[TrackFix] = []
    gga: list[tuple[int, object]] = []
    skipped = 0
    for number, text in enumerate(lines, 1):
        text = text.strip()
        if not text.startswith("$"):
            if text:
                skipped += 1
            continue
        try:
            msg = pynmea2.parse(text)
        except pynmea2.ParseError:
            skipped += 1
            continue
        where = f"{path}:{number}"
        kind = getattr(msg, "sentence_type", "")
        try:
            if kind == "RMC":
                if msg.status != "A" or msg.datestamp is None or msg.timestamp is None:
                    skipped += 1
                    continue
                t = datetime.combine(msg.datestamp, msg.timestamp.replace(tzinfo=None), UTC)
                rmc.append(TrackFix(t, msg.longitude, msg.latitude, where))
            elif kind == "GGA":
                if not msg.gps_qual or int(msg.gps_qual) == 0 or msg.timestamp is None:
                    skipped += 1
                    continue
                gga.append((number, msg))
        except (ValueError, TypeError, AttributeError):
            skipped += 1
    if rmc:
        fixes = rmc
    elif gga:
        if on_date is None:
            raise MapperError(
                "NMEA file has GGA sentences but no RMC sentences with a date; give the survey "
                "date (UTC) for it",
                where=str(path),
            )
        fixes = []
        day = on_date
        previous: datetime | None = None
        for number, msg in gga:
            t = datetime.combine(day, msg.timestamp.replace(tzinfo=None), UTC)
            if previous is not None and t < previous - timedelta(hours=12):
                day += timedelta(days=1)
                t += timedelta(days=1)
            previous = t
            fixes.append(TrackFix(t, msg.longitude, msg.latitude, f"{path}:{number}"))
    else:
        raise MapperError(
            f"no valid RMC or GGA position sentences ({skipped} lines skipped)", where=str(path)
        )
    for fix in fixes:
        _check_lonlat(fix.x, fix.y, fix.where)
        if not (math.isfinite(fix.x) and math.isfinite(fix.y)):
            raise MapperError("position is not a number", where=fix.where)
    _check_order(fixes)
    return Track(tuple(fixes), True, str(path), skipped)


def read_track(path: str | Path, naive_tz: tzinfo = UTC, on_date: date | None = None) -> Track:
    """Read a track, choosing the reader by file name ending.

    ``.gpx`` -> :func:`read_gpx`; ``.nmea``, ``.nma``, ``.gps`` -> :func:`read_nmea`;
    anything else -> :func:`read_track_csv`.

    Parameters
    ----------
    path : str or Path
        The track file.
    naive_tz : tzinfo
        Zone of CSV times without an offset.
    on_date : datetime.date, optional
        Date of a GGA-only NMEA file.
    """
    suffix = Path(path).suffix.lower()
    if suffix == ".gpx":
        return read_gpx(path)
    if suffix in NMEA_SUFFIXES:
        return read_nmea(path, on_date)
    return read_track_csv(path, naive_tz)


def read_point_times(path: str | Path, naive_tz: tzinfo = UTC) -> tuple[PointVisit, ...]:
    """Read the times grid points were reached: CSV with columns ``time,point``.

    Parameters
    ----------
    path : str or Path
        The file; a header line is required; times must be in order.
    naive_tz : tzinfo
        Zone of times without an offset.
    """
    path = Path(path)
    header, reader, handle = _open_csv(path)
    with handle:  # type: ignore[attr-defined]
        if not {"time", "point"} <= set(header):
            raise MapperError(
                f"expected columns time,point; header: {', '.join(header)}", where=f"{path}:1"
            )
        it, ip = header.index("time"), header.index("point")
        visits: list[PointVisit] = []
        for line, where, row in _data_rows(reader, header, path):
            try:
                t = parse_time(row[it], naive_tz)
            except MapperError as exc:
                raise MapperError(exc.message, where=f"{where}: time") from None
            label = row[ip].strip()
            if not label:
                raise MapperError("empty point label", where=f"{where}: point")
            if visits and t < visits[-1].time:
                raise MapperError(
                    f"time {t.isoformat()} is earlier than line {visits[-1].line}'s "
                    f"{visits[-1].time.isoformat()}; point times must be in time order",
                    where=where,
                )
            visits.append(PointVisit(t, label, line))
    if not visits:
        raise MapperError("no point times", where=str(path))
    return tuple(visits)


def track_from_point_times(
    visits: Sequence[PointVisit],
    plan_points: Mapping[str, tuple[float, float]],
    source: str = "",
) -> Track:
    """Turn grid-point arrival times into a track through the planned positions.

    Parameters
    ----------
    visits : sequence of PointVisit
        From :func:`read_point_times`.
    plan_points : mapping of str to (float, float)
        Planned position of each grid point label, site metres.
    source : str
        File name, for messages.
    """
    fixes: list[TrackFix] = []
    for v in visits:
        where = f"{source}:{v.line}" if source else f"line {v.line}"
        if v.point not in plan_points:
            known = sorted(plan_points)
            sample = ", ".join(known[:5]) + (", ..." if len(known) > 5 else "")
            raise MapperError(
                f"grid point {v.point!r} is not in the plan (labels such as {sample})",
                where=where,
            )
        x, y = plan_points[v.point]
        fixes.append(TrackFix(v.time, float(x), float(y), where, v.point))
    if not fixes:
        raise MapperError("no point times", where=source or None)
    _check_order(fixes)
    return Track(tuple(fixes), False, source)


def read_positions(
    path: str | Path,
    plan_points: Mapping[str, tuple[float, float]] | None = None,
    naive_tz: tzinfo = UTC,
    on_date: date | None = None,
) -> Track:
    """Read any position source a meter log can be matched to.

    A GPX, NMEA or CSV track (:func:`read_track`), or a CSV ``time,point`` list of grid-point
    arrival times (recognised by a ``point`` column without coordinates), which is turned into a
    track through the planned positions.

    Parameters
    ----------
    path : str or Path
        The file.
    plan_points : mapping of str to (float, float), optional
        Planned positions by label, site metres; needed for point times.
    naive_tz : tzinfo
        Zone of CSV times without an offset.
    on_date : datetime.date, optional
        Date of a GGA-only NMEA file.
    """
    path = Path(path)
    if path.suffix.lower() not in (".gpx", *NMEA_SUFFIXES):
        header, _, handle = _open_csv(path)
        handle.close()  # type: ignore[attr-defined]
        has_coordinates = {"x", "y"} <= set(header) or {"lon", "lat"} <= set(header)
        if "point" in header and not has_coordinates:
            if plan_points is None:
                raise MapperError(
                    "point times need the survey's plan to know where each point is",
                    where=str(path),
                )
            return track_from_point_times(read_point_times(path, naive_tz), plan_points, str(path))
    return read_track(path, naive_tz, on_date)
