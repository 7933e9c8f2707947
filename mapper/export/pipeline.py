"""Survey -> corrected readings -> field grid -> findings, in one call.

:func:`survey_products` is the single pipeline behind ``mapper hotspots``, ``mapper compare``, the
GeoPackage export and the PDF report, so that all of them show the same numbers for the same
survey. Which readings count is decided in :mod:`mapper.field.inputs`; meter profiles are read
by :func:`mapper.corrections.pipeline.load_meters`.
"""

from __future__ import annotations

import bisect
import sqlite3
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

from mapper.corrections import CorrectionResult, MeterProfile, correct
from mapper.corrections.pipeline import load_meters
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS, export_crs
from mapper.features import Findings, analyse
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
from mapper.readings.model import Conditions, CorrectedReading, Reading
from mapper.site.model import Site
from mapper.survey.store import Survey
from mapper.units import BareNumber, canonical_unit, resolve_threshold

#: Notes that say where the field model came from start with this (they are remarks, not warnings).
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
    notes : tuple of str
        Warnings and remarks for the user (site, corrections, field model); see also
        :attr:`warnings`.
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
    notes: tuple[str, ...] = ()

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
        """The notes that are warnings: all but the field-model remarks and the no-field reason."""
        return tuple(
            n for n in self.notes if not n.startswith(FIELD_NOTE_PREFIX) and n != self.no_field_reason
        )

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
        notes = [c for c in self.conditions if c.rh_percent is not None or c.temperature_c is not None]
        if not notes:
            return None
        times = [c.time for c in notes]
        k = bisect.bisect_left(times, moment)
        near = [notes[i] for i in (k - 1, k) if 0 <= i < len(notes)]
        return min(near, key=lambda c: abs((c.time - moment).total_seconds()))

    def condition_ranges(self) -> dict[str, tuple[float, float] | None]:
        """``rh_percent`` and ``temperature_c`` as (min, max) over the notes, or ``None``."""
        rh = [c.rh_percent for c in self.conditions if c.rh_percent is not None]
        temp = [c.temperature_c for c in self.conditions if c.temperature_c is not None]
        return {
            "rh_percent": (min(rh), max(rh)) if rh else None,
            "temperature_c": (min(temp), max(temp)) if temp else None,
        }


def _reading_extra(survey: Survey, ids: list[int]) -> dict[int, dict]:
    if not ids:
        return {}
    try:
        rows = survey.conn.execute(
            "SELECT id, source, recorded_utc FROM readings WHERE id BETWEEN ? AND ?", (min(ids), max(ids))
        ).fetchall()
    except sqlite3.Error:
        return {}
    wanted = set(ids)
    return {int(r[0]): {"source": r[1], "recorded_utc": r[2]} for r in rows if int(r[0]) in wanted}


@dataclass(frozen=True)
class _FieldModel:
    """What :func:`_field_model` decided: the grid (or why none), where it came from, what to say."""

    grid: FieldGrid | None = None
    source: str = ""
    note: str = ""
    remarks: tuple[str, ...] = ()
    reason: str | None = None


def _field_model(
    survey: Survey, xy, values, outline, method: str | None, cell_m: float | None, use_stored: bool,
    heights_m=None, height_m: float | None = None,
) -> _FieldModel:
    """The survey's stored field model when it is current, else one interpolated now.

    A stored model older than the latest change to the readings is not used; the new one is
    interpolated with the stored model's method. ``method`` or ``cell_m`` always build anew.
    """
    remarks: list[str] = []
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
                (f"{FIELD_NOTE_PREFIX} stored in the survey on {created} ({stored_grid.method})",),
            )
        build_method = stored_grid.method if stored_grid.method in METHODS else "auto"
        remarks.append(
            f"the stored field model ({created}) is older than the latest change to the "
            f"readings ({changed}); interpolated again with method {build_method} "
            "(run 'mapper grid' to store a new one)"
        )
    try:
        grid = build_field(xy, values, outline, method=build_method, cell_m=cell_m, heights_m=heights_m,
                           seeds=seeds_from_site(survey.site), height_m=height_m)
    except MapperError as exc:
        if cell_m is not None or height_m is not None:  # the user's own --cell or --height: say so
            raise
        return _FieldModel(remarks=tuple(remarks), reason=f"no field model could be built: {exc.message}")
    remarks.append(f"{FIELD_NOTE_PREFIX} built now ({grid.reason})")
    if consult_store and stored is None:
        remarks.append(
            "no field model stored in the survey; interpolated one now "
            "(run 'mapper grid' to choose the method and store it)"
        )
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

    Returns
    -------
    Products
        With ``grid`` and ``findings`` set, or ``no_field_reason`` saying why not.
    """
    if method is not None and method not in METHODS:
        raise MapperError(f"unknown method {method!r}; accepted: {', '.join(METHODS)}")
    site = survey.site
    unit = canonical_unit(unit or survey.display_unit)
    threshold = (resolve_threshold(threshold_v_per_m, survey.display_unit) if threshold_v_per_m is not None
                 else float(survey.threshold_v_per_m))
    notes: list[str] = list(site.warnings)
    everything = survey.readings(kind=None)
    controls = tuple(r for r in everything if r.kind in ("zero", "reference"))
    meters = load_meters(survey)
    corrections = None
    readings: tuple[CorrectedReading, ...] = ()
    if any(r.kind == "field" for r in everything):
        corrections = correct(everything, meters)
        readings = corrections.readings
        notes.extend(corrections.warnings)

    xy, values = field_inputs(readings)
    positions = distinct_positions(xy)
    if positions == 0:
        model = _FieldModel(reason="the survey has no field readings to map; import or record readings first")
    elif positions < MIN_FIELD_POSITIONS:
        model = _FieldModel(
            reason=f"a field model needs readings at {MIN_FIELD_POSITIONS} or more distinct positions; "
            f"the survey has {positions}"
        )
    else:
        model = _field_model(survey, xy, values, site.outline, method, cell_m, use_stored,
                             field_heights(readings), height_m)
    notes.extend(model.remarks)
    grid, reason = model.grid, model.reason
    findings = None
    if grid is not None:
        findings = analyse(
            grid, site, readings, threshold, unit=unit, planned=survey.plan.points
        )
    if reason:
        notes.append(reason)
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
        spacing_m=survey.plan.spacing_m,
        readings=readings,
        controls=controls,
        reading_extra=_reading_extra(survey, [r.reading.id for r in readings]),
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


__all__ = [
    "FIELD_NOTE_PREFIX",
    "MIN_FIELD_POSITIONS",
    "Products",
    "distinct_positions",
    "field_inputs",
    "is_excluded",
    "load_meters",
    "survey_file_products",
    "survey_products",
]
