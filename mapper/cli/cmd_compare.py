"""``mapper compare``: two surveys of one site, before and after a change.

Prints what happened to each hotspot (appeared, cleared, grew, shrank, unchanged) and a summary,
and writes a GeoPackage with the difference grid (raster ``difference``, after - before in V/m),
its bands, both surveys' hotspots, the changes and the common region, and a printable PDF with the
before, after and difference maps on one scale, the changes and the cautions (``--png`` for the
page as an image).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from mapper.cli.commands import summary
from mapper.cli.common import check_output, fmt, say, table, threshold_arg, warn
from mapper.cli.progress import working
from mapper.features import compare_fields
from mapper.features.cautions import CAUTIONS
from mapper.workflow import Products, survey_file_products


def register(sub) -> None:
    p = sub.add_parser(
        "compare",
        help=summary('compare'),
        description="Difference grid (after - before) and hotspot changes between two surveys "
        "of the same site, written to a GeoPackage and a printable PDF.",
    )
    p.add_argument("before", help="survey file before the change")
    p.add_argument("after", help="survey file after the change")
    p.add_argument("--out", required=True, help="GeoPackage to write, e.g. diff.gpkg")
    p.add_argument(
        "--threshold",
        type=threshold_arg,
        metavar="Q",
        help="action level with unit for both surveys (default: the first survey's own)",
    )
    p.add_argument("--pdf", metavar="FILE", default=None,
                   help="printable comparison to write (default: OUT with .pdf)")
    p.add_argument("--png", nargs="?", const="", default=None, metavar="FILE",
                   help="also write the comparison page as PNG (default: the PDF with .png)")
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(func=run)


def run(args) -> int:
    out = check_output(args.out, ".gpkg", "--out")
    pdf = Path(args.pdf) if args.pdf else out.with_suffix(".pdf")
    check_output(str(pdf), ".pdf", "--pdf")
    png = None if args.png is None else (Path(args.png) if args.png else pdf.with_suffix(".png"))
    if png is not None:
        check_output(str(png), ".png", "--png")
    with working("compare") as step:
        step("before")
        before = survey_file_products(args.before, args.threshold).require_field()
        step("after")
        after = survey_file_products(args.after, args.threshold).require_field()
    cmp, printed, messages = compare_products(before, after, args.before, args.after, out, pdf, png,
                                              threshold_given=args.threshold is not None)
    if args.json:
        from mapper.export.geojson import crs_statement

        say(
            json.dumps(
                {
                    "before": before.name,
                    "after": after.name,
                    "out": str(out),
                    "pdf": str(printed.pdf),
                    "png": None if printed.png is None else str(printed.png),
                    "crs": crs_statement(before.site),
                    "summary": cmp.summary.to_dict(),
                    "changes": [c.to_dict() for c in cmp.changes],
                    "warnings": messages,
                    "cautions": list(CAUTIONS),
                },
                indent=2,
            )
        )
        return 0
    for m in messages:
        warn(m)
    for line in comparison_lines(cmp, before, after, out, printed):
        say(line)
    return 0


def compare_products(before: Products, after: Products, before_name: str, after_name: str, out: Path, pdf: Path,
                     png: Path | None, *, threshold_given: bool):
    """Compare two surveys' products and write the GeoPackage and the printable comparison.

    Parameters
    ----------
    before, after : Products
        Both surveys' products, with field models, at the same threshold (V/m).
    before_name, after_name : str
        The survey files as the user named them (for the warnings).
    out, pdf : Path
        GeoPackage and PDF to write.
    png : Path or None
        The comparison page as PNG too.
    threshold_given : bool
        The threshold was given for both; otherwise differing survey thresholds are warned about.

    Returns
    -------
    cmp : Comparison
        Difference grid and hotspot changes (:func:`mapper.features.compare_fields`).
    printed : ComparisonReport
        What the printable comparison wrote.
    messages : list of str
        Warnings.
    """
    threshold = before.threshold_v_per_m
    unit = before.display_unit
    messages = [f"{before_name}: {m}" for m in before.warnings]
    messages += [f"{after_name}: {m}" for m in after.warnings]
    if not threshold_given and not np.isclose(after.threshold_v_per_m, threshold, rtol=1e-9):
        messages.append(
            f"the surveys have different thresholds ({fmt(threshold, unit)} and "
            f"{fmt(after.threshold_v_per_m, unit)}); both compared at the first one's"
        )
    cmp = compare_fields(
        before.grid,
        after.grid,
        before.site,
        after.site,
        threshold,
        before.readings,
        after.readings,
    )
    from mapper.export.compare_gpkg import write_comparison_gpkg  # geopandas: load when writing
    from mapper.export.compare_report import write_comparison_report

    with working("compare") as step:
        step("writing the GeoPackage")
        write_comparison_gpkg(out, cmp, before.site, unit)
        step("drawing the comparison")
        printed = write_comparison_report(cmp, before, after, pdf, png_path=png)
    return cmp, printed, messages


def comparison_lines(cmp, before: Products, after: Products, out: Path, printed) -> list[str]:
    """The text of ``mapper compare``, line by line (see :func:`compare_products`)."""
    from mapper.export.compare_gpkg import LAYERS, RASTER

    threshold = before.threshold_v_per_m
    unit = before.display_unit
    lines: list[str] = []
    add = lines.append
    s = cmp.summary
    add(f"before     {before.name}  ({before.source}; {before.field_note})")
    add(f"after      {after.name}  ({after.source}; {after.field_note})")
    add(f"threshold  |E| >= {fmt(threshold, unit)}")
    add(f"common     {s.common_area_m2:.1f} m² covered by both")
    add("")
    if cmp.changes:
        rows = [
            [
                c.status + (f" ({c.note})" if c.note else ""),
                "+" if c.polarity == "positive" else "-",
                ", ".join(c.before_ids) or "-",
                ", ".join(c.after_ids) or "-",
                f"{c.area_before_m2:.2f}",
                f"{c.area_after_m2:.2f}",
                fmt(c.peak_before_v_per_m, unit),
                fmt(c.peak_after_v_per_m, unit),
            ]
            for c in cmp.changes
        ]
        add("Hotspot changes:")
        add(
            table(
                rows,
                (
                    "change",
                    "pol",
                    "before",
                    "after",
                    "area before m²",
                    "area after m²",
                    "peak before",
                    "peak after",
                ),
            )
        )
    else:
        add(f"No hotspots in either survey at {fmt(threshold, unit)}.")
    add("")
    add("hotspots   " + ", ".join(f"{n} {k}" for k, n in s.counts.items()))
    add(
        table(
            [
                [
                    "largest |E|",
                    fmt(s.max_abs_before_v_per_m, unit),
                    fmt(s.max_abs_after_v_per_m, unit),
                ],
                [
                    "area at or above level",
                    f"{s.area_above_before_m2:.2f} m²",
                    f"{s.area_above_after_m2:.2f} m²",
                ],
            ],
            ("", "before", "after"),
        )
    )
    rise = (f"largest rise {fmt(s.max_increase_v_per_m, unit)}" if s.max_increase_v_per_m > 0
            else "no rise anywhere")
    fall = (f"largest fall {fmt(-s.max_decrease_v_per_m, unit)}" if s.max_decrease_v_per_m < 0
            else "no fall anywhere")
    add(
        f"difference (after - before): mean {fmt(s.mean_difference_v_per_m, unit)}, mean |d| "
        f"{fmt(s.mean_abs_difference_v_per_m, unit)}, {rise}, {fall}"
    )
    add(f"wrote      {out} (raster '{RASTER}', layers {', '.join(LAYERS)})")
    add(f"wrote      {printed.pdf} (before, after and difference maps, changes, cautions)")
    if printed.png is not None:
        add(f"wrote      {printed.png} (the comparison page)")
    add("")
    add("Cautions:")
    for c in CAUTIONS:
        add(f"  - {c}")
    return lines
