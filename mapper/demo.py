"""The demo: the indoor sample site from survey file to hand-over, through the library.

Each stage calls what its command calls (:mod:`mapper.workflow`, the export functions and the
commands' own steps) and says what the command would say, under the command line that does the
same by hand. The survey's products are made once and serve the hotspot list, the GeoPackage,
the report and the comparison.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

from mapper.errors import MapperError
from mapper.notes import Note

SAMPLES = Path(__file__).resolve().parent.parent / "sample_sites"

#: The sample meter: id and the options of ``mapper meter add`` (dates ISO 8601).
SAMPLE_METER_ID = "meter1"
SAMPLE_METER = {"description": "sample handheld field meter", "serial": "NH-0001", "calibrated": "2026-05-12",
                "due": "2027-05-12"}


def _said(lines) -> list[Note]:
    return [Note("remark", line) for line in lines]


def _command(*words: str) -> Note:
    return Note("remark", f"$ mapper {' '.join(words)}")


def _products_notes(products) -> list[Note]:
    """Remarks and warnings of the products (the no-field reason is said where the map would be)."""
    return [n for n in products.notes if n.level in ("remark", "warning")]


def _new_survey(path: Path, site: Path) -> Iterator[Note]:
    """``mapper new`` and ``mapper meter add`` of the sample meter."""
    from datetime import date

    from mapper.cli.cmd_meter import add_meter
    from mapper.cli.cmd_new import created_notes
    from mapper.survey.create import create_survey
    from mapper.units import canonical_unit

    yield _command("new", str(path), "--site", str(site), "--spacing", "2", "--unit", "kV/m", "--operator", "demo")
    with create_survey(path, site, spacing_m=2.0, display_unit=canonical_unit("kV/m"), operator="demo") as survey:
        notes = created_notes(survey)
    yield from notes
    m = SAMPLE_METER
    yield _command("meter", "add", str(path), SAMPLE_METER_ID, *(w for k, v in m.items() for w in (f"--{k}", v)))
    yield from add_meter(str(path), SAMPLE_METER_ID, {
        "description": m["description"], "serial": m["serial"],
        "calibration_date": date.fromisoformat(m["calibrated"]), "due_date": date.fromisoformat(m["due"]),
    })


def _import(path: Path, file: Path) -> Iterator[Note]:
    from mapper.cli.cmd_import import import_file

    yield _command("import", str(path), str(file))
    yield from import_file(str(path), str(file))


def _grid(path: Path) -> Iterator[Note]:
    from mapper.cli.cmd_grid import store_field

    yield _command("grid", str(path))
    notes: list[Note] = []
    store_field(str(path), emit=notes.append)
    yield from notes


def run_demo(out: Path, samples: Path = SAMPLES) -> Iterator[Note]:
    """Run each stage on the North Hall sample and yield what each says.

    Parameters
    ----------
    out : Path
        Output folder; its earlier demo survey is replaced.
    samples : Path
        Folder holding the sample site files.

    Yields
    ------
    Note
        ``remark`` lines for standard output (the command line of each stage first), ``warning``
        lines for standard error, in the order the stages say them.
    """
    site = samples / "north_hall.toml"
    if not site.exists():
        raise MapperError("sample site not found (run from a clone of the repository)", where=str(site))
    if out.exists() and not out.is_dir():
        raise MapperError("is a file; --out takes a folder to write the demo into", where=str(out))
    out.mkdir(parents=True, exist_ok=True)
    survey = out / "north_hall.survey"
    after = out / "north_hall_after.survey"
    for path in (survey, after):
        for stale in (path, Path(f"{path}-wal"), Path(f"{path}-shm")):
            stale.unlink(missing_ok=True)

    yield from _new_survey(survey, site)
    yield from _import(survey, samples / "north_hall_conditions.csv")
    yield from _import(survey, samples / "north_hall_readings.csv")

    from mapper.cli.cmd_info import info_lines, survey_info
    from mapper.survey.store import Survey

    yield _command("info", str(survey))
    with Survey.open(survey) as opened:
        info = survey_info(opened)
    yield from _said(info_lines(info))
    yield from _grid(survey)

    from mapper.cli.cmd_hotspots import report_lines
    from mapper.workflow import survey_file_products

    # Made once: the hotspot list, the GeoPackage, the report and the comparison's "before".
    products = survey_file_products(survey)
    yield _command("hotspots", str(survey))
    products.require_field()
    yield from (Note("warning", w) for w in products.warnings)
    yield from _said(report_lines(products))

    from mapper.atomic_file import output_path
    from mapper.export.bundle import export_products

    gpkg, csv = out / "north_hall.gpkg", out / "north_hall_readings.csv"
    yield _command("export", str(survey), str(gpkg), "--csv", str(csv))
    output_path(str(gpkg), ".gpkg")
    output_path(str(csv), ".csv")
    yield from _products_notes(products)
    exported = export_products(products, gpkg, csv_path=csv)
    yield from _said(exported.lines(products))

    from mapper.cli.cmd_report import written_lines
    from mapper.export.report import write_report

    pdf = out / "north_hall.pdf"
    yield _command("report", str(survey), str(pdf), "--png")
    output_path(str(pdf), ".pdf")
    yield from _products_notes(products)
    reported = write_report(products, pdf, png_path=pdf.with_suffix(".png"))
    yield from _said(written_lines(reported, products))

    # a week later, after an ioniser bar and a grounded brush were fitted to belt 1
    yield from _new_survey(after, site)
    yield from _import(after, samples / "north_hall_after_conditions.csv")
    yield from _import(after, samples / "north_hall_after_readings.csv")
    yield from _grid(after)

    from mapper.cli.cmd_compare import compare_products, comparison_lines

    diff = out / "north_hall_before_after.gpkg"
    yield _command("compare", str(survey), str(after), "--out", str(diff))
    output_path(str(diff), ".gpkg", "--out")
    output_path(str(diff.with_suffix(".pdf")), ".pdf", "--pdf")
    later = survey_file_products(after).require_field()
    cmp, printed, messages = compare_products(products, later, str(survey), str(after), diff,
                                              diff.with_suffix(".pdf"), None, threshold_given=False)
    yield from (Note("warning", m) for m in messages)
    yield from _said(comparison_lines(cmp, products, later, diff, printed))
    yield Note("remark", f"wrote {survey} and {after}")
