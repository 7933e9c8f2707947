"""The application layer: survey -> corrected readings -> field model -> findings, written once.

Every shell runs the chain through here, so all of them show the same numbers for the same
survey:

- :func:`survey_products`: the whole chain for a survey file, behind ``mapper hotspots``,
  ``mapper compare``, the GeoPackage export and the PDF report;
- :func:`build_survey_field`: the field model of a survey's corrected readings, which
  ``mapper grid`` stores (and :func:`survey_products` builds when none is stored);
- :func:`live_products`: the fast mode for the survey app, refitted after each reading.

Which readings count is decided in :mod:`mapper.field.inputs`; the smallest number of distinct
positions for a map is :data:`MIN_FIELD_POSITIONS`, the same everywhere; meter profiles are read
by :func:`mapper.corrections.pipeline.load_meters`.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np

from mapper.corrections import CorrectionResult, MeterProfile, correct
from mapper.corrections.pipeline import load_meters
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS, export_crs
from mapper.features import Findings, advise_sampling, analyse, find_hotspots
from mapper.features.hotspots import reading_hotspots
from mapper.field import FieldGrid, build_field, field_from_bytes
from mapper.field.build import METHODS
from mapper.field.inputs import (
    MIN_FIELD_POSITIONS,
    distinct_positions,
    field_heights,
    field_inputs,
    is_excluded,
    usable,
)
from mapper.field.physical import seeds_from_site
from mapper.notes import NOTE_LEVELS, Note
from mapper.plan.grid import PlanPoint
from mapper.readings.model import Conditions, CorrectedReading, Reading
from mapper.site.model import Site
from mapper.survey.store import Survey
from mapper.units import BareNumber, canonical_unit, resolve_threshold

#: Remarks that say where the field model came from start with this.
FIELD_NOTE_PREFIX = "field model:"
@dataclass(frozen=True)
class Products:
    """Everything an export or report is made of, in site metres and SI units.

    Attributes
    ----------
    name : str
        Survey (site) name.
    source : str
        Survey file path.
    site : Site
        The site, site metres.
    crs : ExportCRS
        Where exported geometry goes.
    display_unit : str
        Unit shown to people.
    sign_convention : str
        ``physics`` or ``atmospheric`` (how the meter signed its readings; values here are physics).
    threshold_v_per_m : float
        Action level used, V/m.
    threshold_source : str
        ``command line`` (given to :func:`survey_products`) or ``survey`` (the survey's own).
    operator : str
        Who surveyed.
    created_utc : str
        When the survey file was created.
    spacing_m : float
        Planned grid spacing, metres.
    readings : tuple of CorrectedReading
        Every current field reading, corrected, raw value kept.
    controls : tuple of Reading
        Current zero and reference readings (used by the drift correction).
    reading_extra : dict
        Stored columns a :class:`Reading` does not carry (``source``, ``recorded_utc``), by id.
    corrections : CorrectionResult or None
        What the corrections did; ``None`` when there were no readings.
    conditions : tuple of Conditions
        Condition notes in time order.
    meters : tuple of MeterProfile
        Meter profiles stored in the survey.
    grid : FieldGrid or None
        The field model; ``None`` when too few readings.
    field_source : str
        ``stored`` (the survey's own model), ``built`` (made for this export) or ``""``.
    field_note : str
        Where the field model came from, in words; ``""`` without one.
    findings : Findings or None
        Map features of ``grid`` at ``threshold_v_per_m``.
    no_field_reason : str or None
        Why there is no field model.
    notes : tuple of Note
        Remarks, warnings and the no-field reason for the user (site, corrections, field
        model); see also :attr:`warnings`.
    """

    name: str
    source: str
    site: Site
    crs: ExportCRS
    display_unit: str
    sign_convention: str
    threshold_v_per_m: float
    threshold_source: str
    operator: str
    created_utc: str
    spacing_m: float
    readings: tuple[CorrectedReading, ...]
    controls: tuple[Reading, ...]
    reading_extra: dict = field(default_factory=dict, compare=False)
    corrections: CorrectionResult | None = None
    conditions: tuple[Conditions, ...] = ()
    meters: tuple[MeterProfile, ...] = ()
    grid: FieldGrid | None = None
    field_source: str = ""
    field_note: str = ""
    findings: Findings | None = None
    no_field_reason: str | None = None
    notes: tuple[Note, ...] = ()

    @property
    def has_field(self) -> bool:
        """True when a field model (and findings) exist."""
        return self.grid is not None and self.findings is not None

    @property
    def used_readings(self) -> tuple[CorrectedReading, ...]:
        """The readings that enter the field model (not flagged ``excluded``)."""
        return tuple(usable(self.readings))

    @property
    def warnings(self) -> tuple[str, ...]:
        """The texts of the notes that are warnings (not remarks, not the no-field reason)."""
        return tuple(n.text for n in self.notes if n.level == "warning")

    def require_field(self) -> Products:
        """These products, or a one-line :class:`MapperError` naming the survey and why there is no field.

        Returns
        -------
        Products
            ``self``, when :attr:`has_field`.
        """
        if not self.has_field:
            raise MapperError(f"nothing to map: {self.no_field_reason}", where=self.source)
        return self

    def time_span(self) -> tuple[datetime, datetime] | None:
        """First and last field reading time, UTC."""
        times = sorted(r.reading.time for r in self.readings)
        return (times[0], times[-1]) if times else None

    def nearest_conditions(self, moment: datetime) -> Conditions | None:
        """The condition note nearest in time that gives RH or temperature."""
        return self.nearest_conditions_all([moment])[0]

    def nearest_conditions_all(self, moments: Sequence[datetime]) -> list[Conditions | None]:
        """:meth:`nearest_conditions` of many times at once (the earlier of two notes equally near)."""
        notes = [c for c in self.conditions if c.rh_percent is not None or c.temperature_c is not None]
        if not notes or not len(moments):
            return [None] * len(moments)
        one_us = timedelta(microseconds=1)
        epoch = notes[0].time
        t = np.array([(m - epoch) // one_us for m in moments], dtype=np.int64)
        at = np.array([(c.time - epoch) // one_us for c in notes], dtype=np.int64)
        k = np.searchsorted(at, t, side="left")
        before = np.clip(k - 1, 0, len(notes) - 1)
        after = np.clip(k, 0, len(notes) - 1)
        far = np.iinfo(np.int64).max
        gap_before = np.where(k > 0, np.abs(t - at[before]), far)
        gap_after = np.where(k < len(notes), np.abs(at[after] - t), far)
        pick = np.where(gap_before <= gap_after, before, after)
        return [notes[i] for i in pick.tolist()]

    def condition_ranges(self) -> dict[str, tuple[float, float] | None]:
        """``rh_percent`` and ``temperature_c`` as (min, max) over the notes, or ``None``."""
        rh = [c.rh_percent for c in self.conditions if c.rh_percent is not None]
        temp = [c.temperature_c for c in self.conditions if c.temperature_c is not None]
        return {
            "rh_percent": (min(rh), max(rh)) if rh else None,
            "temperature_c": (min(temp), max(temp)) if temp else None,
        }


def too_few_positions(positions: int, where: str = "the survey") -> str:
    """Why there is no field model: fewer than :data:`MIN_FIELD_POSITIONS` distinct positions."""
    return (f"a field model needs readings at {MIN_FIELD_POSITIONS} or more distinct positions; "
            f"{where} has {positions}")


def build_survey_field(
    site: Site,
    readings: Sequence[CorrectedReading],
    *,
    method: str = "auto",
    cell_m: float | None = None,
    neighbors: int | None = None,
    variogram=None,
    height_m: float | None = None,
) -> FieldGrid:
    """The field model of a survey's corrected readings (what ``mapper grid`` stores).

    Parameters
    ----------
    site : Site
        The site (outline; assets seed the physical model), site metres.
    readings : sequence of CorrectedReading
        Corrected field readings; excluded ones are left out here.
    method : str
        One of :data:`mapper.field.build.METHODS`.
    cell_m : float, optional
        Grid cell, metres; default the field engine's choice.
    neighbors : int, optional
        Moving-neighbourhood size for kriging.
    variogram : Variogram, optional
        Kriging variogram; default fitted.
    height_m : float, optional
        Map the field at this height above the floor, metres (physical model only).

    Raises
    ------
    MapperError
        With fewer than :data:`MIN_FIELD_POSITIONS` distinct positions, or when the engine
        cannot fit the readings.
    """
    used = usable(readings)
    xy, values = field_inputs(used)
    positions = distinct_positions(xy)
    if positions < MIN_FIELD_POSITIONS:
        raise MapperError(too_few_positions(positions, "the corrected readings"))
    return build_field(xy, values, site.outline, method=method, cell_m=cell_m, neighbors=neighbors,
                       variogram=variogram, heights_m=field_heights(used), seeds=seeds_from_site(site),
                       height_m=height_m)


@dataclass(frozen=True)
class _FieldModel:
    """What :func:`_field_model` decided: the grid (or why none), where it came from, what to say."""

    grid: FieldGrid | None = None
    source: str = ""
    note: str = ""
    remarks: tuple[Note, ...] = ()
    reason: str | None = None


def _field_model(
    survey: Survey, readings: Sequence[CorrectedReading], method: str | None, cell_m: float | None,
    use_stored: bool, height_m: float | None = None,
) -> _FieldModel:
    """The survey's stored field model when it is current, else one interpolated now.

    A stored model older than the latest change to the readings is not used; the new one is
    interpolated with the stored model's method. ``method`` or ``cell_m`` always build anew.
    """
    remarks: list[Note] = []
    build_method = method or "auto"
    consult_store = use_stored and method is None and cell_m is None and height_m is None
    stored = survey.latest_field() if consult_store else None
    if stored is not None:
        _, data, created = stored
        stored_grid = field_from_bytes(data)
        changed = survey.last_change_utc()
        if created >= changed:
            return _FieldModel(
                stored_grid,
                "stored",
                f"stored field model ({stored_grid.method}, made {created})",
                (Note("remark", f"{FIELD_NOTE_PREFIX} stored in the survey on {created} ({stored_grid.method})"),),
            )
        build_method = stored_grid.method if stored_grid.method in METHODS else "auto"
        remarks.append(Note(
            "warning",
            f"the stored field model ({created}) is older than the latest change to the "
            f"readings ({changed}); interpolated again with method {build_method} "
            "(run 'mapper grid' to store a new one)",
        ))
    try:
        grid = build_survey_field(survey.site, readings, method=build_method, cell_m=cell_m, height_m=height_m)
    except MapperError as exc:
        if cell_m is not None or height_m is not None:  # the user's own --cell or --height: say so
            raise
        return _FieldModel(remarks=tuple(remarks), reason=f"no field model could be built: {exc.message}")
    remarks.append(Note("remark", f"{FIELD_NOTE_PREFIX} built now ({grid.reason})"))
    if consult_store and stored is None:
        remarks.append(Note(
            "warning",
            "no field model stored in the survey; interpolated one now "
            "(run 'mapper grid' to choose the method and store it)",
        ))
    return _FieldModel(grid, "built", f"interpolated now ({grid.method}); not stored", tuple(remarks))


def survey_products(
    survey: Survey,
    threshold_v_per_m: float | None = None,
    method: str | None = None,
    cell_m: float | None = None,
    *,
    use_stored: bool = True,
    unit: str | None = None,
    height_m: float | None = None,
    on_step: Callable[[str], None] | None = None,
) -> Products:
    """Run the whole chain for one survey.

    Parameters
    ----------
    survey : Survey
        An open survey (read-only is enough; nothing is written to it).
    threshold_v_per_m : float, optional
        Action level, V/m; default the survey's own.
    method : str, optional
        Interpolation method (``auto``, ``kriging``, ``universal``, ``rbf``, ``idw``). When given,
        or when ``cell_m`` is given, a new field model is built.
    cell_m : float, optional
        Grid cell, metres; default the field engine's choice.
    use_stored : bool
        Use the survey's stored field model when it is newer than the last change to the
        readings and neither ``method`` nor ``cell_m`` is given. A stale stored model is
        replaced by one interpolated now with its method, and a missing one by ``auto``; both
        cases add a warning to ``notes`` (see :attr:`Products.warnings`).
    unit : str, optional
        Display unit; default the survey's.
    height_m : float, optional
        Map the field at this height above the floor, metres (physical model only; builds anew).
    on_step : callable, optional
        Called with the name of each step as it starts (a spinner on a terminal shows it).

    Returns
    -------
    Products
        With ``grid`` and ``findings`` set, or ``no_field_reason`` saying why not.
    """
    step = on_step or (lambda _text: None)
    if method is not None and method not in METHODS:
        raise MapperError(f"unknown method {method!r}; accepted: {', '.join(METHODS)}")
    site = survey.site
    plan = survey.plan
    unit = canonical_unit(unit or survey.display_unit)
    threshold = (resolve_threshold(threshold_v_per_m, survey.display_unit) if threshold_v_per_m is not None
                 else float(survey.threshold_v_per_m))
    notes: list[Note] = [Note("warning", w) for w in site.warnings]
    step("reading the survey")
    everything = survey.readings(kind=None)
    controls = tuple(r for r in everything if r.kind in ("zero", "reference"))
    meters = load_meters(survey)
    corrections = None
    readings: tuple[CorrectedReading, ...] = ()
    if any(r.kind == "field" for r in everything):
        step("correcting the readings")
        corrections = correct(everything, meters)
        readings = corrections.readings
        notes.extend(Note("warning", w) for w in corrections.warnings)

    xy, values = field_inputs(readings)
    positions = distinct_positions(xy)
    if positions == 0:
        model = _FieldModel(reason="the survey has no field readings to map; import or record readings first")
    elif positions < MIN_FIELD_POSITIONS:
        model = _FieldModel(reason=too_few_positions(positions))
    else:
        step("field model")
        model = _field_model(survey, readings, method, cell_m, use_stored, height_m)
    notes.extend(model.remarks)
    grid, reason = model.grid, model.reason
    findings = None
    if grid is not None:
        step("hotspots, keep-away checks and advice")
        findings = analyse(
            grid, site, readings, threshold, unit=unit, planned=plan.points
        )
    if reason:
        notes.append(Note("reason", reason))
    return Products(
        name=survey.name,
        source=str(survey.path),
        site=site,
        crs=export_crs(site),
        display_unit=unit,
        sign_convention=survey.sign_convention,
        threshold_v_per_m=threshold,
        threshold_source="survey" if threshold_v_per_m is None else (
            f"command line, a bare number read in the survey's display unit {survey.display_unit}"
            if isinstance(threshold_v_per_m, BareNumber) else "command line"),
        operator=survey.get("operator", "") or "",
        created_utc=survey.get("created_utc", "") or "",
        spacing_m=plan.spacing_m,
        readings=readings,
        controls=controls,
        reading_extra=survey.reading_origins(r.reading.id for r in readings),
        corrections=corrections,
        conditions=tuple(survey.conditions()),
        meters=tuple(meters[k] for k in sorted(meters)),
        grid=grid,
        field_source=model.source,
        field_note=model.note,
        findings=findings,
        no_field_reason=reason,
        notes=tuple(notes),
    )


def survey_file_products(path: str | Path, threshold_v_per_m: float | None = None, **options) -> Products:
    """Open a survey file read-only and run :func:`survey_products` on it.

    Parameters
    ----------
    path : str or Path
        Survey file.
    threshold_v_per_m : float, optional
        Action level, V/m; default the survey's own.
    **options
        ``method``, ``cell_m`` (metres), ``use_stored``, ``unit``: as for :func:`survey_products`.

    Returns
    -------
    Products
    """
    with Survey.open(path) as survey:
        return survey_products(survey, threshold_v_per_m, **options)


# ----------------------------------------------------------------------------- fast mode (the app)
#: Fewest distinct positions before the live map tries kriging; below it, inverse distance (common
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
    notes: tuple[str, ...] = ()


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
        ``None`` below :data:`MIN_FIELD_POSITIONS` distinct positions, or when no method of
        the engine could fit the readings.
    engine : str
        Which method made it, or why there is no grid.
    """
    n = distinct_positions(xy)
    if n < MIN_FIELD_POSITIONS:
        return None, too_few_positions(n, "the walk")
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


def live_products(
    readings: Sequence[Reading],
    site: Site,
    threshold_v_per_m: float,
    planned: Sequence[PlanPoint],
    cancelled: Callable[[], bool] = lambda: False,
    meters: Mapping[str, MeterProfile] | None = None,
    unit: str = "V/m",
) -> LiveResult | None:
    """The fast mode of the chain, for the survey app: field, hotspots and suggestions.

    The readings are corrected as every other output corrects them (calibration, zero, drift;
    the outlier check is left to ``mapper review``), so the live map and the exports agree. When
    the corrections cannot be applied, the map shows the readings as entered and the result's
    ``notes`` say so (never silently).

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
    notes: tuple[str, ...] = ()
    try:
        corrected = list(correct(readings, meters or {}, check_outliers=False).readings)
    except MapperError as exc:
        corrected = [CorrectedReading(r, r.value_v_per_m) for r in readings if r.kind == "field"]
        notes = (f"corrections not applied ({exc.message}): the live map shows the readings as entered",)
    if cancelled():
        return None
    field_rs = usable(corrected)
    xy, values = field_inputs(field_rs)
    grid, engine = fit_live_field(xy, values, site.outline)
    if cancelled():
        return None
    if grid is None:
        # No map yet, but a reading at or beyond the level is a hotspot all the same.
        measured = _measured_only(site, field_rs, threshold_v_per_m)
        return LiveResult(None, measured, len(measured), engine=engine, readings=len(field_rs),
                          seconds=time.perf_counter() - t0, notes=notes)
    try:
        hotspots, count, sugg, feat = find_live_features(grid, site, field_rs, threshold_v_per_m, planned, unit)
    except MapperError as exc:
        hotspots = _measured_only(site, field_rs, threshold_v_per_m)
        count, sugg, feat = len(hotspots), (), "readings only"
        notes += (f"hotspots not mapped: {exc.message}",)
    if cancelled():
        return None
    return LiveResult(
        grid, hotspots, count, sugg, f"{engine}; {feat}", len(field_rs), time.perf_counter() - t0, notes
    )


__all__ = [
    "FIELD_NOTE_PREFIX",
    "NOTE_LEVELS",
    "Note",
    "MIN_FIELD_POSITIONS",
    "MIN_POSITIONS_FOR_KRIGING",
    "LiveResult",
    "Products",
    "Suggested",
    "build_survey_field",
    "fit_live_field",
    "live_products",
    "too_few_positions",
    "distinct_positions",
    "field_inputs",
    "is_excluded",
    "load_meters",
    "survey_file_products",
    "survey_products",
]
