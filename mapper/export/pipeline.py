"""Survey -> corrected readings -> field grid -> findings, in one call.

:func:`survey_products` is the single pipeline the GeoPackage export, the PDF report and the
terminal app share, so that all of them show the same numbers for the same survey.
"""

from __future__ import annotations

import bisect
import sqlite3
from dataclasses import dataclass, field
from datetime import datetime

import numpy as np

from mapper.corrections import CorrectionResult, MeterProfile, correct
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS, export_crs
from mapper.features import Findings, analyse
from mapper.features.hotspots import EXCLUDING_FLAGS
from mapper.field import FieldGrid, build_field, field_from_bytes
from mapper.field.build import METHODS
from mapper.readings.model import Conditions, CorrectedReading, Reading
from mapper.site.model import Site
from mapper.survey.store import Survey
from mapper.units import canonical_unit

#: Fewest distinct reading positions a field model is built from. Three points fix only a plane;
#: five leave something to cross-validate (common practice, no source).
MIN_FIELD_POSITIONS = 5
#: Readings closer than this are one position when counting distinct positions, metres.
_SAME_POSITION_M = 1e-6


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
    findings : Findings or None
        Map features of ``grid`` at ``threshold_v_per_m``.
    no_field_reason : str or None
        Why there is no field model.
    notes : tuple of str
        Warnings and remarks for the user (site, corrections, field model).
    """

    name: str
    source: str
    site: Site
    crs: ExportCRS
    display_unit: str
    sign_convention: str
    threshold_v_per_m: float
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
        return tuple(r for r in self.readings if not is_excluded(r))

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


def is_excluded(reading: CorrectedReading) -> bool:
    """True when a corrected reading is flagged to stay out of the field model."""
    return bool(EXCLUDING_FLAGS & (set(reading.flags) | set(reading.reading.flags)))


def field_inputs(readings) -> tuple[np.ndarray, np.ndarray]:
    """Positions (n, 2) in metres and corrected values (n,) in V/m of the usable readings."""
    kept = [r for r in readings if not is_excluded(r)]
    xy = np.array([(r.reading.x, r.reading.y) for r in kept], dtype=float).reshape(-1, 2)
    values = np.array([r.value_v_per_m for r in kept], dtype=float)
    return xy, values


def distinct_positions(xy: np.ndarray) -> int:
    """Number of distinct positions among (n, 2) coordinates, metres."""
    if xy.shape[0] == 0:
        return 0
    return int(np.unique(np.round(xy / _SAME_POSITION_M), axis=0).shape[0])


def load_meters(survey: Survey) -> dict[str, MeterProfile]:
    """The survey's meter profiles as :class:`MeterProfile` objects."""
    return {
        meter_id: MeterProfile.from_dict(data, where=f"{survey.path}: meter {meter_id!r}")
        for meter_id, data in survey.meters().items()
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


def _stored_field(survey: Survey) -> tuple[FieldGrid, str] | None:
    stored = survey.latest_field()
    if stored is None:
        return None
    _, data, created = stored
    if created < survey.last_change_utc():
        return None
    return field_from_bytes(data), created


def survey_products(
    survey: Survey,
    threshold_v_per_m: float | None = None,
    method: str | None = None,
    cell_m: float | None = None,
    *,
    use_stored: bool = True,
    unit: str | None = None,
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
        readings and neither ``method`` nor ``cell_m`` is given.
    unit : str, optional
        Display unit; default the survey's.

    Returns
    -------
    Products
        With ``grid`` and ``findings`` set, or ``no_field_reason`` saying why not.
    """
    if method is not None and method not in METHODS:
        raise MapperError(f"unknown method {method!r}; accepted: {', '.join(METHODS)}")
    site = survey.site
    unit = canonical_unit(unit or survey.display_unit)
    threshold = float(threshold_v_per_m if threshold_v_per_m is not None else survey.threshold_v_per_m)
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

    grid = None
    source = ""
    reason = None
    xy, values = field_inputs(readings)
    positions = distinct_positions(xy)
    if positions < MIN_FIELD_POSITIONS:
        reason = (
            f"a field model needs readings at {MIN_FIELD_POSITIONS} or more distinct positions; "
            f"the survey has {positions}"
        )
    else:
        stored = _stored_field(survey) if use_stored and method is None and cell_m is None else None
        if stored is not None:
            grid, created = stored
            source = "stored"
            notes.append(f"field model: stored in the survey on {created} ({grid.method})")
        else:
            try:
                grid = build_field(xy, values, site.outline, method=method or "auto", cell_m=cell_m)
            except MapperError as exc:
                reason = f"no field model could be built: {exc.message}"
            else:
                source = "built"
                notes.append(f"field model: built now ({grid.reason})")
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
        field_source=source,
        findings=findings,
        no_field_reason=reason,
        notes=tuple(notes),
    )


__all__ = [
    "MIN_FIELD_POSITIONS",
    "Products",
    "distinct_positions",
    "field_inputs",
    "is_excluded",
    "load_meters",
    "survey_products",
]
