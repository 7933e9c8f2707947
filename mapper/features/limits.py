"""Action levels and the keep-away rules of the ESD standards, checked against a field map.

The keep-away rules (ANSI/ESD S20.20, process-essential insulators):

* 1999 text: where the field exceeds 2000 V/in (78.74 kV/m), ESD-sensitive items must be kept at
  least 12 in (30 cm) away.
* 2014 text, cl. 8.3.1: where the field exceeds 125 V/in (4.92 kV/m), ESD-sensitive items must be
  at least 1 in (2.5 cm) away.

Distances are used as the standard states them in inches (1 in = 0.0254 m exactly), so 12 in is
0.3048 m. The field map cannot tell an insulator from any other source; every region above a
rule's level is checked as if it were a process-essential insulator. These are defaults: the
site's own ESD control plan overrides them (:data:`mapper.features.cautions.LIMITS_ARE_DEFAULTS`).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
from shapely.geometry import Polygon

from mapper.defaults import DEFAULT_THRESHOLD_V_PER_M
from mapper.features._grid import extend_grid, nodes_in
from mapper.features.cautions import LIMITS_ARE_DEFAULTS
from mapper.features.hotspots import signed_regions
from mapper.field.model import FieldGrid
from mapper.site.model import SENSITIVE_KINDS, Asset, Site
from mapper.units import INCH_M


@dataclass(frozen=True)
class KeepAwayRule:
    """Where the field exceeds a level, ESD-sensitive items must stay at least a distance away.

    Attributes
    ----------
    key : str
        Short identifier, e.g. ``S20.20-1999``.
    standard : str
        Citation of the rule's source.
    field_above_v_per_m : float
        Field magnitude above which the rule applies, V/m.
    min_distance_m : float
        Smallest allowed distance from the region to sensitive items, metres.
    text : str
        The rule in words, with the standard's own units.
    """

    key: str
    standard: str
    field_above_v_per_m: float
    min_distance_m: float
    text: str


#: ANSI/ESD S20.20 (1999 text), process-essential insulators: > 2000 V/in -> >= 12 in.
RULE_S20_20_1999 = KeepAwayRule(
    key="S20.20-1999",
    standard="ANSI/ESD S20.20 (1999 text), process-essential insulators",
    field_above_v_per_m=2000.0 / INCH_M,
    min_distance_m=12 * INCH_M,
    text="field above 2000 V/in (78.74 kV/m): ESD-sensitive items at least 12 in (30 cm) away",
)

#: ANSI/ESD S20.20-2014 cl. 8.3.1, process-essential insulators: > 125 V/in -> >= 1 in.
RULE_S20_20_2014 = KeepAwayRule(
    key="S20.20-2014 8.3.1",
    standard="ANSI/ESD S20.20-2014 cl. 8.3.1, process-essential insulators",
    field_above_v_per_m=125.0 / INCH_M,
    min_distance_m=1 * INCH_M,
    text="field above 125 V/in (4.92 kV/m): ESD-sensitive items at least 1 in (2.5 cm) away",
)

#: The rules checked by default.
DEFAULT_RULES: tuple[KeepAwayRule, ...] = (RULE_S20_20_1999, RULE_S20_20_2014)

#: Printed with every keep-away check.
LIMITS_NOTE = LIMITS_ARE_DEFAULTS


@dataclass(frozen=True)
class Violation:
    """A sensitive asset closer to a high-field region than a keep-away rule allows.

    Attributes
    ----------
    rule : KeepAwayRule
        The rule broken.
    asset : str
        Asset name.
    asset_kind : str
        Asset kind.
    distance_m : float
        Distance from the region to the asset, metres (0 when the asset is inside it).
    region : shapely Polygon
        The region above the rule's level, site metres.
    region_peak_v_per_m : float
        Signed estimate of largest magnitude in the region, V/m.
    """

    rule: KeepAwayRule
    asset: str
    asset_kind: str
    distance_m: float
    region: Polygon
    region_peak_v_per_m: float

    @property
    def message(self) -> str:
        """One line: what is too close to what, and which standard says so."""
        return (
            f"{self.asset} ({self.asset_kind}) is {self.distance_m * 100:.1f} cm from a region of "
            f"{abs(self.region_peak_v_per_m) / 1e3:.3g} kV/m peak; {self.rule.standard}: "
            f"{self.rule.text}"
        )

    def to_dict(self) -> dict:
        """JSON-ready description (SI units, region as WKT)."""
        return {
            "rule": self.rule.key,
            "standard": self.rule.standard,
            "field_above_v_per_m": self.rule.field_above_v_per_m,
            "min_distance_m": self.rule.min_distance_m,
            "asset": self.asset,
            "asset_kind": self.asset_kind,
            "distance_m": self.distance_m,
            "region_peak_v_per_m": self.region_peak_v_per_m,
            "message": self.message,
            "wkt": self.region.wkt,
        }


def is_sensitive(asset: Asset, sensitive_kinds: Iterable[str] = SENSITIVE_KINDS) -> bool:
    """Whether keep-away rules apply to an asset: marked sensitive, or of a sensitive kind."""
    return bool(asset.sensitive) or asset.kind.lower() in {k.lower() for k in sensitive_kinds}


def check_keep_away(
    grid: FieldGrid,
    site: Site,
    rules: Sequence[KeepAwayRule] = DEFAULT_RULES,
    *,
    sensitive_kinds: Iterable[str] = SENSITIVE_KINDS,
) -> tuple[Violation, ...]:
    """Check every sensitive asset against every keep-away rule.

    Parameters
    ----------
    grid : FieldGrid
        Field model, V/m.
    site : Site
        Site with its assets, metres.
    rules : sequence of KeepAwayRule
        Rules to check; default ANSI/ESD S20.20 1999 and 2014 texts.
    sensitive_kinds : iterable of str
        Asset kinds treated as holding ESD-sensitive items (besides assets marked sensitive).

    Returns
    -------
    tuple of Violation
        One per rule and asset (the nearest region), in rule order then asset order.
    """
    kinds = set(sensitive_kinds)
    assets = [a for a in site.assets if is_sensitive(a, kinds)]
    if not assets or not rules:
        return ()
    ext = extend_grid(grid, site.outline)
    z = ext.extend(np.asarray(grid.estimate, dtype=float))
    xx, yy = ext.xx, ext.yy
    out: list[Violation] = []
    for rule in rules:
        # The standard says "exceeds": strictly above; contouring makes >= and > the same line.
        regions = [
            poly for _, poly in signed_regions(ext, z, rule.field_above_v_per_m, site.outline)
        ]
        if not regions:
            continue
        for asset in assets:
            dists = [float(poly.distance(asset.geometry)) for poly in regions]
            k = int(np.argmin(dists))
            if dists[k] < rule.min_distance_m:
                poly = regions[k]
                mask = nodes_in(poly, xx, yy)
                peak = float(z[mask][np.argmax(np.abs(z[mask]))]) if mask.any() else float("nan")
                out.append(Violation(rule, asset.name, asset.kind, dists[k], poly, peak))
    return tuple(out)


__all__ = [
    "DEFAULT_RULES",
    "DEFAULT_THRESHOLD_V_PER_M",
    "LIMITS_NOTE",
    "RULE_S20_20_1999",
    "RULE_S20_20_2014",
    "KeepAwayRule",
    "Violation",
    "check_keep_away",
    "is_sensitive",
]
