"""Where to measure next: places where one more reading would most change a decision.

Two kinds of place are proposed, in this order:

1. *Uncertain decisions*: grid nodes where the exceedance probability P(|E| >= t) lies inside a
   window (default 0.2 to 0.8), ranked by ``score = std * 4 P (1 - P)``: the kriging standard
   deviation (how much one reading there can teach) weighted by how undecided the node is (1 at
   P = 0.5, 0.64 at P = 0.2 or 0.8). A reading at such a place decides whether it belongs to a
   hotspot.
2. *Unsampled gaps*: nodes farther from every reading than 1.5 times the survey's usual spacing
   (median nearest-neighbour distance between readings), largest gap first. Each proposal counts
   as a reading for the next one (farthest-point order), so proposals spread over the gap. As in
   a planned grid, gap proposals keep half a spacing from the outline where the site allows it.

Proposals are kept at least ``min_separation_m`` apart, lie on walkable ground (inside the outline,
outside assets marked not walkable) and, when planned grid points are given, are snapped to the
nearest free walkable planned point within that separation.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely
from scipy.spatial import cKDTree
from shapely.geometry.base import BaseGeometry

from mapper.errors import MapperError
from mapper.features._grid import regular_spacing
from mapper.features.hotspots import check_threshold, exceedance_probability, reading_arrays
from mapper.features.sources import source_records
from mapper.field.model import FieldGrid
from mapper.readings.model import CorrectedReading
from mapper.site.model import Site
from mapper.units import format_field

#: A gap is "large" when it exceeds this many typical spacings.
GAP_FACTOR = 1.5


@dataclass(frozen=True)
class Suggestion:
    """A place to take the next reading.

    Attributes
    ----------
    rank : int
        1 for the most useful.
    x, y : float
        Position, site metres (a planned point's position when snapped).
    reason : str
        ``source`` (beside a physical-model source the readings do not pin down), ``decision``
        (the exceedance is uncertain here) or ``gap`` (far from every reading).
    why : str
        The reason in words, with numbers.
    estimate_v_per_m : float
        Field estimate there, V/m.
    std_v_per_m : float or None
        Standard deviation there, V/m; ``None`` without one.
    p_exceed : float or None
        P(|E| >= t) there; ``None`` without a standard deviation.
    gap_m : float or None
        Distance to the nearest reading, metres; ``None`` without readings. Gap proposals are
        ordered by the distance to the nearest reading *or earlier proposal*, so ``gap_m`` need
        not decrease down the list.
    point : str or None
        Label of the planned point it was snapped to.
    """

    rank: int
    x: float
    y: float
    reason: str
    why: str
    estimate_v_per_m: float
    std_v_per_m: float | None
    p_exceed: float | None
    gap_m: float | None
    point: str | None = None

    def to_dict(self) -> dict:
        """JSON-ready description."""
        return dict(self.__dict__)


def walkable_area(site: Site) -> BaseGeometry:
    """The outline minus polygonal assets marked not walkable, metres."""
    blocked = [
        a.geometry
        for a in site.assets
        if not a.walkable and a.geometry.geom_type.endswith("Polygon")
    ]
    area = site.outline.difference(shapely.union_all(blocked)) if blocked else site.outline
    return area


def _planned_points(planned: Sequence[Any]) -> list[tuple[str, float, float]]:
    out = []
    for p in planned:
        if hasattr(p, "x") and hasattr(p, "y"):
            out.append((str(getattr(p, "label", "")), float(p.x), float(p.y)))
        else:
            label, x, y = p
            out.append((str(label), float(x), float(y)))
    return out


def advise_sampling(
    grid: FieldGrid,
    site: Site,
    readings: Sequence[CorrectedReading],
    threshold_v_per_m: float,
    *,
    count: int = 10,
    p_window: tuple[float, float] = (0.2, 0.8),
    min_separation_m: float | None = None,
    planned: Sequence[Any] | None = None,
    unit: str = "V/m",
) -> tuple[Suggestion, ...]:
    """Rank places to measure next.

    Parameters
    ----------
    grid : FieldGrid
        Field model; estimate and std in V/m.
    site : Site
        Site (outline, assets), metres.
    readings : sequence of CorrectedReading
        Readings already taken.
    threshold_v_per_m : float
        Action level t, V/m.
    count : int
        Largest number of suggestions.
    p_window : (float, float)
        Exceedance probabilities counted as undecided.
    min_separation_m : float, optional
        Smallest distance between suggestions, metres; default the larger of the typical reading
        spacing and two grid cells.
    planned : sequence, optional
        Planned grid points to snap to: objects with ``label``, ``x``, ``y`` attributes, or
        ``(label, x, y)`` tuples, metres.
    unit : str
        Display unit of the values in each suggestion's sentence (``why``).

    Returns
    -------
    tuple of Suggestion
        Ranked, at most ``count``. Estimate, standard deviation, probability and gap are those
        of the proposed grid node, before any snapping to a planned point.
    """
    t = check_threshold(threshold_v_per_m)
    lo, hi = p_window
    if not 0.0 <= lo < hi <= 1.0:
        raise MapperError(f"probability window {p_window!r} must satisfy 0 <= low < high <= 1")
    if count < 1:
        return ()
    cell = regular_spacing(grid)
    est = np.asarray(grid.estimate, dtype=float)
    std = np.asarray(grid.std, dtype=float)
    xx, yy = np.meshgrid(np.asarray(grid.x, float), np.asarray(grid.y, float))
    walk = walkable_area(site)
    shapely.prepare(walk)
    ok = np.isfinite(est) & shapely.contains_xy(walk, xx, yy)
    ex, ey, ez, es = xx[ok], yy[ok], est[ok], std[ok]
    has_std = bool(np.isfinite(es).any())
    p = exceedance_probability(ez, np.nan_to_num(es, nan=0.0), t) if has_std else None

    _, xyv = reading_arrays(readings)
    if len(xyv):
        tree = cKDTree(xyv[:, :2])
        gap = tree.query(np.column_stack([ex, ey]))[0]
        if len(xyv) >= 2:
            nn = tree.query(xyv[:, :2], k=2)[0][:, 1]
            nn = nn[nn > 0]
            spacing = float(np.median(nn)) if nn.size else cell
        else:
            spacing = cell
    else:
        gap, spacing = None, cell
    sep = float(min_separation_m) if min_separation_m is not None else max(spacing, 2 * cell)

    chosen: list[tuple[int, str]] = []
    taken = np.full(ex.shape, np.inf)  # distance to the nearest suggestion so far

    def _take(k: int, reason: str) -> None:
        chosen.append((k, reason))
        np.minimum(taken, np.hypot(ex - ex[k], ey - ey[k]), out=taken)

    # Sources of the physical model that the readings do not pin down: measure beside them first.
    source_why: dict[int, str] = {}
    for src in source_records(grid, site):
        if src["well_determined"] or len(chosen) >= count or ex.size == 0:
            continue
        d = shapely.distance(shapely.from_wkt(src["wkt"]), shapely.points(ex, ey))
        d = np.where(taken >= sep, d, np.inf)
        k = int(np.argmin(d))
        if np.isfinite(d[k]):
            share = abs(src["charge_std_c"] / src["charge_c"]) if src["charge_c"] else float("inf")
            source_why[k] = (f"beside source {src['source_id']} ({src['asset'] or 'unlisted ' + src['kind']}), "
                             f"whose charge the readings do not pin down (standard error {share:.0%} of it)")
            _take(k, "source")
    if p is not None:
        undecided = np.flatnonzero((p >= lo) & (p <= hi) & np.isfinite(es) & (es > 0))
        score = es[undecided] * 4.0 * p[undecided] * (1.0 - p[undecided])
        order = undecided[np.argsort(-score, kind="stable")]
        for k in order:
            if len(chosen) >= count:
                break
            if taken[k] >= sep:
                _take(int(k), "decision")
    if gap is not None:
        # Half a spacing from the walls, as a planned grid would be (where any node is that far).
        dist = np.where(gap > GAP_FACTOR * spacing, gap, -np.inf)
        wide = np.flatnonzero(np.isfinite(dist))
        edge = shapely.distance(site.outline.boundary, shapely.points(ex[wide], ey[wide]))
        near_wall = wide[edge < 0.5 * spacing]
        if near_wall.size < wide.size:
            dist[near_wall] = -np.inf
        for k, _ in chosen:
            np.minimum(dist, np.hypot(ex - ex[k], ey - ey[k]), out=dist)
        while len(chosen) < count:
            k = int(np.argmax(np.where(taken >= sep, dist, -np.inf)))
            # dist is the distance to the nearest reading or earlier proposal: farthest first.
            if not (taken[k] >= sep and dist[k] > GAP_FACTOR * spacing):
                break
            _take(k, "gap")
            np.minimum(dist, np.hypot(ex - ex[k], ey - ey[k]), out=dist)

    points = _planned_points(planned) if planned else []
    points = [pt for pt in points if shapely.contains_xy(walk, pt[1], pt[2])]
    used: set[int] = set()
    out: list[Suggestion] = []
    for k, reason in chosen:
        x, y, label = float(ex[k]), float(ey[k]), None
        if points:
            d = [
                np.hypot(px - x, py - y) if i not in used else np.inf
                for i, (_, px, py) in enumerate(points)
            ]
            i = int(np.argmin(d))
            if d[i] <= sep:
                used.add(i)
                label, x, y = points[i]
        s_k = float(es[k]) if np.isfinite(es[k]) else None
        p_k = float(p[k]) if p is not None else None
        g_k = float(gap[k]) if gap is not None else None
        if reason == "source":
            why = source_why[k]
        elif reason == "decision":
            why = f"P(|E| >= t) = {p_k:.2f} with standard deviation {format_field(s_k, unit, 3)}"
        else:
            why = f"{g_k:.2f} m from the nearest reading (usual spacing {spacing:.2f} m)"
        out.append(Suggestion(len(out) + 1, x, y, reason, why, float(ez[k]), s_k, p_k, g_k, label))
    return tuple(out)


__all__ = ["GAP_FACTOR", "Suggestion", "advise_sampling", "walkable_area"]
