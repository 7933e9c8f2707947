"""What is in a survey, as plain data for ``mapper info`` and the terminal app."""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence

from mapper.readings.model import Reading
from mapper.survey.store import Survey


def summarise(survey: Survey, readings: Sequence[Reading] | None = None) -> dict:
    """A JSON-ready summary of a survey.

    Parameters
    ----------
    survey : Survey
        An open survey.
    readings : sequence of Reading, optional
        The survey's current readings of every kind (``survey.readings(kind=None)``) when the
        caller has them already; read here otherwise.

    Returns
    -------
    dict
        ``name``, ``site`` (area, assets, zones, georeference), ``plan`` (spacing, layout),
        ``points`` (planned), ``visited`` (points with a current reading), ``readings`` (current
        field readings), ``readings_by_kind``, ``time_span``, ``display_unit``,
        ``sign_convention``, ``threshold_v_per_m``, ``conditions`` (count and RH/temperature
        ranges), ``meters``, ``superseded`` (rows that no longer count).
    """
    site = survey.site
    plan = survey.plan
    everything = survey.readings(kind=None) if readings is None else list(readings)
    field = [r for r in everything if r.kind == "field"]
    visited = {r.point for r in field if r.point}
    times = sorted(r.time for r in everything)
    conds = survey.conditions()
    rh = [c.rh_percent for c in conds if c.rh_percent is not None]
    temp = [c.temperature_c for c in conds if c.temperature_c is not None]
    georef = site.georef
    return {
        "name": survey.name,
        "file": str(survey.path),
        "operator": survey.get("operator", "") or "",
        "timezone": site.timezone,
        "site": {
            "area_m2": round(site.area_m2, 3),
            "assets": len(site.assets),
            "zones": len(site.zones),
            "georeferenced": georef is not None,
            "crs": georef.crs if georef else None,
            "georef_scale": georef.scale if georef else None,
            "georef_rotation_deg": georef.rotation_deg if georef else None,
            "georef_rms_m": georef.rms_m if georef else None,
            "warnings": list(site.warnings),
        },
        "plan": {
            "spacing_m": plan.spacing_m,
            "layout": plan.layout,
            "walk_length_m": round(plan.walk_length_m, 2),
        },
        "points": len(plan.points),
        "visited": len(visited),
        "readings": len(field),
        "readings_by_kind": dict(Counter(r.kind for r in everything)),
        "free_position_readings": sum(1 for r in field if r.point is None),
        "superseded": survey.count_rows() - len(everything),
        "time_span": [times[0].isoformat(), times[-1].isoformat()] if times else None,
        "display_unit": survey.display_unit,
        "sign_convention": survey.sign_convention,
        "threshold_v_per_m": survey.threshold_v_per_m,
        "conditions": {
            "notes": len(conds),
            "rh_percent": [min(rh), max(rh)] if rh else None,
            "temperature_c": [min(temp), max(temp)] if temp else None,
        },
        "meters": sorted(survey.meters()),
    }
