"""``mapper new``: create a survey file and plan its grid."""

from __future__ import annotations

from mapper.cli.commands import summary
from mapper.cli.common import positive_float, role_arg, show, threshold_arg, unit_arg
from mapper.errors import MapperError
from mapper.notes import Note
from mapper.plan.grid import DEFAULT_SPACING_M, LAYOUTS
from mapper.survey.create import DEFAULT_THRESHOLD_V_PER_M, create_survey
from mapper.units import SIGN_CONVENTIONS, format_field, resolve_threshold


def register(sub) -> None:
    p = sub.add_parser("new", help=summary('new'))
    p.add_argument("survey", help="survey file to create (e.g. hall3.survey)")
    p.add_argument("--site", required=True, help="site file (.toml) or vector file (.gpkg, .geojson, .shp, .dxf)")
    p.add_argument(
        "--spacing", type=positive_float, default=DEFAULT_SPACING_M,
        help=f"grid spacing in metres (default {DEFAULT_SPACING_M})",
    )
    p.add_argument("--layout", choices=LAYOUTS, default="square", help="grid layout (default square)")
    p.add_argument("--unit", type=unit_arg, default="V/m", help="display and entry unit (default V/m)")
    p.add_argument(
        "--sign", choices=SIGN_CONVENTIONS, default="physics",
        help="sign convention of the meter: physics (upward field positive; default) or atmospheric",
    )
    p.add_argument(
        "--threshold", type=threshold_arg, default=DEFAULT_THRESHOLD_V_PER_M,
        help="action level, e.g. '125 V/in'; a bare number is in the display unit --unit (default 125 V/in)",
    )
    p.add_argument("--operator", default="", help="who surveys")
    p.add_argument(
        "--role", type=role_arg, action="append", default=[], metavar="LAYER=ROLE",
        help="for vector site files: role of a layer (outline, zone, ignore or an asset kind)",
    )
    p.add_argument(
        "--site-units", default=None, choices=["m", "cm", "mm", "ft", "in"],
        help="length unit of a CAD drawing without a CRS (default m)",
    )
    p.add_argument(
        "--site-crs", metavar="EPSG:NNNN",
        help="projected CRS a drawing without one is drawn in (drawing units are the CRS's units)",
    )
    p.add_argument(
        "--control-points", metavar="FILE.csv",
        help="CSV x,y,lon,lat (drawing units, WGS 84 degrees) georeferencing a drawing without a CRS",
    )
    p.set_defaults(func=run)


def created_notes(survey) -> list[Note]:
    """What ``mapper new`` says about a survey it created: site warnings, site, georeference, plan, units.

    Parameters
    ----------
    survey : mapper.survey.store.Survey
        The survey just created (open).

    Returns
    -------
    list of Note
    """
    site, plan = survey.site, survey.plan
    out = [Note("warning", message) for message in site.warnings]
    out.append(Note("remark", f"created {survey.path} for site {site.name!r} ({site.area_m2:.1f} m²)"))
    if site.georef:
        g = site.georef
        fit = (f"residuals {', '.join(f'{r:.3f}' for r in g.residuals_m)} m, RMS {g.rms_m:.3f} m"
               if g.residuals_m else "fitted exactly (two control points leave no residual to check)")
        out.append(Note("remark", f"georeference: {g.crs}, scale {g.scale:.6f}, rotation {g.rotation_deg:.3f}°, {fit}"))
    else:
        out.append(Note("remark", "georeference: none (local site grid in metres)"))
    out.append(Note("remark",
                    f"plan: {len(plan.points)} points, {plan.layout} grid at {plan.spacing_m:g} m, "
                    f"covering {plan.covered_area_m2():.0f} m², walk {plan.walk_length_m:.0f} m "
                    f"from {plan.points[0].label} to {plan.points[-1].label}"))
    out.append(Note("remark", f"unit {survey.display_unit}, sign {survey.sign_convention}, "
                              f"threshold {format_field(survey.threshold_v_per_m, survey.display_unit)}"))
    return out


def run(args) -> int:
    if args.site_crs and args.site_units:
        raise MapperError("--site-units goes with a drawing in site units; with --site-crs the drawing "
                          "units are the CRS's units")
    with create_survey(
        args.survey,
        args.site,
        spacing_m=args.spacing,
        layout=args.layout,
        display_unit=args.unit,
        sign_convention=args.sign,
        threshold_v_per_m=resolve_threshold(args.threshold, args.unit),
        roles=dict(args.role),
        operator=args.operator,
        site_units=args.site_units or "m",
        site_crs=args.site_crs,
        control_points=args.control_points,
    ) as survey:
        show(created_notes(survey))
    return 0
