"""``mapper import``: load readings from a CSV file or a GIS point layer into a survey."""

from __future__ import annotations

import hashlib
import os
import sys
import time
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from mapper.cli.commands import summary
from mapper.cli.common import positive_float, say, show, unit_arg, warn
from mapper.errors import MapperError
from mapper.notes import Note
from mapper.readings.importing import (
    is_conditions_csv,
    parse_conditions_csv,
    parse_readings_csv,
    write_rejected,
)
from mapper.readings.vector_import import input_files, is_vector_readings, parse_readings_vector
from mapper.survey.store import Survey
from mapper.wording import plural


def register(sub) -> None:
    p = sub.add_parser("import", help=summary('import'))
    p.add_argument("survey", help="survey file")
    p.add_argument(
        "file",
        help="CSV with x,y (or lon,lat, or easting,northing with --crs),value[,unit,time,height_m,note,kind,"
             "meter,point], or a GeoJSON, GeoPackage or Shapefile point layer with those attributes",
    )
    p.add_argument("--crs", metavar="EPSG:NNNN", help="CRS of projected positions (CSV x,y or easting,northing; "
                   "a point layer that states none)")
    p.add_argument("--layer", metavar="NAME", help="layer of a GeoPackage with several")
    p.add_argument("--unit", type=unit_arg, help="unit of values without a unit column")
    p.add_argument("--skip-bad", action="store_true", help="import good rows; write bad ones beside the input")
    p.add_argument("--tz", default=None, help="time zone of times written without an offset (default UTC)")
    p.add_argument("--log", action="store_true", help="FILE is a timed meter log time,value[,unit]; needs --track")
    p.add_argument(
        "--track", metavar="TRACK",
        help="with --log: walked track (CSV time,x,y or time,lon,lat; GPX; NMEA) or CSV time,point",
    )
    p.add_argument(
        "--tolerance", type=positive_float, default=10.0, metavar="SECONDS",
        help="with --log: largest time gap to a track position (default 10 s)",
    )
    p.add_argument("--meter", default=None, help="with --log: meter id of the log (default the survey's meter)")
    p.add_argument("--again", action="store_true", help="import a file whose readings this survey already holds")
    p.set_defaults(func=run)


def run(args) -> int:
    tz = None
    if args.tz:
        try:
            tz = ZoneInfo(args.tz)
        except (ZoneInfoNotFoundError, ValueError):
            raise MapperError(f"unknown time zone {args.tz!r}; use a name like Europe/Berlin") from None
    if args.crs and args.log:
        raise MapperError("--crs goes with a readings file, not with --log (the track gives the positions)")
    if args.track and not args.log:
        raise MapperError("--track goes with --log (a timed meter log)")
    if args.log:
        if not args.track:
            raise MapperError("--log needs --track TRACK: positions to place the log's readings by time")
        return _import_log(args, tz)
    show(import_file(args.survey, args.file, unit=args.unit, skip_bad=args.skip_bad, tz=tz, crs=args.crs,
                     layer=args.layer, again=args.again))
    return 0


def import_file(survey_path: str, file: str, *, unit: str | None = None, skip_bad: bool = False, tz=None,
                crs: str | None = None, layer: str | None = None, again: bool = False) -> list[Note]:
    """Import readings (CSV or GIS point layer) or condition notes (CSV) into a survey, all or nothing.

    Parameters
    ----------
    survey_path : str
        Survey file.
    file : str
        Readings or conditions file.
    unit : str, optional
        Unit of values without a unit column.
    skip_bad : bool
        Import the good rows and write the bad ones beside the input.
    tz : tzinfo, optional
        Time zone of times written without an offset (default UTC).
    crs : str, optional
        CRS of projected positions.
    layer : str, optional
        Layer of a GeoPackage with several.
    again : bool
        Import a file whose readings the survey already holds.

    Returns
    -------
    list of Note
        What was imported, and a warning for rows left out.
    """
    out: list[Note] = []
    vector = is_vector_readings(file)
    if layer is not None and not vector:
        raise MapperError("--layer goes with a GeoPackage (or another GIS file) of readings", where=file)
    with Survey.open(survey_path, write=True) as survey:
        common = {"unit": unit or None, "sign_convention": survey.sign_convention,
                  "plan_labels": [p.label for p in survey.plan.points], "meters": list(survey.meters()),
                  "skip_bad": skip_bad, "tz": tz, "crs": crs}
        if vector:
            parsed = parse_readings_vector(file, survey.site, layer=layer, **common)
        elif is_conditions_csv(file):
            if crs:
                raise MapperError("--crs goes with positions; a conditions file has none", where=file)
            notes = parse_conditions_csv(file, tz)
            survey.add_condition_notes([(n.rh_percent, n.temperature_c, n.note, n.time) for n in notes])
            return [Note("remark", f"imported {plural(len(notes), 'condition note')} into {survey.path}")]
        else:
            parsed = parse_readings_csv(file, survey.site, **common)
        delay = float(os.environ.get("MAPPER_TEST_IMPORT_DELAY", "0") or 0)
        if delay:  # test hook: slow the open transaction down so a test can kill the process in it
            survey.conn.set_progress_handler(lambda: _slow_down(survey, delay), 1000)
        label, noun = ("feature", "feature") if vector else ("line", "data row")
        if not parsed.readings:
            rejected = write_rejected(file, parsed.rejected, label=label) if parsed.rejected else None
            what = (f"all {len(parsed.rejected)} {noun}s are bad (see {rejected})" if rejected
                    else "the file has no data rows")
            raise MapperError(f"nothing imported: {what}; the survey is unchanged", where=file)
        digest = _refuse_repeat(survey, again, file, [str(p) for p in input_files(file)])
        stored = survey.add_readings(parsed.readings, source=os.path.basename(file), digest=digest)
        if parsed.rejected:
            rejected = write_rejected(file, parsed.rejected, label=label)
            out.append(Note("warning", f"{len(parsed.rejected)} bad {'features' if vector else 'rows'} not "
                                       f"imported; see {rejected}"))
        out.append(Note("remark", f"imported {_count(len(stored), 'reading')} into {survey.path}"))
    return out


def _slow_down(survey: Survey, delay: float) -> int:
    if survey.conn.in_transaction:
        print("mapper: import transaction open", file=sys.stderr, flush=True)
        time.sleep(delay)
    return 0


def _import_log(args, tz) -> int:
    from datetime import UTC

    from mapper.readings.log_match import import_meter_log

    with Survey.open(args.survey, write=True) as survey:
        if args.meter and args.meter not in survey.meters():
            raise MapperError(f"unknown meter {args.meter!r}; add it with 'mapper meter add'")
        result = import_meter_log(
            args.file,
            args.track,
            survey.site,
            {p.label: (p.x, p.y) for p in survey.plan.points},
            unit=args.unit or None,
            sign=survey.sign_convention,
            tolerance_s=args.tolerance,
            naive_tz=tz or UTC,
            meter_id=args.meter,
        )
        lines = result.report()
        say(lines[0])  # the counts
        for line in lines[1:]:  # readings not placed, and why
            warn(line)
        if not result.readings:
            raise MapperError("no log reading could be placed on the site; nothing imported", where=args.file)
        digest = _refuse_repeat(survey, args.again, args.file, [args.file, args.track])
        stored = survey.add_readings(result.readings, source=os.path.basename(args.file), digest=digest)
        say(f"imported {_count(len(stored), 'reading')} from the log into {survey.path}")
    return 0


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" + ("" if n == 1 else "s")


def _refuse_repeat(survey: Survey, again: bool, where: str, paths: list[str]) -> str:
    """Content hash of the input files; refuses files this survey already imported, unless --again."""
    sha = hashlib.sha256()
    for path in paths:
        sha.update(Path(path).read_bytes())
    digest = sha.hexdigest()
    earlier = survey.imported_before(digest)
    if earlier and not again:
        raise MapperError(
            f"these readings were already imported into this survey on {earlier} (same file content); "
            "nothing imported — pass --again to import them a second time",
            where=where,
        )
    return digest
