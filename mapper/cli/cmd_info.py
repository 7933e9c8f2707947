"""``mapper info``: what a survey holds."""

from __future__ import annotations

import json
from datetime import datetime

from mapper.cli.commands import summary
from mapper.cli.common import say
from mapper.corrections.pipeline import correct, load_meters
from mapper.survey.store import Survey
from mapper.survey.summary import summarise
from mapper.units import format_field
from mapper.wording import local_span, plural


def register(sub) -> None:
    p = sub.add_parser("info", help=summary('info'))
    p.add_argument("survey", help="survey file")
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(func=run)


def run(args) -> int:
    with Survey.open(args.survey) as survey:
        info = survey_info(survey)
    if args.json:
        say(json.dumps(info, indent=2))
        return 0
    for line in info_lines(info):
        say(line)
    return 0


def survey_info(survey: Survey) -> dict:
    """What ``mapper info`` shows: :func:`~mapper.survey.summary.summarise` and what the corrections did.

    The readings are read once, for the summary and the corrections.
    """
    everything = survey.readings(kind=None)
    info = summarise(survey, everything)
    result = correct(everything, load_meters(survey))
    info["corrections"] = {
        "applied": list(result.applied),
        "warnings": list(result.warnings),
        "drift": [d.summary(info["display_unit"]) for d in result.drift],
        "outliers_flagged": [r.reading.point or f"#{r.reading.id}" for r in result.flagged_outliers],
    }
    return info


def info_lines(info: dict) -> list[str]:
    """The text of ``mapper info``, line by line, from :func:`survey_info`."""
    out: list[str] = []
    add = out.append
    unit = info["display_unit"]
    site = info["site"]
    add(f"survey    {info['name']}  ({info['file']})")
    if info["operator"]:
        add(f"operator  {info['operator']}")
    add(f"site      {site['area_m2']:.1f} m², {plural(site['assets'], 'asset')}, {plural(site['zones'], 'zone')}")
    if site["georeferenced"]:
        add(
            f"georef    {site['crs']}, scale {site['georef_scale']:.6f}, rotation "
            f"{site['georef_rotation_deg']:.3f}°, RMS {site['georef_rms_m']:.3f} m"
        )
    else:
        add("georef    none (local site grid in metres)")
    plan = info["plan"]
    add(f"plan      {info['points']} points, {plan['layout']} at {plan['spacing_m']:g} m, walk "
        f"{plan['walk_length_m']:.0f} m")
    add(f"visited   {info['visited']} of {info['points']} points")
    by_kind = info["readings_by_kind"]
    kinds = ", ".join(f"{k} {v}" for k, v in sorted(by_kind.items()))
    add(f"readings  {plural(sum(by_kind.values()), 'reading')}" + (f" ({kinds})" if kinds else "")
        + f"; {info['free_position_readings']} off-grid; {plural(info['superseded'], 'superseded row')} kept")
    if info["time_span"]:
        span = tuple(datetime.fromisoformat(t) for t in info["time_span"])
        add(f"time      {local_span(span, info['timezone'])}")
    add(f"units     {unit}, sign convention {info['sign_convention']}, "
        f"threshold {format_field(info['threshold_v_per_m'], unit)}")
    cond = info["conditions"]
    if cond["notes"]:
        rh = cond["rh_percent"]
        t = cond["temperature_c"]
        add(
            f"conditions {plural(cond['notes'], 'note')}"
            + (f", RH {rh[0]:g}-{rh[1]:g} %" if rh else "")
            + (f", {t[0]:g}-{t[1]:g} °C" if t else "")
        )
    else:
        add("conditions none recorded")
    add(f"meters    {', '.join(info['meters'])}")
    corr = info["corrections"]
    add(f"corrected {', '.join(corr['applied']) or 'none applied (raw values used)'}")
    for line in corr["drift"]:
        add(f"drift     {line}")
    if corr["outliers_flagged"]:
        add(f"review    {plural(len(corr['outliers_flagged']), 'reading')} flagged as possible outliers: "
            f"{', '.join(corr['outliers_flagged'][:12])}")
    for message in site["warnings"] + corr["warnings"]:
        add(f"warning   {message}")
    return out
