"""``mapper export``: GeoPackage with styled layers, GeoTIFF of the field and, on request, CSV."""

from __future__ import annotations

from mapper.cli.commands import summary
from mapper.cli.common import check_output, positive_float, print_notes, say, threshold_arg
from mapper.cli.progress import working
from mapper.field.build import METHODS
from mapper.survey.store import Survey
from mapper.workflow import survey_products


def register(sub) -> None:
    p = sub.add_parser(
        "export",
        help=summary('export'),
    )
    p.add_argument("survey", help="survey file")
    p.add_argument("out", help="GeoPackage to write (OUT.gpkg; the GeoTIFF goes to OUT.tif)")
    p.add_argument("--threshold", type=threshold_arg, default=None,
                   help="action level, e.g. 1kV/m; a bare number is in the survey's display unit "
                   "(default: the survey's own)")
    p.add_argument("--method", choices=METHODS, default=None,
                   help="interpolation method; given, the field model is rebuilt (default: the stored "
                   "model, or auto)")
    p.add_argument("--height", type=positive_float, default=None, metavar="METRES",
                   help="map the field at this height above the floor, e.g. a work surface (physical "
                   "model only; the field model is rebuilt)")
    p.add_argument("--cell", type=positive_float, default=None, metavar="METRES",
                   help="grid cell in metres; given, the field model is rebuilt")
    p.add_argument("--csv", default=None, metavar="FILE", help="also write the corrected readings as CSV")
    p.set_defaults(func=run)


def run(args) -> int:
    check_output(args.out, ".gpkg")
    if args.csv is not None:
        check_output(args.csv, ".csv")
    with working("export") as step, Survey.open(args.survey) as survey:
        products = survey_products(survey, args.threshold, args.method, args.cell, height_m=args.height,
                                   on_step=step)
    print_notes(products)
    with working("export") as step:
        step("writing the GeoPackage and GeoTIFF")
        from mapper.export.bundle import export_products  # geopandas, rasterio: load when writing

        result = export_products(products, args.out, csv_path=args.csv)
    for line in result.lines(products):
        say(line)
    return 0
