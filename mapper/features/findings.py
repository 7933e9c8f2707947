"""One call that turns a field model into everything a facility engineer acts on.

:func:`analyse` bundles contours, bands, hotspots (global and per zone), probable-exceedance
outlines, keep-away violations and sampling advice in a :class:`Findings` object, which the CLI,
the GeoPackage export, the PDF report and the terminal app all read.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from mapper.features.advice import Suggestion, advise_sampling
from mapper.features.cautions import CAUTIONS, LIMITS_ARE_DEFAULTS
from mapper.features.colour_scale import scale_levels
from mapper.features.contours import (
    Band,
    IsoLine,
    Levels,
    bands,
    field_range,
    iso_lines,
)
from mapper.features.hotspots import (
    Hotspot,
    ProbableRegion,
    check_threshold,
    exceedances_outside,
    find_hotspots,
    probable_exceedance,
    zone_hotspots,
)
from mapper.features.limits import (
    DEFAULT_RULES,
    DEFAULT_THRESHOLD_V_PER_M,
    KeepAwayRule,
    Violation,
    check_keep_away,
)
from mapper.features.zone_results import ZoneResult, zone_results
from mapper.field.model import FieldGrid
from mapper.readings.model import CorrectedReading
from mapper.site.model import Site
from mapper.units import canonical_unit, format_field


@dataclass(frozen=True)
class Findings:
    """Everything derived from one field model at one action level.

    Attributes
    ----------
    threshold_v_per_m : float
        Survey-wide action level, V/m.
    unit : str
        Display unit.
    levels : Levels
        Contour levels.
    isolines : tuple of IsoLine
        One per level, clipped to the outline.
    bands : tuple of Band
        ``len(levels) + 1`` bands tiling the outline.
    hotspots : tuple of Hotspot
        Regions with |E| >= threshold, both polarities.
    zone_hotspots : tuple of Hotspot
        Regions inside zones whose own limit differs from the threshold, at that limit.
    zone_results : tuple of ZoneResult
        Every zone against its limit: passed or exceeded, by how much, where.
    probable : tuple of ProbableRegion
        Regions where P(|E| >= threshold) >= 0.5; empty when the model has no std.
    probability_available : bool
        Whether the field model carries a standard deviation.
    violations : tuple of Violation
        Keep-away rule violations by sensitive assets.
    rules : tuple of KeepAwayRule
        The rules that were checked.
    advice : tuple of Suggestion
        Ranked places to measure next.
    unmapped_exceedances : tuple of int
        Ids of readings at or beyond the threshold that lie in no hotspot of their polarity.
    cautions : tuple of str
        Cautions to show with the findings.
    limits_note : str
        Statement that the limits are defaults overridden by the site's ESD control plan.
    """

    threshold_v_per_m: float
    unit: str
    levels: Levels
    isolines: tuple[IsoLine, ...]
    bands: tuple[Band, ...]
    hotspots: tuple[Hotspot, ...]
    zone_hotspots: tuple[Hotspot, ...]
    zone_results: tuple[ZoneResult, ...]
    probable: tuple[ProbableRegion, ...]
    probability_available: bool
    violations: tuple[Violation, ...]
    rules: tuple[KeepAwayRule, ...]
    advice: tuple[Suggestion, ...]
    unmapped_exceedances: tuple[int, ...]
    cautions: tuple[str, ...] = CAUTIONS
    limits_note: str = LIMITS_ARE_DEFAULTS

    @property
    def threshold_label(self) -> str:
        """The threshold in the display unit, e.g. ``"125 V/in"``."""
        return format_field(self.threshold_v_per_m, self.unit)

    def to_dict(self) -> dict:
        """JSON-ready summary (SI units, geometries as WKT) for ``--json`` output."""
        return {
            "threshold_v_per_m": self.threshold_v_per_m,
            "unit": self.unit,
            "levels_v_per_m": list(self.levels.values_v_per_m),
            "hotspots": [h.to_dict() for h in self.hotspots],
            "zone_hotspots": [h.to_dict() for h in self.zone_hotspots],
            "zone_results": [r.to_dict() for r in self.zone_results],
            "probable": [p.to_dict() for p in self.probable],
            "probability_available": self.probability_available,
            "violations": [v.to_dict() for v in self.violations],
            "rules": [
                {
                    "key": r.key,
                    "standard": r.standard,
                    "field_above_v_per_m": r.field_above_v_per_m,
                    "min_distance_m": r.min_distance_m,
                    "text": r.text,
                }
                for r in self.rules
            ],
            "advice": [s.to_dict() for s in self.advice],
            "unmapped_exceedances": list(self.unmapped_exceedances),
            "limits_note": self.limits_note,
            "cautions": list(self.cautions),
        }


def analyse(
    grid: FieldGrid,
    site: Site,
    readings: Sequence[CorrectedReading] = (),
    threshold_v_per_m: float = DEFAULT_THRESHOLD_V_PER_M,
    *,
    unit: str = "V/m",
    levels: Levels | None = None,
    rules: Sequence[KeepAwayRule] = DEFAULT_RULES,
    planned: Sequence[Any] | None = None,
    advice_count: int = 10,
) -> Findings:
    """Derive all map features of a field model.

    Parameters
    ----------
    grid : FieldGrid
        Field model; estimate and std in V/m, NaN outside the site.
    site : Site
        Site (outline, assets, zones), metres.
    readings : sequence of CorrectedReading
        Corrected readings (for hotspot status, advice gaps, unmapped exceedances).
    threshold_v_per_m : float
        Survey-wide action level, V/m; default 125 V/in = 4921.26 V/m.
    unit : str
        Display unit for levels and labels.
    levels : Levels, optional
        Contour levels; default the edges of the action-level colour scale inside the field range
        (:func:`~mapper.features.colour_scale.scale_levels`), so every map bands alike.
    rules : sequence of KeepAwayRule
        Keep-away rules to check; default ANSI/ESD S20.20 (1999 and 2014 texts).
    planned : sequence, optional
        Planned grid points that advice snaps to (``label, x, y``, metres).
    advice_count : int
        Largest number of sampling suggestions.

    Returns
    -------
    Findings
    """
    t = check_threshold(threshold_v_per_m)
    unit = canonical_unit(unit)
    if levels is None:
        lo, hi = field_range(grid)
        levels = Levels(scale_levels(t, lo, hi), unit)
    hotspots = find_hotspots(grid, site, t, readings)
    probable = probable_exceedance(grid, site, t, hotspots)
    has_std = bool(np.isfinite(np.asarray(grid.std, dtype=float)[grid.inside]).any())
    return Findings(
        threshold_v_per_m=t,
        unit=unit,
        levels=levels,
        isolines=iso_lines(grid, site.outline, levels),
        bands=bands(grid, site.outline, levels),
        hotspots=hotspots,
        zone_hotspots=zone_hotspots(grid, site, readings, skip_limit_v_per_m=t),
        zone_results=zone_results(grid, site, readings, t),
        probable=probable,
        probability_available=has_std,
        violations=check_keep_away(grid, site, rules),
        rules=tuple(rules),
        advice=advise_sampling(grid, site, readings, t, count=advice_count, planned=planned, unit=unit),
        unmapped_exceedances=exceedances_outside(hotspots, readings, t),
    )


__all__ = ["Findings", "analyse"]
