"""Import readings from CSV, and the row checks every readings import shares (:class:`RowChecker`).

Every row is checked; all or nothing unless told to skip bad rows.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime, tzinfo
from functools import cached_property
from pathlib import Path

import numpy as np
import shapely

from mapper.atomic_file import atomic_path
from mapper.errors import MapperError
from mapper.readings.model import READING_KINDS, NewReading
from mapper.site.model import Site
from mapper.textfile import read_utf8
from mapper.units import check_field, parse_field, parse_number, to_physics_sign

#: Readings this far outside the outline are still accepted (meter held over a wall line), metres.
OUTLINE_TOLERANCE_M = 0.05
#: Years a reading's time may fall in (UTC); our own choice, far enough from year 1 and 9999 that
#: local times and time differences never overflow.
FIRST_YEAR, LAST_YEAR = 1900, 2999


@dataclass(frozen=True)
class RejectedRow:
    """A CSV row that was not imported.

    Attributes
    ----------
    line : int
        Line number in the file (header is line 1).
    row : dict
        The row as read.
    reason : str
        Why it was refused.
    """

    line: int
    row: dict
    reason: str


@dataclass(frozen=True)
class ParsedFile:
    """Readings parsed from a file, ready for :meth:`Survey.add_readings`.

    Attributes
    ----------
    readings : list of NewReading
        Good rows.
    rejected : list of RejectedRow
        Bad rows (empty unless skipping bad rows).
    """

    readings: list[NewReading]
    rejected: list[RejectedRow]


def parse_time(text: str, tz: tzinfo | None = None) -> datetime:
    """Parse an ISO 8601 time and return it in UTC.

    The one time parser of the readings stage: CSV import, walked tracks and meter logs.

    Parameters
    ----------
    text : str
        E.g. ``2024-05-02T09:15:03Z``, ``2024-05-02 11:15:03+02:00``; surrounding blanks are
        ignored.
    tz : tzinfo, optional
        Zone of times written without an offset (default UTC).

    Raises
    ------
    MapperError
        Empty text, text that is not ISO 8601 (the message shows the text and an example), or a
        time outside the years :data:`FIRST_YEAR`-:data:`LAST_YEAR` in UTC.
    """
    stripped = text.strip()
    if not stripped:
        raise MapperError("empty time; expected ISO 8601 such as 2024-05-02T09:15:03Z")
    try:
        moment = datetime.fromisoformat(stripped.replace("Z", "+00:00"))
    except ValueError:
        raise MapperError(
            f"{stripped!r} is not an ISO 8601 time; expected e.g. 2024-05-02T09:15:03Z"
        ) from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=tz or UTC)
    try:
        moment = moment.astimezone(UTC)
    except OverflowError:  # e.g. 0001-01-01T00:00+01:00 is before year 1 in UTC
        moment = None
    if moment is None or not FIRST_YEAR <= moment.year <= LAST_YEAR:
        raise MapperError(f"{stripped!r} is outside the years {FIRST_YEAR}-{LAST_YEAR} accepted for a reading")
    return moment


def site_xy_from_lonlat(site: Site, lon: np.ndarray, lat: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """WGS 84 lon/lat (degrees) to site metres, through the site's georeference."""
    return site_xy_from_crs(site, "EPSG:4326", lon, lat)


#: A row outside the site whose lat and lon, swapped, lie within this of the site's centre (degrees)
#: gets a "did you swap lon and lat?" hint (our choice: about 50 km).
SWAP_HINT_DEG = 0.5


def site_lonlat_centre(site: Site) -> tuple[float, float]:
    """WGS 84 lon/lat (degrees) of the site outline's centroid, through its georeference."""
    from pyproj import Transformer

    c = site.outline.centroid
    e, n = site.georef.forward(np.array([c.x]), np.array([c.y]))
    lon, lat = Transformer.from_crs(site.georef.crs, "EPSG:4326", always_xy=True).transform(e, n)
    return float(np.asarray(lon).ravel()[0]), float(np.asarray(lat).ravel()[0])


#: Position header pairs accepted (lower-case; matched case-insensitively), with what they hold:
#: ``site`` (site metres, or ``--crs`` coordinates), ``projected`` (needs ``--crs``) or ``lonlat``.
POSITION_HEADERS: tuple[tuple[str, str, str], ...] = (
    ("x", "y", "site"),
    ("easting", "northing", "projected"),
    ("e", "n", "projected"),
    ("longitude", "latitude", "lonlat"),
    ("lon", "lat", "lonlat"),
    ("long", "lat", "lonlat"),
)
#: Words that name a position column (one of a pair above, or a common spelling of one).
_POSITION_WORDS = {w for a, b, _ in POSITION_HEADERS for w in (a, b)} | {"lng", "east", "north"}


def accepted_position_headers() -> str:
    """The position header pairs accepted, as a message lists them."""
    return ", ".join(f"{a},{b}" for a, b, _ in POSITION_HEADERS) + " (any letter case; X,Y and E,N too)"


@dataclass(frozen=True)
class RowChecker:
    """The checks every imported reading passes, whatever file it came from.

    One checker serves the CSV and the vector-file import: the value and its unit, kind, time,
    height, plan point, meter and note are read from text cells; the position (already in site
    metres) is checked against the outline, with the swapped lon/lat hint for degrees.

    Attributes
    ----------
    site : Site
        The site the readings belong to.
    unit : str or None
        Field unit for rows without a ``unit`` cell.
    sign_convention : str
        How the values are signed (the survey's convention).
    labels : frozenset of str
        Plan point labels accepted in a ``point`` cell.
    meter_ids : frozenset of str
        Meter ids accepted in a ``meter`` cell (any when empty).
    tz : tzinfo or None
        Zone of times written without an offset (default UTC).
    """

    site: Site
    unit: str | None
    sign_convention: str
    labels: frozenset[str]
    meter_ids: frozenset[str]
    tz: tzinfo | None

    @cached_property
    def lonlat_centre(self) -> tuple[float, float]:
        """The site's centre in WGS 84 lon/lat, degrees (found once, when a row falls outside)."""
        return site_lonlat_centre(self.site)

    def check(self, row: Mapping[str, str | None], x: float, y: float, position_column: str,
              lonlat: tuple[float, float] | None = None) -> NewReading:
        """One row as a :class:`NewReading`; raises :class:`RowError` naming the bad column.

        Parameters
        ----------
        row : mapping
            Column name -> cell text (missing or ``None`` cells are empty).
        x, y : float
            Position in site metres (NaN when the georeference cannot place it).
        position_column : str
            Column (or ``geometry``) a position problem is reported in.
        lonlat : (float, float), optional
            The row's WGS 84 lon/lat in degrees, when given so: a row outside the outline whose
            swapped lon/lat lie at the site gets a hint.
        """
        if not (math.isfinite(x) and math.isfinite(y)):
            raise RowError(position_column, "this position cannot be placed by the site's georeference")
        if self.site.outline.distance(shapely.Point(x, y)) > OUTLINE_TOLERANCE_M:
            hint = ""
            if lonlat is not None and self.site.georef is not None:
                c_lon, c_lat = self.lonlat_centre
                lon, lat = lonlat
                if abs(lat - c_lon) < SWAP_HINT_DEG and abs(lon - c_lat) < SWAP_HINT_DEG:
                    hint = "; did you swap lon and lat? (swapped, it lies at the site)"
            raise RowError(position_column, f"position ({x:.2f}, {y:.2f}) m is outside the site outline{hint}")
        column = "value"
        try:
            row_unit = (row.get("unit") or "").strip() or self.unit
            value, value_unit, si = parse_field(row.get("value") or "", row_unit)
            column = "kind"
            kind = (row.get("kind") or "field").strip() or "field"
            if kind not in READING_KINDS:
                raise RowError("kind", f"unknown kind {kind!r}; accepted: {', '.join(READING_KINDS)}")
            column = "time"
            time = parse_time(row["time"], self.tz) if (row.get("time") or "").strip() else None
            column = "height_m"
            height = parse_number(row["height_m"]) if (row.get("height_m") or "").strip() else None
            if height is not None and not 0 <= height <= 50:
                raise RowError("height_m", f"height {height} m is outside 0-50 m")
            column = "point"
            point = (row.get("point") or "").strip() or None
            if point is not None and point not in self.labels:
                raise RowError("point", f"no plan point labelled {point!r}")
            column = "meter"
            meter = (row.get("meter") or "").strip() or None
            if meter is not None and self.meter_ids and meter not in self.meter_ids:
                raise RowError("meter", f"unknown meter {meter!r}; known: {', '.join(sorted(self.meter_ids))}")
            column = "value"
            physics = check_field(to_physics_sign(si, self.sign_convention))
        except MapperError as exc:
            raise RowError(column, exc.message) from None
        return NewReading(
            x=x,
            y=y,
            entered_value=value,
            entered_unit=value_unit,
            value_v_per_m=physics,
            kind=kind,
            point=point,
            time=time,
            height_m=height,
            meter_id=meter,
            note=_note(row.get("note")),
        )


def make_row_checker(
    site: Site,
    *,
    unit: str | None = None,
    sign_convention: str = "physics",
    plan_labels: Sequence[str] = (),
    meters: Sequence[str] = (),
    tz: tzinfo | None = None,
) -> RowChecker:
    """A :class:`RowChecker` for a site (its outline prepared for fast point checks)."""
    shapely.prepare(site.outline)
    return RowChecker(site, unit, sign_convention, frozenset(plan_labels), frozenset(meters), tz)


def site_xy_from_crs(site: Site, crs: str, e: np.ndarray, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Coordinates in any CRS (easting/longitude first) to site metres, through the site's georeference.

    Raises
    ------
    MapperError
        Unknown CRS, or a site without a georeference.
    """
    from pyproj import CRS, Transformer

    source = parse_crs(crs)
    if site.georef is None:
        raise MapperError(f"the site has no georeference, so {source.to_string()} coordinates cannot be placed; "
                          "give x,y in site metres or add control points to the site")
    transformer = Transformer.from_crs(source, CRS.from_user_input(site.georef.crs), always_xy=True)
    with np.errstate(all="ignore"):  # a pole or a far longitude projects to inf: refused per row
        pe, pn = transformer.transform(np.asarray(e, float), np.asarray(n, float))
        return site.georef.inverse(pe, pn)


def parse_crs(crs):
    """A CRS from ``EPSG:NNNN`` text (or anything pyproj reads); a one-line error when unknown."""
    from pyproj import CRS

    try:
        return CRS.from_user_input(crs)
    except Exception as exc:  # pyproj's CRSError carries a long message
        raise MapperError(f"unknown CRS {crs!r}: {str(exc).splitlines()[0]}; give e.g. EPSG:32633") from None


def _position_pair(fields: Sequence[str], crs: str | None, path: Path) -> tuple[str, str, str]:
    """The header's position columns (as written) and what they hold: ``site``, ``crs`` or ``lonlat``."""
    by_lower: dict[str, str] = {}
    for name in fields:
        low = name.lower()
        if low in _POSITION_WORDS and low in by_lower:
            raise MapperError(f"columns {by_lower[low]!r} and {name!r} name the same position; keep one",
                              where=f"{path}:1")
        by_lower.setdefault(low, name)
    # with --crs, easting/northing columns win over x,y (which may then be site metres beside them)
    pairs = sorted(POSITION_HEADERS, key=lambda p: crs is None or p[2] != "projected")
    for a, b, holds in pairs:
        if a in by_lower and b in by_lower:
            if holds == "projected" and crs is None:
                raise MapperError(f"{by_lower[a]},{by_lower[b]} are projected coordinates; give their CRS "
                                  "with --crs EPSG:NNNN", where=f"{path}:1")
            if holds == "site" and crs is not None:
                holds = "crs"
            return by_lower[a], by_lower[b], holds
    found = [name for name in fields if name.lower() in _POSITION_WORDS]
    what = f"position columns {','.join(found)} are not a pair mapper reads" if found else "no position columns"
    raise MapperError(f"{what}; accepted: {accepted_position_headers()}{_separator_hint(fields)}",
                      where=f"{path}:1")


def parse_readings_csv(
    path: str | Path,
    site: Site,
    *,
    unit: str | None = None,
    sign_convention: str = "physics",
    plan_labels: Sequence[str] = (),
    meters: Sequence[str] = (),
    skip_bad: bool = False,
    tz: tzinfo | None = None,
    crs: str | None = None,
) -> ParsedFile:
    """Read and check a readings CSV.

    Position columns: ``x,y`` (site metres, or coordinates in ``crs`` when given),
    ``easting,northing`` or ``E,N`` (coordinates in ``crs``), or ``longitude,latitude``,
    ``lon,lat``, ``long,lat`` (WGS 84 degrees); header names of positions in any letter case.
    Then ``value``, ``unit`` (or ``unit`` argument), and optionally ``time`` (ISO 8601),
    ``height_m``, ``note``, ``kind`` (field, reference, zero, calibration), ``meter``, ``point``.

    Parameters
    ----------
    path : str or Path
        CSV file, UTF-8, header row first.
    site : Site
        Site the readings belong to (positions are checked against its outline).
    unit : str, optional
        Field unit for rows without a ``unit`` column value.
    sign_convention : str
        How the values are signed (the survey's convention).
    plan_labels : sequence of str
        Plan point labels accepted in a ``point`` column.
    meters : sequence of str
        Meter ids accepted in a ``meter`` column.
    skip_bad : bool
        Keep good rows and return bad ones in ``rejected`` instead of raising at the first.
    tz : tzinfo, optional
        Time zone for times written without an offset (default UTC).
    crs : str, optional
        CRS of projected position columns, e.g. ``"EPSG:32633"``.
    """
    path = Path(path)
    if not path.exists():
        raise MapperError("file not found", where=str(path))
    fields, records = read_csv_records(path, "readings file")
    if not fields:
        raise MapperError("empty file; expected a header row such as x,y,value,unit", where=str(path))
    _check_header(fields, path)
    if crs is not None:
        try:
            source = parse_crs(crs)
        except MapperError as exc:
            raise MapperError(exc.message, where="--crs") from None
    col_a, col_b, holds = _position_pair(fields, crs, path)
    if holds == "lonlat" and crs is not None and not source.is_geographic:
        raise MapperError(f"{col_a},{col_b} are degrees but --crs {crs} is projected; give easting,northing "
                          "(or x,y) columns with --crs, or leave --crs out", where=f"{path}:1")
    if "value" not in fields:
        raise MapperError("header needs a 'value' column", where=f"{path}:1")
    if "unit" not in fields and unit is None:
        raise MapperError("no 'unit' column; add one or pass --unit", where=f"{path}:1")
    checker = make_row_checker(site, unit=unit, sign_convention=sign_convention, plan_labels=plan_labels,
                               meters=meters, tz=tz)
    placed = None
    degrees = holds == "lonlat"
    if holds != "site":
        limits = (180.0, 90.0) if degrees else (math.inf, math.inf)
        first = np.array([_number_or_nan(r.get(col_a), limits[0]) for _, r in records])
        second = np.array([_number_or_nan(r.get(col_b), limits[1]) for _, r in records])
        try:
            placed = site_xy_from_crs(site, crs or "EPSG:4326", first, second)
        except MapperError as exc:
            raise MapperError(exc.message, where=f"{path}:1") from None
    good: list[NewReading] = []
    rejected: list[RejectedRow] = []
    for index, (line, row) in enumerate(records):
        column = ""
        try:
            if None in row:
                raise RowError("", f"{len(row[None]) + len(fields)} fields, header has {len(fields)}")
            lonlat = None
            if placed is None:
                column = col_a
                x = parse_number(row[col_a])
                column = col_b
                y = parse_number(row[col_b])
            else:
                coords = []
                for name, limit in ((col_a, 180.0), (col_b, 90.0)):
                    column = name
                    number = parse_number(row[name])
                    if degrees and not -limit <= number <= limit:
                        raise RowError(name, f"{name} {number:g} is outside -{limit:g}..{limit:g} degrees")
                    coords.append(number)
                x, y = float(placed[0][index]), float(placed[1][index])
                lonlat = (coords[0], coords[1]) if degrees else None
            good.append(checker.check(row, x, y, col_a, lonlat))
        except (MapperError, RowError) as exc:
            col = exc.column if isinstance(exc, RowError) else column
            reason = exc.message
            if not skip_bad:
                raise MapperError(reason, where=f"{path}:{line}: {col}" if col else f"{path}:{line}") from None
            rejected.append(RejectedRow(line, dict(row), f"{col}: {reason}" if col else reason))
    if not good and not rejected:
        raise MapperError("no data rows", where=str(path))
    return ParsedFile(good, rejected)


def write_rejected(path: str | Path, rejected: Sequence[RejectedRow], label: str = "line") -> Path:
    """Write rejected rows with their line and reason beside the input as ``NAME.rejected.csv``.

    ``label`` names the first column (``feature`` for a GIS layer, whose rows are features).
    """
    path = Path(path)
    out = path.with_name(path.stem + ".rejected.csv")
    columns = [label, "reason"] + sorted({k for r in rejected for k in r.row if k is not None})
    with atomic_path(out) as tmp, open(tmp, "w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=columns, extrasaction="ignore")
        writer.writeheader()
        for r in rejected:
            writer.writerow({label: r.line, "reason": r.reason, **{k: v for k, v in r.row.items() if k}})
    return out


def _check_header(fields: Sequence[str], path: Path) -> None:
    """Refuse a header that names a column twice (which of the two would count is a guess)."""
    seen: set[str] = set()
    for name in fields:
        if name and name in seen:
            raise MapperError(f"column {name!r} appears twice in the header; keep one", where=f"{path}:1")
        seen.add(name)


def _separator_hint(fields: Sequence[str]) -> str:
    """A note for a header that is one cell holding semicolons or tabs (not comma-separated)."""
    if len(fields) == 1 and (";" in fields[0] or "\t" in fields[0]):
        sep = "semicolons" if ";" in fields[0] else "tabs"
        return f"; the file is separated by {sep}, mapper reads comma-separated CSV"
    return ""


class RowError(Exception):
    """A bad cell: the column it is in and what is wrong."""

    def __init__(self, column: str, message: str) -> None:
        self.column = column
        self.message = message
        super().__init__(message)


def _number_or_nan(text: str | None, limit: float) -> float:
    """A coordinate as :func:`parse_number` reads it, NaN when bad or beyond ``limit`` (refused per row)."""
    try:
        value = parse_number(text or "")
    except MapperError:
        return math.nan
    return value if -limit <= value <= limit else math.nan


def _note(text: str | None) -> str:
    """A note as written (line breaks and all); a NUL, which GIS formats cut text at, is refused."""
    text = text or ""
    if "\x00" in text:
        raise RowError("note", "note holds a NUL character (U+0000), which GeoPackage would cut it at; remove it")
    return text


def read_csv_records(path: Path, what: str) -> tuple[list[str], list[tuple[int, dict]]]:
    """A CSV file's header (names stripped) and its rows, each with the physical line it starts on.

    A quoted cell may span lines, so a row's line is counted in the file, not in rows. Blank lines
    are skipped; a short row reads as empty cells and a long one keeps the extra cells under the
    key ``None`` (as :class:`csv.DictReader` does).

    Raises
    ------
    MapperError
        When the file is not UTF-8 text or not readable as CSV (e.g. a cell longer than the
        csv module's field limit, typically an opening quote that is never closed).
    """
    reader = csv.reader(io.StringIO(read_utf8(path, what), newline=""))
    fields: list[str] = []
    records: list[tuple[int, dict]] = []
    start = 1
    try:
        for cells in reader:
            if not fields:
                fields = [f.strip() for f in cells]
            elif cells:
                row = dict(zip(fields, cells, strict=False))
                row.update((name, "") for name in fields[len(cells):])
                if len(cells) > len(fields):
                    row[None] = cells[len(fields):]
                records.append((start, row))
            start = reader.line_num + 1
    except csv.Error as exc:
        reason = str(exc)
        if "field limit" in reason:
            reason = (f"a cell is longer than {csv.field_size_limit()} characters, the most a CSV cell may "
                      "hold; is a quote opened and never closed?")
        raise MapperError(f"not readable as CSV: {reason}", where=f"{path}:{start}") from None
    return fields, records


@dataclass(frozen=True)
class ConditionRow:
    """A condition note read from CSV (RH in percent, temperature in degrees Celsius)."""

    time: datetime | None
    rh_percent: float | None
    temperature_c: float | None
    note: str


def is_conditions_csv(path: str | Path) -> bool:
    """True when a CSV's header names condition columns and no ``value`` column."""
    if not Path(path).exists():
        raise MapperError("file not found", where=str(path))
    if Path(path).is_dir():
        raise MapperError("is a folder, not a CSV file", where=str(path))
    text = read_utf8(path, "CSV file")
    try:
        header = {h.strip() for h in (next(csv.reader(text.splitlines()), []) or [])}
    except csv.Error:
        return False  # not a conditions file; the readings import names the problem
    return "value" not in header and bool({"rh_percent", "temperature_c"} & header)


def parse_conditions_csv(path: str | Path, tz: tzinfo | None = None) -> list[ConditionRow]:
    """Read condition notes: columns ``time``, ``rh_percent``, ``temperature_c``, ``note``.

    All rows are checked before any is returned; the first bad one raises with file, line and
    column.
    """
    path = Path(path)
    rows = []
    fields, records = read_csv_records(path, "conditions file")
    _check_header(fields, path)
    for line, row in records:
        column = "time"
        try:
            time = parse_time(row["time"], tz) if (row.get("time") or "").strip() else None
            column = "rh_percent"
            rh = parse_number(row["rh_percent"]) if (row.get("rh_percent") or "").strip() else None
            if rh is not None and not 0 <= rh <= 100:
                raise MapperError(f"relative humidity {rh} % is outside 0-100 %")
            column = "temperature_c"
            temp = parse_number(row["temperature_c"]) if (row.get("temperature_c") or "").strip() else None
            if temp is not None and not -60 <= temp <= 80:
                raise MapperError(f"temperature {temp} °C is outside -60..80 °C")
            column = "note"
            note = _note(row.get("note"))
        except (MapperError, RowError) as exc:
            raise MapperError(exc.message, where=f"{path}:{line}: {column}") from None
        rows.append(ConditionRow(time, rh, temp, note))
    if not rows:
        raise MapperError("no data rows", where=str(path))
    return rows
