"""The live map: refit the field after each reading and find hotspots and places to measure next.

Runs in a worker thread, so everything here is a pure function of arrays and frozen records.
The live map uses the readings corrected as the exports correct them (calibration, zero, drift);
the outlier check is left to ``mapper review``. The field is the field engine's fast path
(:func:`mapper.field.build_field` with ``fast=True``); hotspots and suggestions come from the
map-features stage (:func:`mapper.features.find_hotspots`, :func:`mapper.features.advise_sampling`).
"""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from mapper.corrections.meter import MeterProfile
from mapper.corrections.pipeline import correct
from mapper.errors import MapperError
from mapper.features import advise_sampling, find_hotspots
from mapper.features.hotspots import reading_hotspots
from mapper.field import FieldGrid, build_field
from mapper.field.inputs import distinct_positions, field_inputs, usable
from mapper.plan.grid import PlanPoint
from mapper.readings.model import CorrectedReading, Reading
from mapper.site.model import Site

#: Fewest distinct reading positions before the map is coloured by an estimate.
MIN_POSITIONS_FOR_ESTIMATE = 4
#: Fewest distinct positions before kriging is tried; below it, inverse distance (common
#: practice, no source: a variogram needs a few dozen pairs per lag).
MIN_POSITIONS_FOR_KRIGING = 30


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
    grid : FieldGrid or None
        The field, or ``None`` with too few readings (or when the engine could not fit one).
    hotspots : tuple
        Hotspot records (``mapper.features.Hotspot``).
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

    grid: FieldGrid | None
    hotspots: tuple = ()
    hotspot_count: int = 0
    suggestions: tuple[Suggested, ...] = ()
    engine: str = ""
    readings: int = 0
    seconds: float = 0.0
    notes: tuple[str, ...] = field(default=())


def fit_live_field(xy: np.ndarray, values: np.ndarray, outline) -> tuple[FieldGrid | None, str]:
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
    grid : FieldGrid or None
        ``None`` below :data:`MIN_POSITIONS_FOR_ESTIMATE` distinct positions, or when no method
        of the engine could fit the readings.
    engine : str
        Which method made it, or why there is no grid.
    """
    n = distinct_positions(xy)
    if n < MIN_POSITIONS_FOR_ESTIMATE:
        return None, "too few readings"
    methods = ("auto", "idw") if n >= MIN_POSITIONS_FOR_KRIGING else ("idw",)
    last_error = ""
    for method in methods:
        try:
            grid = build_field(xy, values, outline, method=method, fast=True)
            return grid, f"field engine ({grid.method})"
        except MapperError as exc:
            last_error = exc.message
    return None, f"no map: the field engine could not fit the readings ({last_error})"


def find_live_features(
    grid: FieldGrid,
    site: Site,
    readings: Sequence[CorrectedReading],
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
    hotspots = find_hotspots(grid, site, threshold_v_per_m, readings)
    advice = advise_sampling(grid, site, readings, threshold_v_per_m, count=suggestions, planned=planned,
                             unit=unit)
    sugg = tuple(Suggested(s.point, s.x, s.y, s.why) for s in advice)
    return hotspots, len(hotspots), sugg, "map features"


def _measured_only(site: Site, readings: Sequence[CorrectedReading], threshold_v_per_m: float) -> tuple:
    """Hotspots from the readings alone (:func:`mapper.features.hotspots.reading_hotspots`)."""
    try:
        return reading_hotspots(site, threshold_v_per_m, readings)
    except MapperError:
        return ()


def refit(
    readings: Sequence[Reading],
    site: Site,
    threshold_v_per_m: float,
    planned: Sequence[PlanPoint],
    cancelled: Callable[[], bool] = lambda: False,
    meters: Mapping[str, MeterProfile] | None = None,
    unit: str = "V/m",
) -> LiveResult | None:
    """One live refit: field, hotspots and suggestions from the current readings.

    The readings are corrected as every other output corrects them (calibration, zero, drift;
    the outlier check is left to ``mapper review``), so the live map and the exports agree.

    Parameters
    ----------
    readings : sequence of Reading
        Current readings of every kind (zero and reference readings feed the drift correction).
    site : Site
        Site, metres.
    threshold_v_per_m : float
        Action level, V/m.
    planned : sequence of PlanPoint
        Planned points that suggestions snap to.
    cancelled : callable
        Checked between stages; the refit gives up (returns ``None``) once it is true.
    meters : mapping of str to MeterProfile, optional
        The survey's meter profiles.
    unit : str
        Display unit of the suggestions' sentences.
    """
    t0 = time.perf_counter()
    try:
        corrected = list(correct(readings, meters or {}, check_outliers=False).readings)
    except MapperError:
        corrected = [CorrectedReading(r, r.value_v_per_m) for r in readings if r.kind == "field"]
    field_rs = usable(corrected)
    xy, values = field_inputs(field_rs)
    grid, engine = fit_live_field(xy, values, site.outline)
    if cancelled():
        return None
    if grid is None:
        # No map yet, but a reading at or beyond the level is a hotspot all the same.
        measured = _measured_only(site, field_rs, threshold_v_per_m)
        return LiveResult(None, measured, len(measured), engine=engine, readings=len(field_rs),
                          seconds=time.perf_counter() - t0)
    notes: tuple[str, ...] = ()
    try:
        hotspots, count, sugg, feat = find_live_features(grid, site, field_rs, threshold_v_per_m, planned, unit)
    except MapperError as exc:
        hotspots = _measured_only(site, field_rs, threshold_v_per_m)
        count, sugg, feat = len(hotspots), (), "readings only"
        notes = (f"hotspots not mapped: {exc.message}",)
    if cancelled():
        return None
    return LiveResult(
        grid, hotspots, count, sugg, f"{engine}; {feat}", len(field_rs), time.perf_counter() - t0, notes
    )
