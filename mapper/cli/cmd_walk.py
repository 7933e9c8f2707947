"""``mapper walk``: walk a survey's grid in the terminal, recording readings."""

from __future__ import annotations

import sys
from datetime import timedelta

from mapper.cli.commands import summary
from mapper.cli.common import positive_float, say, threshold_arg, unit_arg
from mapper.errors import MapperError
from mapper.plan.grid import DEFAULT_SPACING_M, LAYOUTS
from mapper.survey.store import Survey
from mapper.units import SIGN_CONVENTIONS, resolve_threshold


def register(sub) -> None:
    p = sub.add_parser(
        "walk",
        help=summary('walk'),
        description="Open SURVEY in the terminal app (keys: F1 in the app). With --new SITE, create the "
        "survey first, as 'mapper new' would. Every reading is saved before the status line says so.",
    )
    p.add_argument("survey", help="survey file (made by 'mapper new', or created here with --new)")
    p.add_argument("--new", metavar="SITE", help="create SURVEY from this site file first")
    p.add_argument(
        "--spacing", type=positive_float, default=None,
        help=f"with --new: grid spacing in metres (default {DEFAULT_SPACING_M})",
    )
    p.add_argument("--layout", choices=LAYOUTS, default=None, help="with --new: grid layout (default square)")
    p.add_argument("--unit", type=unit_arg, default=None, help="with --new: display and entry unit (default V/m)")
    p.add_argument("--sign", choices=SIGN_CONVENTIONS, default=None, help="with --new: meter sign convention")
    p.add_argument("--threshold", type=threshold_arg, default=None, help="with --new: action level with unit")
    p.add_argument(
        "--conditions-every", type=positive_float, default=30.0, metavar="MIN",
        help="ask for RH and temperature when none was recorded for MIN minutes (default 30)",
    )
    p.add_argument("--no-conditions", action="store_true", help="never ask for conditions (F5 still records them)")
    p.add_argument(
        "--meter-port", metavar="PORT",
        help="serial port of a meter that sends one reading per line (e.g. /dev/ttyUSB0); "
        "each value appears in the entry line, Enter records it",
    )
    p.add_argument("--meter-baud", type=int, default=9600, metavar="BAUD", help="meter line speed (default 9600)")
    p.set_defaults(func=run)


def _open(args) -> Survey:
    new_only = {"--spacing": args.spacing, "--layout": args.layout, "--unit": args.unit,
                "--sign": args.sign, "--threshold": args.threshold}
    if args.new is None:
        given = [name for name, value in new_only.items() if value is not None]
        if given:
            raise MapperError(f"{', '.join(given)} only apply with --new SITE (the survey already has its plan)")
        return Survey.open(args.survey, write=True)
    from mapper.survey.create import DEFAULT_THRESHOLD_V_PER_M, create_survey

    survey = create_survey(
        args.survey,
        args.new,
        spacing_m=args.spacing or DEFAULT_SPACING_M,
        layout=args.layout or "square",
        display_unit=args.unit or "V/m",
        sign_convention=args.sign or "physics",
        threshold_v_per_m=(resolve_threshold(args.threshold, args.unit or "V/m") if args.threshold
                           else DEFAULT_THRESHOLD_V_PER_M),
    )
    say(f"created {survey.path}: {len(survey.plan.points)} points at {survey.plan.spacing_m:g} m")
    return survey


NO_TERMINAL = "'mapper walk' needs an interactive terminal; use 'mapper import' for readings in a file"


def run(args) -> int:
    interactive = sys.stdin.isatty() and sys.stdout.isatty()
    if args.new and not interactive:
        raise MapperError(NO_TERMINAL)
    survey = _open(args)  # refuses a survey another process is writing, before anything else
    try:
        if not interactive:
            raise MapperError(NO_TERMINAL)
        from mapper.app.walk_app import WalkApp

        meter = None
        if args.meter_port:
            from mapper.readings.serial_meter import SerialMeterReader

            meter = SerialMeterReader(args.meter_port, args.meter_baud, default_unit=survey.display_unit)
        app = WalkApp(
            survey,
            conditions_every=timedelta(minutes=args.conditions_every),
            ask_conditions=not args.no_conditions,
            meter=meter,
        )
        app.run()
    finally:
        survey.close()
    n = len(survey_readings(args.survey))
    say(f"{args.survey}: {n} field readings saved")
    return 0


def survey_readings(path: str) -> list:
    """Current field readings of a survey (read-only)."""
    with Survey.open(path) as survey:
        return survey.readings()
