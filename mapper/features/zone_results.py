"""Each zone against its own limit: passed or exceeded, by how much, and where.

A zone is exceeded when a reading inside it, or the mapped field anywhere inside it, reaches the
zone's limit (its own ``limit``, else the survey's action level) in magnitude. A measured
exceedance decides on its own: the map can only add to what the readings show.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass

import numpy as np
import shapely

from mapper.features.hotspots import reading_arrays
from mapper.field.model import FieldGrid
from mapper.readings.model import CorrectedReading
from mapper.site.model import Site


@dataclass(frozen=True)
class ZoneResult:
    """One zone's result against its limit.

    Attributes
    ----------
    zone : str
        Zone name.
    limit_v_per_m : float
        The limit applied, V/m.
    limit_source : str
        ``zone`` (its own limit) or ``survey`` (the survey's action level).
    exceeded : bool
        True when a reading or the map inside reaches the limit in magnitude.
    worst_v_per_m : float or None
        Signed value of largest magnitude inside, from readings or map, V/m.
    worst_from : str or None
        ``reading`` or ``map``.
    worst_x, worst_y : float or None
        Where that value is, site metres.
    excess_v_per_m : float or None
        How far the worst magnitude is above the limit (negative: the margin below it), V/m.
    max_reading_v_per_m : float or None
        Signed reading of largest magnitude inside, V/m; None when no reading lies inside.
    n_readings : int
        Usable readings inside.
    """

    zone: str
    limit_v_per_m: float
    limit_source: str
    exceeded: bool
    worst_v_per_m: float | None
    worst_from: str | None
    worst_x: float | None
    worst_y: float | None
    excess_v_per_m: float | None
    max_reading_v_per_m: float | None
    n_readings: int

    def to_dict(self) -> dict:
        """JSON-ready (SI units)."""
        return asdict(self)


def zone_results(
    grid: FieldGrid | None, site: Site, readings: Sequence[CorrectedReading], threshold_v_per_m: float
) -> tuple[ZoneResult, ...]:
    """Every zone of the site against its limit.

    Parameters
    ----------
    grid : FieldGrid or None
        Field model (V/m); None judges from the readings alone.
    site : Site
        Site with its zones, metres.
    readings : sequence of CorrectedReading
        Corrected readings; only usable field readings count.
    threshold_v_per_m : float
        Survey action level, V/m, for zones without a limit of their own.

    Returns
    -------
    tuple of ZoneResult
        In site order.
    """
    ids, xyv = reading_arrays(readings)
    out = []
    if grid is not None:
        mx, my = np.meshgrid(np.asarray(grid.x, float), np.asarray(grid.y, float))
        est = np.asarray(grid.estimate, float)
    for zn in site.zones:
        limit = zn.limit_v_per_m if zn.limit_v_per_m is not None else float(threshold_v_per_m)
        candidates: list[tuple[float, str, float, float]] = []
        inside = (shapely.intersects_xy(zn.geometry.buffer(1e-9), xyv[:, 0], xyv[:, 1]) if len(xyv)
                  else np.zeros(0, bool))
        max_reading = None
        if inside.any():
            vals = xyv[inside]
            k = int(np.argmax(np.abs(vals[:, 2])))
            max_reading = float(vals[k, 2])
            candidates.append((max_reading, "reading", float(vals[k, 0]), float(vals[k, 1])))
        if grid is not None:
            nodes = shapely.contains_xy(zn.geometry, mx, my) & np.isfinite(est)
            if nodes.any():
                e = np.where(nodes, np.abs(est), -np.inf)
                i, j = np.unravel_index(int(np.argmax(e)), e.shape)
                candidates.append((float(est[i, j]), "map", float(mx[i, j]), float(my[i, j])))
        if candidates:
            # A reading wins a tie: what was measured is the fact.
            worst = max(candidates, key=lambda c: (abs(c[0]), c[1] == "reading"))
            out.append(ZoneResult(zn.name, limit, "zone" if zn.limit_v_per_m is not None else "survey",
                                  abs(worst[0]) >= limit, worst[0], worst[1], worst[2], worst[3],
                                  abs(worst[0]) - limit, max_reading, int(inside.sum())))
        else:
            out.append(ZoneResult(zn.name, limit, "zone" if zn.limit_v_per_m is not None else "survey",
                                  False, None, None, None, None, None, None, 0))
    return tuple(out)


def zone_sentence(r: ZoneResult, fmt) -> str:
    """One line a person reads: ``packing EPA (limit 125 V/in, its own): EXCEEDED by ...``.

    ``fmt`` formats a V/m value in the display unit.
    """
    origin = "its own" if r.limit_source == "zone" else "the survey's"
    head = f"{r.zone} (limit {fmt(r.limit_v_per_m)}, {origin})"
    if r.worst_v_per_m is None:
        return f"{head}: not judged, no reading and no mapped node inside"
    where = f"at x {r.worst_x:.1f} m, y {r.worst_y:.1f} m ({'a reading' if r.worst_from == 'reading' else 'mapped'})"
    if r.exceeded:
        return f"{head}: EXCEEDED by {fmt(r.excess_v_per_m)}, {fmt(r.worst_v_per_m)} {where}"
    return f"{head}: passed, largest {fmt(r.worst_v_per_m)} {where}, {fmt(-r.excess_v_per_m)} below the limit"


__all__ = ["ZoneResult", "zone_results", "zone_sentence"]
