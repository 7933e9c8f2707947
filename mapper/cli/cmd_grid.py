"""``mapper grid``: build the field model from the corrected readings and store it in the survey."""

from __future__ import annotations

from collections.abc import Callable

from mapper.cli.commands import summary
from mapper.cli.common import fmt, neighbors_arg, positive_float, show, table
from mapper.cli.progress import working
from mapper.corrections.pipeline import correct_survey
from mapper.errors import MapperError
from mapper.field import METHODS, MODELS, Variogram, field_to_bytes
from mapper.field.inputs import MIN_FIELD_POSITIONS, distinct_positions, field_inputs
from mapper.notes import Note
from mapper.survey.store import Survey
from mapper.units import field_text_in
from mapper.workflow import build_survey_field, too_few_positions


def register(sub) -> None:
    p = sub.add_parser(
        "grid",
        help=summary('grid'),
        description="Interpolate the survey's corrected field readings onto a grid over the site, "
        "with leave-one-out cross-validation, and store the field model in the survey. A variogram "
        "given here is used as is, without fitting.",
    )
    p.add_argument("survey", help="survey file")
    p.add_argument("--method", choices=METHODS, default="auto", help="interpolation method (default auto)")
    p.add_argument("--cell", type=positive_float, metavar="METRES", help="grid cell size in metres")
    p.add_argument("--height", type=positive_float, metavar="METRES",
                   help="map the field at this height above the floor (physical model only)")
    p.add_argument("--neighbors", type=neighbors_arg, metavar="K", help="moving neighbourhood size (default: "
                                                                        "automatic)")
    v = p.add_argument_group("variogram (kriging methods; used as is, not fitted)")
    v.add_argument("--variogram", choices=MODELS, metavar="MODEL", help=f"model: {', '.join(MODELS)}")
    v.add_argument("--sill", type=float, metavar="S", help="partial sill above the nugget, (V/m)²")
    v.add_argument("--range", type=float, metavar="R", help="range in metres (practical range for exponential and "
                                                            "gaussian)")
    v.add_argument("--nugget", type=float, default=0.0, metavar="N", help="nugget, (V/m)² (default 0)")
    v.add_argument("--angle", type=float, default=0.0, metavar="DEG", help="azimuth of the major axis, degrees "
                                                                           "counter-clockwise from +x")
    v.add_argument("--ratio", type=float, default=1.0, metavar="R", help="anisotropy ratio major/minor range (>= 1)")
    v.add_argument("--slope", type=float, metavar="S", help="slope of the linear model, (V/m)² per metre")
    v.add_argument("--nu", type=float, default=1.5, metavar="NU", help="matern smoothness (default 1.5)")
    p.set_defaults(func=run)


def variogram_from_args(args) -> Variogram | None:
    """The variogram the command line describes, or ``None`` when none is given."""
    given = [name for name in ("sill", "range", "slope") if getattr(args, name) is not None]
    if args.variogram is None:
        if given:
            raise MapperError(f"--{given[0]} needs --variogram MODEL ({', '.join(MODELS)})")
        return None
    if args.method in ("rbf", "idw", "physics"):
        raise MapperError(f"--variogram applies to kriging methods, not --method {args.method}")
    if args.variogram == "linear":
        if args.slope is None:
            raise MapperError("the linear variogram needs --slope S ((V/m)² per metre)")
        return Variogram(model="linear", slope=args.slope, nugget=args.nugget)
    missing = [f"--{name}" for name in ("sill", "range") if getattr(args, name) is None]
    if missing:
        raise MapperError(f"the {args.variogram} variogram needs {' and '.join(missing)}")
    return Variogram(
        model=args.variogram, sill=args.sill, range=args.range, nugget=args.nugget,
        angle=args.angle, ratio=args.ratio, nu=args.nu,
    )


def run(args) -> int:
    variogram = variogram_from_args(args)
    store_field(args.survey, args.method, cell_m=args.cell, neighbors=args.neighbors, variogram=variogram,
                height_m=args.height, emit=lambda note: show([note]))
    return 0


def store_field(survey_path: str, method: str = "auto", *, cell_m: float | None = None,
                neighbors: int | None = None, variogram: Variogram | None = None,
                height_m: float | None = None, emit: Callable[[Note], None]) -> None:
    """Build the field model of a survey's corrected readings and store it (``mapper grid``).

    Parameters
    ----------
    survey_path : str
        Survey file, as the user named it.
    method : str
        One of :data:`mapper.field.METHODS`; ``auto`` becomes ``kriging`` with a variogram.
    cell_m : float, optional
        Grid cell, metres.
    neighbors : int, optional
        Moving-neighbourhood size.
    variogram : Variogram, optional
        Used as is, not fitted.
    height_m : float, optional
        Map the field at this height above the floor, metres (physical model only).
    emit : callable
        Called with each :class:`~mapper.notes.Note` as it comes: the corrections' warnings, then
        what was stored and how well it predicts.
    """
    if height_m is not None and method not in ("auto", "physics"):
        raise MapperError(f"--height needs the physical model (--method physics); method {method} "
                          "interpolates at the meter's height only")
    if variogram is not None and method == "auto":
        method = "kriging"
    with Survey.open(survey_path, write=True) as survey:
        corrected = correct_survey(survey)
        for message in corrected.warnings:
            emit(Note("warning", message))
        xy, values = field_inputs(corrected.readings)
        positions = distinct_positions(xy)
        if positions < MIN_FIELD_POSITIONS:
            raise MapperError(too_few_positions(positions), where=str(survey.path))
        with working("grid") as step:
            step(f"field model ({method}, {positions} positions)")
            grid = build_survey_field(survey.site, corrected.readings, method=method, cell_m=cell_m,
                                      neighbors=neighbors, variogram=variogram, height_m=height_m)
        summary = {
            "method": grid.method,
            "reason": grid.reason,
            "cell_m": grid.cell_m,
            "corrections": list(corrected.applied),
            "readings": int(len(values)),
        }
        survey.save_field(grid.method, summary, field_to_bytes(grid))
        unit = survey.display_unit

    def say(text: str) -> None:
        emit(Note("remark", text))

    say(f"field model stored in {survey_path}: {grid.method}, {len(grid.x)} x {len(grid.y)} cells of {grid.cell_m:g} m")
    say(f"from {len(values)} corrected readings at {positions} positions "
        f"(corrections: {', '.join(corrected.applied) or 'none'})")
    say(f"why: {field_text_in(grid.reason, unit)}")
    settings = grid.settings
    kriging = settings.kriging if settings is not None else None
    if kriging is not None and kriging.variogram_text:
        fit = kriging.variogram_fit
        origin = "given on the command line" if fit is None else (
            f"fitted, R² {fit.r2:.3f}, {fit.n_bins} lag bins, "
            + ("converged" if fit.converged else "did NOT converge")
        )
        say(f"variogram: {kriging.variogram_text} ({origin})")
    if grid.cv_table:
        rows = []
        for c in grid.cv_table:
            std = (
                f"{c.mean_standardized:+.3f} / {c.rms_standardized:.3f}"
                if c.mean_standardized is not None and c.rms_standardized is not None else "-"
            )
            mark = "*" if c.method == grid.method else ""
            rows.append([c.method + mark, c.n, fmt(c.rmse_v_per_m, unit), fmt(c.mae_v_per_m, unit),
                         fmt(c.mean_error_v_per_m, unit), std])
        say("leave-one-out cross-validation (* = chosen):")
        say(table(rows, ["method", "n", "RMSE", "MAE", "mean error", "std. error mean / RMS"]))
        say("standardised errors near 0 (mean) and 1 (RMS) mean the standard deviation map is honest")
    phys = settings.physics if settings is not None else None
    split = phys.loo_split if phys is not None else None
    if split is not None:
        for st, label in ((split.near_sources, "near sources"), (split.quiet, "elsewhere")):
            if st.n:
                rms = "-" if st.rms_standardized is None else f"{st.rms_standardized:.2f}"
                say(f"  {label}: {st.n} readings, RMSE {fmt(st.rmse_v_per_m, unit)}, standardised RMS {rms}")
    if phys is not None:
        say(f"physical model: {len(phys.sources)} source(s); see 'mapper sources {survey_path}'")
    std = settings.std if settings is not None else None
    if std is not None and std.source:
        say(f"standard deviation: {std.source}")
