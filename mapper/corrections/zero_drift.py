"""Zero offset and drift of a meter over a session, from zero and reference readings.

Two kinds of control reading feed one correction curve ``c(t)`` per meter, in V/m:

* ``zero`` -- the meter held against a grounded plate. The true field is 0, so the (calibrated)
  reading *is* the correction at that time.
* ``reference`` -- a repeat visit to a fixed reference station (identified by the reading's
  ``point`` label; unlabelled reference readings form one station per meter). The station's
  true field ``S`` is unknown, so each visit gives ``c = reading - S``.

Station levels ``S`` are tied as in base-station looping in geophysical surveys, by least
squares over all control readings of the meter with the offset taken as linear in time
(:func:`tie_station_levels`); zero readings fix the absolute offset. When a meter has no zero
readings the drift is relative to the session (its mean level over the visits) and the absolute
offset comes from the meter's calibration.

Between control readings ``c(t)`` is piecewise linear in time; outside their span it is held at
the nearest control reading's value and the reading is flagged ``drift-extrapolated``. The
corrected field is ``E = E_calibrated - c(t)``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime

import numpy as np

from mapper.readings.model import Reading
from mapper.units import format_field
from mapper.wording import plural

#: Flag added to field readings outside the time span of their meter's control readings.
DRIFT_EXTRAPOLATED = "drift-extrapolated"

#: Distance by which repeat visits to one reference station may differ before a warning, metres
#: (common practice, no source: about a pace; the field near sources changes over this distance).
STATION_TOLERANCE_M = 0.5

#: Name used for reference readings without a ``point`` label.
UNNAMED_STATION = "unlabelled"

#: Interval between control readings suggested in warnings (common practice, no source).
SUGGESTED_INTERVAL = "every 20-30 min"


@dataclass(frozen=True)
class DriftKnot:
    """One control reading turned into a correction value.

    Attributes
    ----------
    time : datetime
        When the control reading was taken, UTC.
    correction_v_per_m : float
        ``c`` at that time, V/m (subtracted from field readings).
    source : str
        ``"zero"`` or ``"reference <station>"``.
    reading_id : int
        Id of the control reading.
    """

    time: datetime
    correction_v_per_m: float
    source: str
    reading_id: int


@dataclass(frozen=True)
class DriftModel:
    """A meter's correction curve: piecewise linear through its knots.

    Attributes
    ----------
    meter_id : str
        The meter.
    knots : tuple of DriftKnot
        Sorted by time.
    station_levels_v_per_m : tuple of (str, float)
        Tied level ``S`` of each reference station, V/m (calibrated scale).
    """

    meter_id: str
    knots: tuple[DriftKnot, ...]
    station_levels_v_per_m: tuple[tuple[str, float], ...] = ()

    @property
    def has_zero(self) -> bool:
        """Whether any knot comes from a zero reading."""
        return any(k.source == "zero" for k in self.knots)

    @property
    def has_reference(self) -> bool:
        """Whether any knot comes from a reference reading."""
        return any(k.source != "zero" for k in self.knots)

    def span(self) -> tuple[datetime, datetime] | None:
        """First and last knot time, or ``None`` without knots."""
        if not self.knots:
            return None
        return self.knots[0].time, self.knots[-1].time

    def correction_at(self, times: Sequence[datetime]) -> tuple[np.ndarray, np.ndarray]:
        """Correction ``c(t)`` at ``times``, V/m, and whether each time is outside the span.

        Without knots the correction is 0 and nothing is flagged.
        """
        if not self.knots:
            return np.zeros(len(times)), np.zeros(len(times), dtype=bool)
        return piecewise_linear(
            _seconds([k.time for k in self.knots]),
            np.array([k.correction_v_per_m for k in self.knots]),
            _seconds(times),
        )


@dataclass(frozen=True)
class DriftReport:
    """What drift correction did to one meter's readings.

    Attributes
    ----------
    meter_id : str
        The meter.
    n_zero, n_reference : int
        Number of zero and reference readings used.
    stations : tuple of str
        Reference stations visited.
    start, end : datetime or None
        Span of the control readings.
    rate_v_per_m_per_h : float or None
        Slope of the least-squares line through the knots, V/m per hour (None with fewer than
        two distinct knot times).
    steepest_rate_v_per_m_per_h : float or None
        Largest-magnitude slope of one piecewise-linear segment, V/m per hour.
    largest_correction_v_per_m : float
        Largest-magnitude correction applied to a field reading (signed), V/m.
    field_readings : int
        Field readings of this meter.
    extrapolated : int
        Field readings outside the control span (flagged ``drift-extrapolated``).
    knots : tuple of DriftKnot
        The curve.
    """

    meter_id: str
    n_zero: int
    n_reference: int
    stations: tuple[str, ...]
    start: datetime | None
    end: datetime | None
    rate_v_per_m_per_h: float | None
    steepest_rate_v_per_m_per_h: float | None
    largest_correction_v_per_m: float
    field_readings: int
    extrapolated: int
    knots: tuple[DriftKnot, ...]

    def summary(self, unit: str = "V/m") -> str:
        """One line for the console and the report, field values in the display unit ``unit``."""
        if not self.knots:
            return f"meter {self.meter_id}: no zero or reference readings; drift not corrected"
        rate = (
            "rate n/a (one control time)"
            if self.rate_v_per_m_per_h is None
            else f"rate {_signed(self.rate_v_per_m_per_h, unit)} per hour"
        )
        return (
            f"meter {self.meter_id}: {plural(self.n_zero, 'zero reading')} and "
            f"{plural(self.n_reference, 'reference reading')}"
            f" (stations: {', '.join(self.stations) or 'none'}), {rate}, largest correction "
            f"{_signed(self.largest_correction_v_per_m, unit)}, {self.extrapolated} of "
            f"{plural(self.field_readings, 'field reading')} outside the control span"
        )


def _signed(value_v_per_m: float, unit: str) -> str:
    text = format_field(value_v_per_m, unit, 4)
    return text if text.startswith("-") else "+" + text


def _seconds(times: Sequence[datetime]) -> np.ndarray:
    return np.array([t.timestamp() for t in times], dtype=float)


def piecewise_linear(
    knot_t_s: np.ndarray, knot_values: np.ndarray, t_s: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Piecewise-linear interpolation held at the end values outside the knots.

    Knots at the same time are averaged.

    Parameters
    ----------
    knot_t_s : ndarray
        Knot times, seconds (any origin), need not be sorted.
    knot_values : ndarray
        Values at the knots.
    t_s : ndarray
        Times to evaluate at, seconds (same origin).

    Returns
    -------
    values : ndarray
        Interpolated values.
    outside : ndarray of bool
        True where ``t`` lies before the first or after the last knot.
    """
    knot_t_s = np.asarray(knot_t_s, dtype=float)
    knot_values = np.asarray(knot_values, dtype=float)
    t_s = np.asarray(t_s, dtype=float)
    if knot_t_s.size == 0:
        raise ValueError("piecewise_linear needs at least one knot")
    unique_t, inverse = np.unique(knot_t_s, return_inverse=True)
    sums = np.bincount(inverse, weights=knot_values)
    counts = np.bincount(inverse)
    values = sums / counts
    out = np.interp(t_s, unique_t, values)
    outside = (t_s < unique_t[0]) | (t_s > unique_t[-1])
    return out, outside


def _station_of(reading: Reading) -> str:
    return reading.point if reading.point else UNNAMED_STATION


def _hhmm(t: datetime) -> str:
    return t.strftime("%Y-%m-%d %H:%M:%S")


def station_moves(
    references: Sequence[Reading], tolerance_m: float = STATION_TOLERANCE_M
) -> list[str]:
    """Warnings for reference stations whose visits are further apart than ``tolerance_m``.

    Parameters
    ----------
    references : sequence of Reading
        Reference readings of one meter.
    tolerance_m : float
        Largest accepted distance of a visit from the station's first visit, metres.
    """
    warnings: list[str] = []
    by_station: dict[str, list[Reading]] = {}
    for r in sorted(references, key=lambda r: r.time):
        by_station.setdefault(_station_of(r), []).append(r)
    for station, visits in by_station.items():
        first = visits[0]
        far = [(math.hypot(v.x - first.x, v.y - first.y), v) for v in visits[1:]]
        far = [(d, v) for d, v in far if d > tolerance_m]
        if far:
            dist, worst = max(far, key=lambda item: item[0])
            warnings.append(
                f"meter {first.meter_id!r}: reference station {station!r} moved {dist:.2f} m between "
                f"{_hhmm(first.time)} (reading {first.id}) and {_hhmm(worst.time)} (reading "
                f"{worst.id}), more than {tolerance_m:g} m; drift from it is doubtful -- revisit "
                "the same marked spot, or give the new spot its own point label"
            )
    return warnings


def tie_station_levels(
    zeros: Sequence[tuple[datetime, float]],
    stations: Mapping[str, Sequence[tuple[datetime, float]]],
) -> dict[str, float]:
    """Estimate each reference station's level by least squares, as in base-station looping.

    Model: a zero reading is ``a + b (t - t0)``; a visit to station ``k`` is
    ``S_k + a + b (t - t0)``, where ``a + b (t - t0)`` is the meter's offset, taken as linear
    in time for the purpose of tying stations together (the correction itself stays piecewise
    linear through every control reading). Without zero readings ``a`` cannot be told apart
    from the levels and is left out, so the drift is relative to the session and the absolute
    offset is the calibration's. The slope ``b`` is dropped when the times cannot determine it.

    Parameters
    ----------
    zeros : sequence of (datetime, float)
        Time and calibrated value of each zero reading, V/m.
    stations : mapping of str to sequence of (datetime, float)
        Time and calibrated value of each visit, per station, V/m.

    Returns
    -------
    dict of str to float
        Level ``S_k`` of each station, V/m.
    """
    names = list(stations)
    if not names:
        return {}
    rows: list[tuple[float, int | None, float]] = [(t.timestamp(), None, v) for t, v in zeros]
    for k, name in enumerate(names):
        rows.extend((t.timestamp(), k, v) for t, v in stations[name])
    t = np.array([r[0] for r in rows])
    hours = (t - t.min()) / 3600.0
    values = np.array([r[2] for r in rows])
    columns = [np.array([1.0 if r[1] == k else 0.0 for r in rows]) for k in range(len(names))]
    if zeros:
        columns.append(np.ones(len(rows)))
    base = np.column_stack(columns)
    design = np.column_stack([base, hours])
    if np.linalg.matrix_rank(design) < design.shape[1]:
        design = base
    solution, *_ = np.linalg.lstsq(design, values, rcond=None)
    return {name: float(solution[k]) for k, name in enumerate(names)}


def build_drift_model(
    meter_id: str,
    controls: Sequence[Reading],
    calibrated_v_per_m: Sequence[float],
) -> DriftModel:
    """Tie a meter's zero and reference readings into one correction curve.

    Parameters
    ----------
    meter_id : str
        The meter.
    controls : sequence of Reading
        Its ``zero`` and ``reference`` readings (other kinds are refused).
    calibrated_v_per_m : sequence of float
        Each control reading's value after calibration, V/m, same order as ``controls``.

    Returns
    -------
    DriftModel
        Knots sorted by time and the tied station levels.
    """
    if len(controls) != len(calibrated_v_per_m):
        raise ValueError("controls and calibrated values differ in length")
    pairs = sorted(zip(controls, calibrated_v_per_m, strict=True), key=lambda p: p[0].time)
    knots: list[DriftKnot] = []
    for r, value in pairs:
        if r.kind not in ("zero", "reference"):
            raise ValueError(f"reading {r.id} of kind {r.kind!r} is not a control reading")
        if r.kind == "zero":
            knots.append(DriftKnot(r.time, float(value), "zero", r.id))
    stations: dict[str, list[tuple[Reading, float]]] = {}
    for r, value in pairs:
        if r.kind == "reference":
            stations.setdefault(_station_of(r), []).append((r, float(value)))
    levels = tie_station_levels(
        [(k.time, k.correction_v_per_m) for k in knots],
        {name: [(r.time, v) for r, v in visits] for name, visits in stations.items()},
    )
    for station, visits in stations.items():
        level = levels[station]
        knots.extend(DriftKnot(r.time, v - level, f"reference {station}", r.id) for r, v in visits)
    knots.sort(key=lambda k: k.time)
    return DriftModel(meter_id, tuple(knots), tuple(levels.items()))


def drift_report(
    model: DriftModel,
    field_corrections_v_per_m: np.ndarray,
    field_extrapolated: np.ndarray,
) -> DriftReport:
    """Summarise a drift model and what it did to the field readings.

    Parameters
    ----------
    model : DriftModel
        The meter's curve.
    field_corrections_v_per_m : ndarray
        Correction applied to each field reading, V/m.
    field_extrapolated : ndarray of bool
        Whether each field reading was outside the control span.
    """
    knots = model.knots
    rate = steepest = None
    if knots:
        t_h = _seconds([k.time for k in knots]) / 3600.0
        c = np.array([k.correction_v_per_m for k in knots])
        if np.unique(t_h).size >= 2:
            rate = float(np.polyfit(t_h - t_h[0], c, 1)[0])
            ut, inv = np.unique(t_h, return_inverse=True)
            uc = np.bincount(inv, weights=c) / np.bincount(inv)
            slopes = np.diff(uc) / np.diff(ut)
            steepest = float(slopes[np.argmax(np.abs(slopes))])
    corr = np.asarray(field_corrections_v_per_m, dtype=float)
    largest = float(corr[np.argmax(np.abs(corr))]) if corr.size else 0.0
    span = model.span()
    return DriftReport(
        meter_id=model.meter_id,
        n_zero=sum(1 for k in knots if k.source == "zero"),
        n_reference=sum(1 for k in knots if k.source != "zero"),
        stations=tuple(name for name, _ in model.station_levels_v_per_m),
        start=span[0] if span else None,
        end=span[1] if span else None,
        rate_v_per_m_per_h=rate,
        steepest_rate_v_per_m_per_h=steepest,
        largest_correction_v_per_m=largest,
        field_readings=int(corr.size),
        extrapolated=int(np.count_nonzero(field_extrapolated)),
        knots=knots,
    )


def meter_overlaps(
    field_by_meter: Mapping[str, Sequence[Reading]],
    models: Mapping[str, DriftModel],
) -> list[str]:
    """Warnings for meters used at the same time whose drift control does not cover that time.

    Two meters may be used at once (two people, or a spare), but each meter's drift is corrected
    only from its own zero and reference readings. When one meter's field readings fall inside
    another meter's session and outside its own control span (or it has no control readings),
    either the meter column is wrong or that meter was not looped; the warning names both.

    Parameters
    ----------
    field_by_meter : mapping of str to sequence of Reading
        Field readings per meter.
    models : mapping of str to DriftModel
        Drift model per meter (may have no knots).
    """
    spans: dict[str, tuple[datetime, datetime]] = {}
    for meter, readings in field_by_meter.items():
        if readings:
            times = [r.time for r in readings]
            model_span = models[meter].span() if meter in models else None
            lo, hi = min(times), max(times)
            if model_span:
                lo, hi = min(lo, model_span[0]), max(hi, model_span[1])
            spans[meter] = (lo, hi)
    warnings: list[str] = []
    meters = sorted(spans)
    for a in meters:
        for b in meters:
            if a == b:
                continue
            lo = max(spans[a][0], spans[b][0])
            hi = min(spans[a][1], spans[b][1])
            if lo > hi:
                continue
            control = models[a].span() if a in models else None
            uncovered = [
                r
                for r in field_by_meter[a]
                if lo <= r.time <= hi
                and (control is None or not control[0] <= r.time <= control[1])
            ]
            if uncovered:
                own = (
                    "it has no zero or reference readings"
                    if control is None
                    else f"its own control readings span only {_hhmm(control[0])} to "
                    f"{_hhmm(control[1])}"
                )
                warnings.append(
                    f"meters {a!r} and {b!r} overlap in time ({_hhmm(lo)} to {_hhmm(hi)}): "
                    f"{len(uncovered)} field readings of {a!r} fall in that time but {own}, and "
                    f"{b!r}'s zero/reference readings do not correct {a!r} -- check the meter "
                    f"column, or take zero or reference readings with {a!r} as well"
                )
    return warnings
