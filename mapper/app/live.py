"""The live map: refit the field after each reading and find hotspots and places to measure next.

Runs in a worker thread, so everything here is a pure function of arrays and frozen records.
The live map uses the RAW readings (``value_v_per_m`` as stored, physics sign); the corrected
map comes from ``mapper map`` and the report.

Two stand-ins are isolated in one function each and used only when the real stage cannot be
imported: :func:`_idw_stand_in` for the field engine and :func:`_count_stand_in` for map
features.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import shapely

from mapper.errors import MapperError
from mapper.plan.grid import PlanPoint
from mapper.readings.model import Reading
from mapper.site.model import Site

#: Fewest distinct reading positions before the map is coloured by an estimate.
MIN_POSITIONS_FOR_ESTIMATE = 4
#: Fewest distinct positions before kriging is tried; below it, inverse distance (common
#: practice, no source: a variogram needs a few dozen pairs per lag).
MIN_POSITIONS_FOR_KRIGING = 30


@dataclass(frozen=True)
class LiveGrid:
    """A gridded field, the shape of :class:`mapper.field.model.FieldGrid`.

    Attributes
    ----------
    x, y : ndarray
        Cell-centre coordinates, site metres, increasing; shapes (nx,), (ny,).
    estimate : ndarray, shape (ny, nx)
        Field estimate, V/m (physics sign); NaN outside the site.
    std : ndarray, shape (ny, nx)
        Standard deviation, V/m; NaN where unknown.
    method : str
        Interpolation method.
    """

    x: np.ndarray
    y: np.ndarray
    estimate: np.ndarray
    std: np.ndarray
    method: str


@dataclass(frozen=True)
class Suggested:
    """A place to measure next: planned point label (or ``None``) and position, metres."""

    label: str | None
    x: float
    y: float
    why: str


@dataclass(frozen=True)
class LiveResult:
    """What one refit produced.

    Attributes
    ----------
    grid : FieldGrid or LiveGrid or None
        The field, or ``None`` with too few readings.
    hotspots : tuple
        Hotspot records (``mapper.features.Hotspot``) or, from the stand-in, dicts.
    hotspot_count : int
        Regions at or beyond the threshold (both polarities).
    suggestions : tuple of Suggested
        Ranked places to measure next.
    engine : str
        What made the grid and the hotspots (shown in the app and in reports).
    readings : int
        Number of field readings used.
    seconds : float
        Time spent, seconds.
    """

    grid: object | None
    hotspots: tuple = ()
    hotspot_count: int = 0
    suggestions: tuple[Suggested, ...] = ()
    engine: str = ""
    readings: int = 0
    seconds: float = 0.0
    notes: tuple[str, ...] = field(default=())


def distinct_positions(xy: np.ndarray) -> int:
    """Number of distinct positions (to 1 mm) among ``xy`` (n, 2), metres."""
    if len(xy) == 0:
        return 0
    return len(np.unique(np.round(xy, 3), axis=0))


def fit_live_field(xy: np.ndarray, values: np.ndarray, outline) -> tuple[object | None, str]:
    """Fit the field on the fast path of the field engine.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Positions, site metres.
    values : ndarray, shape (n,)
        Raw readings, V/m (repeats at one position allowed).
    outline : shapely Polygon
        Site outline, metres.

    Returns
    -------
    grid : FieldGrid or LiveGrid or None
        ``None`` below :data:`MIN_POSITIONS_FOR_ESTIMATE` distinct positions.
    engine : str
        Which method made it.
    """
    n = distinct_positions(xy)
    if n < MIN_POSITIONS_FOR_ESTIMATE:
        return None, "too few readings"
    try:
        from mapper.field import build_field
    except ImportError:
        return _idw_stand_in(xy, values, outline), "app stand-in (inverse distance)"
    methods = ("auto", "idw") if n >= MIN_POSITIONS_FOR_KRIGING else ("idw",)
    last_error = ""
    for method in methods:
        try:
            grid = build_field(xy, values, outline, method=method, fast=True)
            return grid, f"field engine ({grid.method})"
        except MapperError as exc:
            last_error = exc.message
    return _idw_stand_in(xy, values, outline), f"app stand-in (inverse distance; engine: {last_error})"


def _idw_stand_in(xy: np.ndarray, values: np.ndarray, outline, nodes: int = 6000, power: float = 2.0) -> LiveGrid:
    """Inverse-distance estimate on about ``nodes`` cells; used only without the field engine."""
    minx, miny, maxx, maxy = outline.bounds
    cell = math.sqrt((maxx - minx) * (maxy - miny) / nodes) or 1.0
    gx = minx + cell * (np.arange(max(1, math.ceil((maxx - minx) / cell))) + 0.5)
    gy = miny + cell * (np.arange(max(1, math.ceil((maxy - miny) / cell))) + 0.5)
    xx, yy = np.meshgrid(gx, gy)
    d2 = (xx[..., None] - xy[:, 0]) ** 2 + (yy[..., None] - xy[:, 1]) ** 2
    w = 1.0 / np.maximum(d2, 1e-12) ** (power / 2)
    est = (w * values).sum(axis=-1) / w.sum(axis=-1)
    est[~shapely.contains_xy(outline, xx, yy)] = np.nan
    return LiveGrid(gx, gy, est, np.full_like(est, np.nan), "idw")


def find_live_features(
    grid,
    site: Site,
    readings: Sequence[Reading],
    threshold_v_per_m: float,
    planned: Sequence[PlanPoint],
    unit: str = "V/m",
    suggestions: int = 5,
) -> tuple[tuple, int, tuple[Suggested, ...], str]:
    """Hotspots and sampling advice from the map-features stage.

    Returns
    -------
    hotspots : tuple
        Hotspot records.
    count : int
        Number of hotspots.
    suggestions : tuple of Suggested
        Places to measure next.
    engine : str
        What found them.
    """
    try:
        from mapper.features import advise_sampling, find_hotspots
        from mapper.readings.model import CorrectedReading
    except ImportError:
        return _count_stand_in(grid, threshold_v_per_m)
    raw = [CorrectedReading(r, r.value_v_per_m) for r in readings if r.kind == "field"]
    hotspots = find_hotspots(grid, site, threshold_v_per_m, raw)
    advice = advise_sampling(grid, site, raw, threshold_v_per_m, count=suggestions, planned=planned)
    sugg = tuple(Suggested(s.point, s.x, s.y, s.why) for s in advice)
    return hotspots, len(hotspots), sugg, "map features"


def _count_stand_in(grid, threshold_v_per_m: float) -> tuple[tuple, int, tuple[Suggested, ...], str]:
    """Count 4-connected groups of cells at or beyond the threshold; used only without map features."""
    from scipy import ndimage

    est = np.asarray(grid.estimate, dtype=float)
    spots = []
    for sign, name in ((1.0, "positive"), (-1.0, "negative")):
        labels, n = ndimage.label(np.nan_to_num(sign * est, nan=-np.inf) >= threshold_v_per_m)
        for k in range(1, n + 1):
            i, j = np.unravel_index(np.argmax(np.where(labels == k, sign * est, -np.inf)), est.shape)
            spots.append({"id": f"H{len(spots) + 1}", "polarity": name, "peak_v_per_m": float(est[i, j]),
                          "peak_x": float(grid.x[j]), "peak_y": float(grid.y[i])})
    return tuple(spots), len(spots), (), "app stand-in (cells above threshold)"


def refit(
    readings: Sequence[Reading],
    site: Site,
    threshold_v_per_m: float,
    planned: Sequence[PlanPoint],
    cancelled: Callable[[], bool] = lambda: False,
) -> LiveResult | None:
    """One live refit: field, hotspots and suggestions from the current raw readings.

    Parameters
    ----------
    readings : sequence of Reading
        Current readings; only ``field`` ones are used, raw values.
    site : Site
        Site, metres.
    threshold_v_per_m : float
        Action level, V/m.
    planned : sequence of PlanPoint
        Planned points that suggestions snap to.
    cancelled : callable
        Checked between stages; the refit gives up (returns ``None``) once it is true.
    """
    import time

    t0 = time.perf_counter()
    field_rs = [r for r in readings if r.kind == "field"]
    xy = np.array([(r.x, r.y) for r in field_rs], dtype=float).reshape(-1, 2)
    values = np.array([r.value_v_per_m for r in field_rs], dtype=float)
    grid, engine = fit_live_field(xy, values, site.outline)
    if cancelled():
        return None
    if grid is None:
        return LiveResult(None, engine=engine, readings=len(field_rs), seconds=time.perf_counter() - t0)
    notes: tuple[str, ...] = ()
    try:
        hotspots, count, sugg, feat = find_live_features(grid, site, field_rs, threshold_v_per_m, planned)
    except MapperError as exc:
        hotspots, count, sugg, feat = (), 0, (), "none"
        notes = (f"hotspots not found: {exc.message}",)
    if cancelled():
        return None
    return LiveResult(
        grid, hotspots, count, sugg, f"{engine}; {feat}", len(field_rs), time.perf_counter() - t0, notes
    )
