"""``mapper hotspots``: where a survey's field reaches the action level, and what is too close.

Reads the survey, corrects its readings, takes the stored field model (or interpolates one when
none is stored or the readings changed since), and prints the findings of
:func:`mapper.features.analyse`: hotspots, zone limits, probable exceedance, keep-away checks,
places to measure next, and the cautions.
"""

from __future__ import annotations

import json
from dataclasses import dataclass

import numpy as np

from mapper.cli.common import fmt, say, table, threshold_arg, warn
from mapper.corrections import MeterProfile, correct
from mapper.errors import MapperError
from mapper.features import Findings, analyse
from mapper.features.hotspots import EXCLUDING_FLAGS
from mapper.field import METHODS, build_field, field_from_bytes
from mapper.field.model import FieldGrid
from mapper.plan.grid import PlanPoint
from mapper.readings.model import CorrectedReading
from mapper.site.model import Site
from mapper.survey.store import Survey


@dataclass(frozen=True)
class SurveyInputs:
    """What the map-feature commands need from one survey file.

    Attributes
    ----------
    path : str
        Survey file.
    name : str
        Survey name.
    site : Site
        The site, metres.
    grid : FieldGrid
        Field model, V/m.
    readings : tuple of CorrectedReading
        Corrected field readings (excluded ones included, flagged).
    threshold_v_per_m : float
        Action level, V/m (the command line's, else the survey's).
    threshold_source : str
        ``command line`` or ``survey``.
    unit : str
        Display unit.
    planned : tuple of PlanPoint
        Planned grid points.
    field_note : str
        Where the field model came from.
    warnings : tuple of str
        Warnings from the corrections and the field model.
    """

    path: str
    name: str
    site: Site
    grid: FieldGrid
    readings: tuple[CorrectedReading, ...]
    threshold_v_per_m: float
    threshold_source: str
    unit: str
    planned: tuple[PlanPoint, ...]
    field_note: str
    warnings: tuple[str, ...]


def load_survey_inputs(path: str, threshold_v_per_m: float | None = None) -> SurveyInputs:
    """Open a survey read-only and gather its site, corrected readings and field model.

    Parameters
    ----------
    path : str
        Survey file.
    threshold_v_per_m : float, optional
        Action level from the command line, V/m; default the survey's own.

    Returns
    -------
    SurveyInputs
    """
    with Survey.open(path) as survey:
        name = survey.name
        site = survey.site
        planned = survey.plan.points
        unit = survey.display_unit
        survey_threshold = survey.threshold_v_per_m
        raw = survey.readings(kind=None)
        meters = {
            mid: MeterProfile.from_dict(data, where=f"{path}: meter {mid}")
            for mid, data in survey.meters().items()
        }
        stored = survey.latest_field()
        changed = survey.last_change_utc()
    result = correct(raw, meters)
    readings = tuple(result.readings)
    usable = [r for r in readings if not (EXCLUDING_FLAGS & (set(r.flags) | set(r.reading.flags)))]
    if not usable:
        raise MapperError(
            "the survey has no field readings to map; import or record readings first", where=path
        )
    warnings = list(result.warnings)
    grid: FieldGrid | None = None
    method = "auto"
    if stored is not None:
        summary, data, created = stored
        stored_grid = field_from_bytes(data)
        if created >= changed:
            grid = stored_grid
            note = f"stored field model ({grid.method}, made {created})"
        else:
            method = stored_grid.method if stored_grid.method in METHODS else "auto"
            warnings.append(
                f"the stored field model ({created}) is older than the latest change to the "
                f"readings ({changed}); interpolated again with method {method} "
                "(run 'mapper grid' to store a new one)"
            )
    if grid is None:
        xy = np.array([(r.reading.x, r.reading.y) for r in usable], dtype=float)
        values = np.array([r.value_v_per_m for r in usable], dtype=float)
        grid = build_field(xy, values, site.outline, method=method)
        note = f"interpolated now ({grid.method}); not stored"
        if stored is None:
            warnings.append(
                "no field model stored in the survey; interpolated one now "
                "(run 'mapper grid' to choose the method and store it)"
            )
    if threshold_v_per_m is None:
        threshold, source = survey_threshold, "survey"
    else:
        threshold, source = float(threshold_v_per_m), "command line"
    return SurveyInputs(
        path=str(path),
        name=name,
        site=site,
        grid=grid,
        readings=readings,
        threshold_v_per_m=threshold,
        threshold_source=source,
        unit=unit,
        planned=tuple(planned),
        field_note=note,
        warnings=tuple(warnings),
    )


def register(sub) -> None:
    p = sub.add_parser(
        "hotspots",
        help="list hotspots, keep-away violations and where to measure next",
        description="Outline where the field magnitude reaches the action level (both "
        "polarities), check the ANSI/ESD S20.20 keep-away distances, and print the cautions.",
    )
    p.add_argument("survey", help="survey file")
    p.add_argument(
        "--threshold",
        type=threshold_arg,
        metavar="Q",
        help="action level with unit, e.g. '1kV/m' or '125 V/in' (default: the survey's own)",
    )
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(func=run)


def run(args) -> int:
    inputs = load_survey_inputs(args.survey, args.threshold)
    findings = analyse(
        inputs.grid,
        inputs.site,
        inputs.readings,
        inputs.threshold_v_per_m,
        unit=inputs.unit,
        planned=inputs.planned,
    )
    if args.json:
        data = {
            "survey": inputs.name,
            "file": inputs.path,
            "threshold_source": inputs.threshold_source,
            "field_model": inputs.field_note,
            "method": inputs.grid.method,
            "warnings": list(inputs.warnings),
            **findings.to_dict(),
        }
        say(json.dumps(data, indent=2, allow_nan=False, default=_json_default))
        return 0
    for message in inputs.warnings:
        warn(message)
    for line in report_lines(inputs, findings):
        say(line)
    return 0


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    raise TypeError(f"{type(value).__name__} is not JSON-serialisable")


def _why(s, unit: str) -> str:
    """A suggestion's reason in the display unit."""
    if s.reason == "decision":
        return f"P = {s.p_exceed:.2f}, standard deviation {fmt(s.std_v_per_m, unit)}"
    return f"{s.gap_m:.1f} m from the nearest reading"


def _num(value: float | None, digits: int = 2) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


def hotspot_rows(findings: Findings, hotspots, unit: str) -> list[list[str]]:
    """Table rows for hotspots, values in the display unit."""
    rows = []
    for h in hotspots:
        rows.append(
            [
                h.id,
                "+" if h.polarity == "positive" else "-",
                h.status,
                f"{h.area_m2:.2f}",
                fmt(h.peak_v_per_m, unit),
                f"{h.peak_x:.2f}, {h.peak_y:.2f}",
                fmt(h.mean_v_per_m, unit),
                _num(h.p_exceed_max),
                str(len(h.reading_ids)),
                "-" if h.nearest_asset is None else f"{h.nearest_asset} {h.nearest_asset_m:.2f} m",
                ", ".join(h.zones) or "-",
            ]
        )
    return rows


_HOTSPOT_HEADER = (
    "id",
    "pol",
    "status",
    "area m²",
    "peak",
    "peak at x, y (m)",
    "mean",
    "P max",
    "readings",
    "nearest asset",
    "zones",
)


def report_lines(inputs: SurveyInputs, findings: Findings) -> list[str]:
    """The text report of ``mapper hotspots``, line by line."""
    unit = findings.unit
    out = [
        f"survey     {inputs.name}  ({inputs.path})",
        f"field      {inputs.field_note}",
        f"threshold  |E| >= {findings.threshold_label} ({inputs.threshold_source})",
        "",
    ]
    if findings.hotspots:
        out.append(f"Hotspots ({len(findings.hotspots)}):")
        out.append(table(hotspot_rows(findings, findings.hotspots, unit), _HOTSPOT_HEADER))
        out.append(
            "status: confirmed = a corrected reading inside reaches the level; suspected = only "
            "the interpolation says so."
        )
    else:
        out.append(f"No hotspots: the mapped field stays below {findings.threshold_label}.")
    if findings.zone_hotspots:
        out += ["", "Zones with their own limit:"]
        rows = hotspot_rows(findings, findings.zone_hotspots, unit)
        for row, h in zip(rows, findings.zone_hotspots, strict=True):
            row.insert(1, fmt(h.threshold_v_per_m, unit))
        header = list(_HOTSPOT_HEADER)
        header.insert(1, "limit")
        out.append(table(rows, header))
    out.append("")
    if not findings.probability_available:
        out.append(
            f"Probable exceedance: not available; the {inputs.grid.method} field model has no "
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
        out.append(f"Readings at or above the level outside any mapped hotspot (check them): {ids}")
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
