"""``mapper report``: the printable PDF report (map, findings, cautions); ``--png`` for the map alone."""

from __future__ import annotations

from pathlib import Path

from mapper.cli.commands import summary
from mapper.cli.common import check_output, positive_float, print_notes, say, threshold_arg, warn
from mapper.cli.progress import working
from mapper.field.build import METHODS
from mapper.survey.store import Survey
from mapper.workflow import survey_products


def register(sub) -> None:
    p = sub.add_parser("report", help=summary('report'))
    p.add_argument("survey", help="survey file")
    p.add_argument("out", help="PDF to write")
    p.add_argument("--threshold", type=threshold_arg, default=None,
                   help="action level, e.g. 1kV/m; a bare number is in the survey's display unit "
                   "(default: the survey's own)")
    p.add_argument("--method", choices=METHODS, default=None,
                   help="interpolation method; given, the field model is rebuilt")
    p.add_argument("--height", type=positive_float, default=None, metavar="METRES",
                   help="map the field at this height above the floor, e.g. a work surface (physical "
                   "model only; the field model is rebuilt)")
    p.add_argument("--cell", type=positive_float, default=None, metavar="METRES",
                   help="grid cell in metres; given, the field model is rebuilt")
    p.add_argument("--db", metavar="URL", default=None,
                   help="add a page with the site's history from the survey archive (a libpq URL, "
                   "see 'mapper archive'; the password belongs in ~/.pgpass)")
    p.add_argument("--png", nargs="?", const="", default=None, metavar="FILE",
                   help="also write the map alone as PNG (default: OUT with .png)")
    p.set_defaults(func=run)


def run(args) -> int:
    check_output(args.out, ".pdf")
    if args.png:
        check_output(args.png, ".png")
    with working("report") as step, Survey.open(args.survey) as survey:
        products = survey_products(survey, args.threshold, args.method, args.cell, height_m=args.height,
                                   on_step=step)
        history, current = (None, None) if args.db is None else _history(survey, args.db)
    print_notes(products)
    png = None if args.png is None else (Path(args.png) if args.png else Path(args.out).with_suffix(".png"))
    with working("report") as step:
        step("drawing the pages")
        from mapper.export.report import write_report  # matplotlib: load only when drawing

        result = write_report(products, args.out, png_path=png, history=history, current=current)
    for line in written_lines(result, products):
        say(line)
    return 0


def written_lines(result, products) -> list[str]:
    """What ``mapper report`` wrote, one line per file (``result``: :class:`~mapper.export.report.ReportResult`)."""
    out = [f"wrote {result.pdf} ({result.pages} pages)"]
    if result.png is not None:
        out.append(f"wrote {result.png} (the map alone)")
    if products.grid is None:
        out.append(f"no field map: {products.no_field_reason}")
    return out


def _history(survey: Survey, url: str):
    """The site's archived history and this survey's archive id (``None`` when not archived)."""
    from mapper.archive.connect import has_password
    from mapper.archive.history import site_history
    from mapper.survey.content import read_content

    if has_password(url):
        warn("the --db URL holds a password; keep it in ~/.pgpass (or PGPASSFILE) instead")
    history = site_history(url, survey.site.name)
    uid = read_content(survey).uid
    current = next((s.survey_id for s in history.surveys if s.uid == uid), None)
    if current is None:
        warn(f"this survey is not in the archive; the history page shows the archived surveys of "
             f"{history.site} only ('mapper archive push {survey.path}' adds it)")
    return history, current
