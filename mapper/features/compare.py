"""Comparison of two surveys of one site: a difference grid and what happened to each hotspot.

The "after" field is resampled onto the "before" grid (bilinear, :class:`scipy.interpolate.
RegularGridInterpolator`, after extending it to its outline by nearest values) and compared only
where both surveys cover the site. Hotspots of each survey are found inside that common region
and matched by overlap, same polarity only: overlapping hotspots form a group (so a split or a
merge stays one group). A group with only a "before" side *cleared*, one with only an "after"
side *appeared*; otherwise its total area *grew*, *shrank* or stayed *unchanged* within a
relative tolerance.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import shapely
from scipy.interpolate import RegularGridInterpolator
from shapely.geometry import MultiPolygon
from shapely.geometry.base import BaseGeometry

from mapper.errors import MapperError
from mapper.features._grid import check_grid, extend_grid, nodes_in, polygonal
from mapper.features.hotspots import Hotspot, check_threshold, find_hotspots
from mapper.field.model import FieldGrid
from mapper.readings.model import CorrectedReading
from mapper.site.model import Site

CHANGE_STATUSES = ("appeared", "cleared", "grew", "shrank", "unchanged")

#: Outlines closer than this (Hausdorff distance, metres) count as the same site.
SAME_OUTLINE_M = 0.01


@dataclass(frozen=True)
class HotspotChange:
    """What happened to one group of overlapping hotspots between two surveys.

    Attributes
    ----------
    status : str
        ``appeared``, ``cleared``, ``grew``, ``shrank`` or ``unchanged``.
    polarity : str
        ``positive`` or ``negative``.
    before_ids, after_ids : tuple of str
        Hotspot ids in each survey (more than one on a side: a merge or split).
    area_before_m2, area_after_m2 : float
        Total areas, square metres.
    peak_before_v_per_m, peak_after_v_per_m : float or None
        Signed peak of largest magnitude on each side, V/m; ``None`` on an empty side.
    overlap_m2 : float
        Area common to both sides, square metres.
    geometry_before, geometry_after : shapely MultiPolygon
        Outlines on each side, metres.
    """

    status: str
    polarity: str
    before_ids: tuple[str, ...]
    after_ids: tuple[str, ...]
    area_before_m2: float
    area_after_m2: float
    peak_before_v_per_m: float | None
    peak_after_v_per_m: float | None
    overlap_m2: float
    geometry_before: MultiPolygon
    geometry_after: MultiPolygon

    @property
    def note(self) -> str:
        """``split``, ``merged`` or empty."""
        if len(self.before_ids) == 1 and len(self.after_ids) > 1:
            return "split"
        if len(self.before_ids) > 1 and len(self.after_ids) >= 1:
            return "merged"
        return ""

    def to_dict(self) -> dict:
        """JSON-ready description (geometries as WKT)."""
        return {
            "status": self.status,
            "polarity": self.polarity,
            "before_ids": list(self.before_ids),
            "after_ids": list(self.after_ids),
            "area_before_m2": self.area_before_m2,
            "area_after_m2": self.area_after_m2,
            "peak_before_v_per_m": self.peak_before_v_per_m,
            "peak_after_v_per_m": self.peak_after_v_per_m,
            "overlap_m2": self.overlap_m2,
            "note": self.note,
            "wkt_before": self.geometry_before.wkt,
            "wkt_after": self.geometry_after.wkt,
        }


@dataclass(frozen=True)
class ComparisonSummary:
    """Numbers that summarise a comparison.

    Attributes
    ----------
    threshold_v_per_m : float
        Action level used for both surveys, V/m.
    common_area_m2 : float
        Area covered by both surveys, square metres.
    mean_difference_v_per_m : float
        Mean of after - before over the common nodes, V/m.
    mean_abs_difference_v_per_m : float
        Mean of |after - before|, V/m.
    max_increase_v_per_m, max_decrease_v_per_m : float
        Largest rise and largest fall of the signed field, V/m (the fall as a negative number).
    max_abs_before_v_per_m, max_abs_after_v_per_m : float
        Largest |E| in the common region, V/m.
    area_above_before_m2, area_above_after_m2 : float
        Area with |E| >= t in the common region, square metres.
    counts : dict
        Number of changes per status (every status present, zeros included).
    """

    threshold_v_per_m: float
    common_area_m2: float
    mean_difference_v_per_m: float
    mean_abs_difference_v_per_m: float
    max_increase_v_per_m: float
    max_decrease_v_per_m: float
    max_abs_before_v_per_m: float
    max_abs_after_v_per_m: float
    area_above_before_m2: float
    area_above_after_m2: float
    counts: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        """JSON-ready copy."""
        return dict(self.__dict__, counts=dict(self.counts))


@dataclass(frozen=True)
class Comparison:
    """Two surveys of one site on a common grid.

    Attributes
    ----------
    x, y : ndarray
        Common grid node coordinates (the "before" grid), metres.
    before, after : ndarray, shape (len(y), len(x))
        Both estimates on the common grid, V/m; NaN outside the common region.
    difference : ndarray, shape (len(y), len(x))
        ``after - before``, V/m; NaN outside the common region.
    common_region : shapely geometry
        Where both surveys cover the site, metres.
    hotspots_before, hotspots_after : tuple of Hotspot
        Hotspots of each survey inside the common region.
    changes : tuple of HotspotChange
        One per group of overlapping hotspots.
    summary : ComparisonSummary
    """

    x: np.ndarray
    y: np.ndarray
    before: np.ndarray
    after: np.ndarray
    difference: np.ndarray
    common_region: BaseGeometry
    hotspots_before: tuple[Hotspot, ...]
    hotspots_after: tuple[Hotspot, ...]
    changes: tuple[HotspotChange, ...]
    summary: ComparisonSummary

    def difference_grid(self) -> FieldGrid:
        """The difference as a :class:`FieldGrid` (method ``difference``, no std, no settings) for export."""
        return FieldGrid(
            x=self.x,
            y=self.y,
            estimate=self.difference,
            std=np.full(self.difference.shape, np.nan),
            method="difference",
        )


def check_same_site(before: Site, after: Site) -> None:
    """Refuse two sites that are not the same: names differ and outlines differ.

    Parameters
    ----------
    before, after : Site
        Sites of the two surveys.
    """
    same_name = before.name.strip().casefold() == after.name.strip().casefold()
    same_outline = float(before.outline.hausdorff_distance(after.outline)) <= SAME_OUTLINE_M
    if not (same_name or same_outline):
        raise MapperError(
            f"the surveys are of different sites ({before.name!r} and {after.name!r}) with "
            "different outlines; compare accepts two surveys of the same site "
            "(same site name or the same outline)"
        )


def _groups(
    before: Sequence[Hotspot], after: Sequence[Hotspot]
) -> list[tuple[list[Hotspot], list[Hotspot]]]:
    items = [("b", h) for h in before] + [("a", h) for h in after]
    parent = list(range(len(items)))

    def find(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, (_, hb) in enumerate(items[: len(before)]):
        for j, (_, ha) in enumerate(items[len(before) :], start=len(before)):
            if hb.polarity == ha.polarity and hb.geometry.intersection(ha.geometry).area > 0:
                parent[find(i)] = find(j)
    groups: dict[int, tuple[list[Hotspot], list[Hotspot]]] = {}
    for i, (side, h) in enumerate(items):
        g = groups.setdefault(find(i), ([], []))
        (g[0] if side == "b" else g[1]).append(h)
    return list(groups.values())


def _peak(hs: Sequence[Hotspot]) -> float | None:
    return max((h.peak_v_per_m for h in hs), key=abs) if hs else None


def compare_fields(
    before: FieldGrid,
    after: FieldGrid,
    site_before: Site,
    site_after: Site,
    threshold_v_per_m: float,
    readings_before: Sequence[CorrectedReading] = (),
    readings_after: Sequence[CorrectedReading] = (),
    *,
    rel_tol: float = 0.1,
) -> Comparison:
    """Compare two field models of the same site.

    Parameters
    ----------
    before, after : FieldGrid
        Field models, V/m, each NaN outside its own site.
    site_before, site_after : Site
        Their sites; refused unless the same site (see :func:`check_same_site`).
    threshold_v_per_m : float
        Action level for the hotspots of both, V/m.
    readings_before, readings_after : sequence of CorrectedReading
        Readings for the hotspots' confirmed/suspected status.
    rel_tol : float
        Relative area change below which a matched group is ``unchanged`` (default 10 %).

    Returns
    -------
    Comparison
    """
    t = check_threshold(threshold_v_per_m)
    if not 0 <= rel_tol < 1:
        raise MapperError(f"relative tolerance {rel_tol!r} must be in [0, 1)")
    check_same_site(site_before, site_after)
    check_grid(before)
    check_grid(after)
    # Each field model covers its own outline (extended to it by nearest values).
    common = polygonal(site_before.outline.intersection(site_after.outline))
    xb, yb = np.asarray(before.x, float), np.asarray(before.y, float)
    xx, yy = np.meshgrid(xb, yb)
    in_common = nodes_in(common, xx, yy) if not common.is_empty else np.zeros(xx.shape, bool)
    if common.area <= 0 or not in_common.any():
        raise MapperError(
            f"the surveys of {site_before.name!r} do not overlap: no part of the site is covered "
            "by both field models; compare needs surveys of a common area"
        )
    eb = extend_grid(before, site_before.outline)
    ea = extend_grid(after, site_after.outline)
    zb = eb.extend(np.asarray(before.estimate, float))[eb.source]
    za = ea.extend(np.asarray(after.estimate, float))
    interp = RegularGridInterpolator((ea.y, ea.x), za, bounds_error=False, fill_value=np.nan)
    za_on_b = interp(np.column_stack([yy.ravel(), xx.ravel()])).reshape(xx.shape)
    valid = in_common & np.isfinite(za_on_b) & np.isfinite(zb)
    b = np.where(valid, zb, np.nan)
    a = np.where(valid, za_on_b, np.nan)
    diff = a - b

    hb = find_hotspots(before, site_before, t, readings_before, region=common)
    ha = find_hotspots(after, site_after, t, readings_after, region=common)
    changes = []
    for gb, ga in _groups(hb, ha):
        geom_b = MultiPolygon([h.geometry for h in gb])
        geom_a = MultiPolygon([h.geometry for h in ga])
        area_b = float(sum(h.area_m2 for h in gb))
        area_a = float(sum(h.area_m2 for h in ga))
        if not ga:
            status = "cleared"
        elif not gb:
            status = "appeared"
        else:
            rel = (area_a - area_b) / area_b
            status = "grew" if rel > rel_tol else "shrank" if rel < -rel_tol else "unchanged"
        overlap = float(shapely.intersection(geom_b, geom_a).area) if gb and ga else 0.0
        changes.append(
            HotspotChange(
                status=status,
                polarity=(gb or ga)[0].polarity,
                before_ids=tuple(h.id for h in gb),
                after_ids=tuple(h.id for h in ga),
                area_before_m2=area_b,
                area_after_m2=area_a,
                peak_before_v_per_m=_peak(gb),
                peak_after_v_per_m=_peak(ga),
                overlap_m2=overlap,
                geometry_before=geom_b,
                geometry_after=geom_a,
            )
        )
    changes.sort(key=lambda c: (CHANGE_STATUSES.index(c.status), c.before_ids, c.after_ids))
    counts = {s: sum(c.status == s for c in changes) for s in CHANGE_STATUSES}
    d = diff[valid]
    summary = ComparisonSummary(
        threshold_v_per_m=t,
        common_area_m2=float(common.area),
        mean_difference_v_per_m=float(d.mean()),
        mean_abs_difference_v_per_m=float(np.abs(d).mean()),
        max_increase_v_per_m=float(d.max()),
        max_decrease_v_per_m=float(d.min()),
        max_abs_before_v_per_m=float(np.abs(b[valid]).max()),
        max_abs_after_v_per_m=float(np.abs(a[valid]).max()),
        area_above_before_m2=float(sum(h.area_m2 for h in hb)),
        area_above_after_m2=float(sum(h.area_m2 for h in ha)),
        counts=counts,
    )
    return Comparison(xb, yb, b, a, diff, common, hb, ha, tuple(changes), summary)


__all__ = [
    "CHANGE_STATUSES",
    "Comparison",
    "ComparisonSummary",
    "HotspotChange",
    "check_same_site",
    "compare_fields",
]
