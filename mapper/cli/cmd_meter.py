"""``mapper meter``: meter profiles and the parallel-plate calibration check."""

from __future__ import annotations

import argparse
import json
from datetime import UTC, date, datetime

from mapper.cli.commands import summary
from mapper.cli.common import fmt, say, show, table, unit_arg, warn
from mapper.corrections.calibration import check_meter_file, read_calibration_csv
from mapper.corrections.meter import MeterProfile
from mapper.errors import MapperError
from mapper.notes import Note
from mapper.survey.store import Survey
from mapper.units import LENGTH_UNITS, parse_field, parse_number

#: Gain error beyond which the check suggests recalibration (choice, no source: handheld field
#: meters are commonly quoted to within about +/- 5 to 10 % of reading).
GAIN_WARN = 0.05


def date_arg(text: str) -> date:
    """argparse type: an ISO date such as 2025-01-31."""
    try:
        return date.fromisoformat(text.strip())
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a date; use YYYY-MM-DD") from None


def length_arg(text: str) -> float:
    """argparse type: a length such as ``25 mm``, ``1 in`` or ``0.0254`` (metres); in metres."""
    stripped = text.strip()
    try:
        for name in sorted(LENGTH_UNITS, key=len, reverse=True):
            if stripped.lower().endswith(name):
                value = parse_number(stripped[: -len(name)]) * LENGTH_UNITS[name]
                break
        else:
            value = parse_number(stripped)
    except MapperError as exc:
        raise argparse.ArgumentTypeError(exc.message) from None
    if value <= 0:
        raise argparse.ArgumentTypeError(f"{text!r} must be a positive length")
    return value


def offset_arg(text: str) -> float:
    """argparse type: a field offset with unit (``12 V/m``; no unit means V/m), in V/m."""
    try:
        return parse_field(text, "V/m")[2]
    except MapperError as exc:
        raise argparse.ArgumentTypeError(exc.message) from None


def register(sub) -> None:
    p = sub.add_parser("meter", help=summary('meter'))
    msub = p.add_subparsers(dest="meter_command", metavar="ACTION", parser_class=type(p))
    msub.required = True

    add = msub.add_parser("add", help="add a meter, or change fields of an existing one")
    add.add_argument("survey", help="survey file")
    add.add_argument("meter", help="meter id, e.g. meter2")
    add.add_argument("--description", help="what the meter is")
    add.add_argument("--serial", help="serial number")
    add.add_argument(
        "--distance",
        type=length_arg,
        help="distance the meter is specified at (e.g. '1 in', '25 mm'; default 1 in)",
    )
    add.add_argument("--unit", type=unit_arg, help="unit the meter displays")
    add.add_argument("--calibrated", type=date_arg, help="date of the last calibration")
    add.add_argument("--due", type=date_arg, help="date the next calibration is due")
    add.add_argument("--gain", type=float, help="gain from a calibration certificate")
    add.add_argument("--offset", type=offset_arg, help="offset with unit, e.g. '12 V/m'")
    add.set_defaults(func=run_add)

    lst = msub.add_parser("list", help="list the survey's meters and their calibration")
    lst.add_argument("survey", help="survey file")
    lst.add_argument("--json", action="store_true", help="print JSON")
    lst.set_defaults(func=run_list)

    chk = msub.add_parser(
        "check",
        help="fit gain and offset from readings in a parallel-plate field (E = V/d) and store them",
    )
    chk.add_argument("survey", help="survey file")
    chk.add_argument("meter", help="meter id")
    chk.add_argument(
        "file",
        help="CSV: plate_voltage_v, gap_m (or gap with unit), reading (with unit or a unit column)",
    )
    chk.add_argument(
        "--unit", type=unit_arg, help="unit of readings without one (default: the meter's)"
    )
    chk.add_argument("--date", type=date_arg, help="date of the check (default today, UTC)")
    chk.add_argument("--due", type=date_arg, help="date the next check is due")
    chk.add_argument("--dry-run", action="store_true", help="show the fit without storing it")
    chk.set_defaults(func=run_check)


def _profiles(survey: Survey) -> dict[str, MeterProfile]:
    return {
        meter_id: MeterProfile.from_dict(data, where=f"{survey.path}: meter {meter_id}")
        for meter_id, data in survey.meters().items()
    }


def _known(survey: Survey, meter_id: str) -> MeterProfile:
    profiles = _profiles(survey)
    if meter_id not in profiles:
        raise MapperError(
            f"no meter {meter_id!r} in the survey (meters: {', '.join(sorted(profiles))}); "
            f"add it with: mapper meter add {survey.path} {meter_id}"
        )
    return profiles[meter_id]


def run_add(args) -> int:
    changes = {
        key: getattr(args, name)
        for key, name in (
            ("description", "description"),
            ("serial", "serial"),
            ("distance_m", "distance"),
            ("unit", "unit"),
            ("calibration_date", "calibrated"),
            ("due_date", "due"),
            ("gain", "gain"),
            ("offset_v_per_m", "offset"),
        )
        if getattr(args, name) is not None
    }
    show(add_meter(args.survey, args.meter, changes))
    return 0


def add_meter(survey_path: str, meter_id: str, changes: dict) -> list[Note]:
    """Add a meter profile to a survey, or change fields of an existing one (``mapper meter add``).

    Parameters
    ----------
    survey_path : str
        Survey file, as the user named it.
    meter_id : str
        Meter id.
    changes : dict
        Profile fields to set (:class:`MeterProfile` keys; dates as ``datetime.date``, distance in
        metres, offset in V/m).

    Returns
    -------
    list of Note
        What was stored, and a warning when the calibration is due.
    """
    with Survey.open(survey_path, write=True) as survey:
        existing = _profiles(survey).get(meter_id)
        if existing and not changes:
            raise MapperError(
                f"meter {meter_id!r} already exists and no field to change was given "
                "(e.g. --gain, --due); nothing stored"
            )
        base = existing.to_dict() if existing else {"id": meter_id}
        for key, value in changes.items():
            base[key] = value.isoformat() if isinstance(value, date) else value
        profile = MeterProfile.from_dict(base)
        survey.save_meter(profile.id, profile.to_dict())
    out = [Note("remark", f"{'updated' if existing else 'added'} meter {profile.id} in {survey_path}")]
    due = profile.due_warning(datetime.now(UTC).date())
    if due and profile.due_date is not None:
        out.append(Note("warning", due))
    return out


def run_list(args) -> int:
    with Survey.open(args.survey) as survey:
        profiles = _profiles(survey)
        counts: dict[str, int] = {}
        for r in survey.readings(kind=None):
            counts[r.meter_id] = counts.get(r.meter_id, 0) + 1
    if args.json:
        say(
            json.dumps(
                [{**p.to_dict(), "readings": counts.get(i, 0)} for i, p in profiles.items()],
                indent=2,
            )
        )
        return 0
    today = datetime.now(UTC).date()
    rows = []
    for meter_id, p in profiles.items():
        if p.due_date is None:
            status = "no due date"
        elif p.overdue(today):
            status = "OVERDUE"
        else:
            status = "ok"
        rows.append(
            (
                meter_id,
                p.serial or "-",
                p.unit,
                f"{p.distance_m * 1000:g} mm",
                f"{p.gain:.4g}" + (f" ± {p.gain_se:.2g}" if p.gain_se is not None else ""),
                f"{p.offset_v_per_m:.4g} V/m"
                + (f" ± {p.offset_se_v_per_m:.2g}" if p.offset_se_v_per_m is not None else ""),
                p.calibration_date.isoformat() if p.calibration_date else "-",
                p.due_date.isoformat() if p.due_date else "-",
                status,
                counts.get(meter_id, 0),
            )
        )
    say(
        table(
            rows,
            (
                "meter",
                "serial",
                "unit",
                "distance",
                "gain",
                "offset",
                "calibrated",
                "due",
                "status",
                "readings",
            ),
        )
    )
    return 0


def run_check(args) -> int:
    with Survey.open(args.survey, write=not args.dry_run) as survey:
        profile = _known(survey, args.meter)
        unit = survey.display_unit
        sign = survey.sign_convention
        default_unit = args.unit or profile.unit
        rows = read_calibration_csv(args.file, default_unit=default_unit, sign=sign)
        fit = check_meter_file(args.file, default_unit=default_unit, sign=sign)
        say(f"meter {profile.id}: parallel-plate check from {args.file}, {fit.n} readings")
        say(
            table(
                [
                    (
                        r.line,
                        f"{r.plate_voltage_v:g}",
                        f"{r.gap_m * 1000:g}",
                        fmt(r.field_v_per_m, unit),
                        fmt(r.read_v_per_m, unit),
                        fmt(res, unit),
                    )
                    for r, res in zip(rows, fit.residuals_v_per_m, strict=True)
                ],
                ("line", "plate V", "gap mm", "known E = V/d", "reading", "residual"),
            )
        )
        for line in fit.summary():
            say(line)
        if abs(fit.gain - 1.0) > GAIN_WARN:
            warn(
                f"meter {profile.id} reads {100 * (fit.gain - 1):+.1f} % of the true field; the fit "
                "corrects it, but have the meter serviced or recalibrated"
            )
        if args.dry_run:
            say("dry run: nothing stored")
            return 0
        on = args.date or datetime.now(UTC).date()
        updated = profile.with_fit(
            fit.gain,
            fit.offset_v_per_m,
            fit.gain_se,
            fit.offset_se_v_per_m,
            fit.r_squared,
            fit.n,
            on,
            source=str(args.file),
        )
        if args.due is not None:
            updated = MeterProfile.from_dict(
                {**updated.to_dict(), "due_date": args.due.isoformat()}
            )
        survey.save_meter(updated.id, updated.to_dict())
        survey.log(
            "meter check",
            {
                "meter": updated.id,
                "file": str(args.file),
                "gain": fit.gain,
                "offset_v_per_m": fit.offset_v_per_m,
                "gain_se": fit.gain_se,
                "offset_se_v_per_m": fit.offset_se_v_per_m,
                "r_squared": fit.r_squared,
                "n": fit.n,
            },
        )
        affected = sum(1 for r in survey.readings(kind=None) if r.meter_id == updated.id)
    say(
        f"stored for meter {updated.id}: its {affected} readings are now used as "
        "E = (E_read - offset) / gain"
    )
    if updated.due_date is None:
        warn(f"meter {updated.id} has no due date for its next check; set one with --due")
    return 0
