"""``mapper hotspots``: where a survey's field reaches the action level, and what is too close.

Runs :func:`mapper.workflow.survey_products` on the survey (corrected readings, the stored
field model or one interpolated now when none is stored or the readings changed since) and
prints its findings (:func:`mapper.features.analyse`): hotspots, zone limits, probable
exceedance, keep-away checks, places to measure next, and the cautions.
"""

from __future__ import annotations

import json

import numpy as np

from mapper.cli.commands import summary
from mapper.cli.common import fmt, say, table, threshold_arg, warn
from mapper.features.hotspots import MEASURED_NOTE
from mapper.features.zone_results import zone_sentence
from mapper.presentation import hotspot_table
from mapper.workflow import Products, survey_file_products


def register(sub) -> None:
    p = sub.add_parser(
        "hotspots",
        help=summary('hotspots'),
        description="Outline where the field magnitude reaches the action level (both "
        "polarities), check the ANSI/ESD S20.20 keep-away distances, and print the cautions.",
    )
    p.add_argument("survey", help="survey file")
    p.add_argument(
        "--threshold",
        type=threshold_arg,
        metavar="Q",
        help="action level, e.g. '1kV/m' or '125 V/in'; a bare number is in the survey's display unit "
        "(default: the survey's own)",
    )
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(func=run)


def run(args) -> int:
    products = survey_file_products(args.survey, args.threshold).require_field()
    if args.json:
        data = {
            "survey": products.name,
            "file": products.source,
            "threshold_source": products.threshold_source,
            "field_model": products.field_note,
            "method": products.grid.method,
            "warnings": list(products.warnings),
            **products.findings.to_dict(),
        }
        say(json.dumps(data, indent=2, allow_nan=False, default=_json_default))
        return 0
    for message in products.warnings:
        warn(message)
    for line in report_lines(products):
        say(line)
    return 0


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    raise TypeError(f"{type(value).__name__} is not JSON-serialisable")


def _why(s, unit: str) -> str:
    """A suggestion's reason in the display unit."""
    if s.reason == "source":
        return s.why
    if s.reason == "decision":
        return f"P = {s.p_exceed:.2f}, standard deviation {fmt(s.std_v_per_m, unit)}"
    return f"{s.gap_m:.1f} m from the nearest reading"


def _num(value: float | None, digits: int = 2) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


#: Columns of the hotspot tables (keys of :data:`mapper.presentation.HOTSPOT_COLUMNS`).
HOTSPOT_COLUMNS = ("id", "pol", "status", "area", "peak", "peak_at", "mean", "p_max", "readings", "nearest",
                   "zones")


def _hotspot_table(hotspots, unit: str) -> str:
    header, rows = hotspot_table(hotspots, unit, HOTSPOT_COLUMNS)
    return table(rows, header)


def report_lines(products: Products) -> list[str]:
    """The text report of ``mapper hotspots``, line by line.

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products` with a field model
        (:meth:`~mapper.workflow.Products.require_field`).
    """
    products.require_field()
    findings = products.findings
    unit = findings.unit
    out = [
        f"survey     {products.name}  ({products.source})",
        f"field      {products.field_note}",
        f"threshold  |E| >= {findings.threshold_label} ({products.threshold_source})",
        "",
    ]
    measured = any(h.status == "measured" for h in (*findings.hotspots, *findings.zone_hotspots))
    if findings.hotspots:
        out.append(f"Hotspots ({len(findings.hotspots)}):")
        out.append(_hotspot_table(findings.hotspots, unit))
        out.append(
            "status: confirmed = a corrected reading inside reaches the level; suspected = only "
            "the interpolation says so"
            + ("; " + MEASURED_NOTE if measured else "")
            + "."
        )
    elif findings.unmapped_exceedances:
        # Never "no hotspots" while a reading reaches the level (here: readings off the site).
        out.append(f"No hotspot inside the site outline, but readings reach {findings.threshold_label} "
                   "(listed below).")
    else:
        out.append(f"No hotspots: no reading and no part of the mapped field reaches {findings.threshold_label}.")
    if findings.zone_hotspots:
        out += ["", "Zones with their own limit:"]
        header, rows = hotspot_table(findings.zone_hotspots, unit, HOTSPOT_COLUMNS)
        for row, h in zip(rows, findings.zone_hotspots, strict=True):
            row.insert(1, fmt(h.threshold_v_per_m, unit))
        header.insert(1, "limit")
        out.append(table(rows, header))
        if measured and not findings.hotspots:
            out.append(f"status: {MEASURED_NOTE}.")
    if findings.zone_results:
        out += ["", "Zone results:"]
        out += [f"  {zone_sentence(r, lambda v: fmt(v, unit))}" for r in findings.zone_results]
    out.append("")
    if not findings.probability_available:
        out.append(
            f"Probable exceedance: not available; the {products.grid.method} field model has no "
            "standard deviation (use kriging)."
        )
    elif findings.probable:
        out.append("Probable exceedance (P(|E| >= level) >= 0.5, normal approximation):")
        out.append(
            table(
                [
                    [
                        p.id,
                        f"{p.area_m2:.2f}",
                        _num(p.p_exceed_max),
                        ", ".join(p.hotspot_ids) or "none",
                    ]
                    for p in findings.probable
                ],
                ("id", "area m²", "P max", "contains hotspots"),
            )
        )
    else:
        out.append("Probable exceedance: nowhere is P(|E| >= level) >= 0.5.")
    if findings.unmapped_exceedances:
        ids = ", ".join(str(i) for i in findings.unmapped_exceedances)
        out.append(f"Readings at or above the level outside every hotspot (check their positions): {ids}")
    out += ["", "Keep-away checks:"]
    for rule in findings.rules:
        out.append(f"  {rule.standard}: {rule.text}")
    if findings.violations:
        out.append(
            table(
                [
                    [
                        v.asset,
                        v.asset_kind,
                        f"{v.distance_m * 100:.1f} cm",
                        f"{v.rule.min_distance_m * 100:.1f} cm",
                        fmt(v.region_peak_v_per_m, unit),
                        v.rule.key,
                    ]
                    for v in findings.violations
                ],
                ("asset", "kind", "distance", "required", "region peak", "rule"),
            )
        )
    else:
        out.append("  No ESD-sensitive asset is closer than these distances.")
    out.append(f"  {findings.limits_note}")
    if findings.advice:
        out += ["", "Measure next:"]
        out.append(
            table(
                [
                    [
                        str(s.rank),
                        s.point or "-",
                        f"{s.x:.2f}, {s.y:.2f}",
                        s.reason,
                        _why(s, unit),
                    ]
                    for s in findings.advice[:5]
                ],
                ("#", "point", "x, y (m)", "reason", "why"),
            )
        )
    out += ["", "Cautions:"]
    out += [f"  - {c}" for c in findings.cautions]
    return out
