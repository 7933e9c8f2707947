"""Zero offset and drift: base-station looping on a session with known drift."""

from __future__ import annotations

from datetime import date

import numpy as np
import pytest

from mapper.corrections.meter import MeterProfile
from mapper.corrections.pipeline import correct
from mapper.corrections.zero_drift import (
    DRIFT_EXTRAPOLATED,
    build_drift_model,
    piecewise_linear,
    station_moves,
)
from tests.corrections.helpers import reading

PROFILE = MeterProfile(id="meter1", due_date=date(2025, 1, 1))

RATE = 60.0  # made-up drift, V/m per hour
NOISE = 5.0  # made-up reading noise, V/m (standard deviation)
STATION = 500.0  # true field at the reference station, V/m


def true_field(x: float, y: float) -> float:
    """A smooth made-up field, V/m."""
    return 800.0 + 40.0 * x - 25.0 * y + 300.0 * np.exp(-((x - 10) ** 2 + (y - 6) ** 2) / 18.0)


def session(seed: int = 1, zero_offset: float = 0.0, with_zeros: bool = False):
    """Two hours of field readings every 30 s, reference visits every 20 min (09:00-11:00).

    The meter reads ``true + zero_offset + RATE * hours + noise``.
    """
    rng = np.random.default_rng(seed)

    def drift(minutes: float) -> float:
        return zero_offset + RATE * minutes / 60.0

    readings, truth = [], {}
    rid = 0
    for visit in range(7):  # 0, 20, ..., 120 min
        minutes = 20.0 * visit
        rid += 1
        value = STATION + drift(minutes) + rng.normal(0, NOISE)
        readings.append(reading(rid, value, minutes, x=-2.0, y=-2.0, kind="reference", point="REF"))
        if with_zeros:
            rid += 1
            readings.append(
                reading(
                    rid, drift(minutes + 0.5) + rng.normal(0, NOISE), minutes + 0.5, kind="zero"
                )
            )
    for step in range(1, 240):  # 09:00:30 .. 10:59:30
        minutes = step * 0.5
        x, y = float(step % 20), float(step // 20)
        rid += 1
        truth[rid] = true_field(x, y)
        readings.append(
            reading(rid, truth[rid] + drift(minutes) + rng.normal(0, NOISE), minutes, x, y)
        )
    return readings, truth


def test_known_linear_drift_corrected_within_noise() -> None:
    readings, truth = session()
    result = correct(readings, {"meter1": PROFILE}, check_outliers=False)
    assert len(result.readings) == 239 and result.applied == ("drift",)
    errors = np.array([r.value_v_per_m - truth[r.reading.id] for r in result.readings])
    raw_errors = np.array([r.reading.value_v_per_m - truth[r.reading.id] for r in result.readings])
    # Corrected, each error is the reading's own noise, plus the noise of the two visits it is
    # interpolated between (variance 2/3 NOISE^2 on average), plus the error of the station
    # level, the intercept of a line through 7 visits over 2 h (standard error
    # NOISE * sqrt(1/7 + 1/3.11) = 0.68 NOISE): about 1.5 NOISE RMS per reading. The last two
    # are shared by many readings, so one session's RMS varies; 2.5 NOISE bounds it (over 500
    # made-up sessions the largest was 2.7, the 99th percentile 2.2). The mean is the level
    # error, bounded by three of its standard errors.
    assert np.sqrt(np.mean(errors**2)) < 2.5 * NOISE
    assert abs(np.mean(errors)) < 3 * 0.68 * NOISE
    # Uncorrected: the drift reaches 120 V/m, far outside the noise (RMS about 14 NOISE).
    assert np.sqrt(np.mean(raw_errors**2)) > 10 * NOISE
    assert np.max(np.abs(raw_errors)) > 20 * NOISE
    report = result.drift_for("meter1")
    assert report is not None and report.n_reference == 7 and report.stations == ("REF",)
    # Rate: slope of a line through 7 knots 20 min apart, standard error NOISE / sqrt(3.11 h^2).
    assert report.rate_v_per_m_per_h == pytest.approx(RATE, abs=3 * NOISE / np.sqrt(3.11))
    # Largest correction: the drift at 11:00 (120 V/m) plus one visit's noise and the level
    # error, standard error about 1.2 NOISE; we allow four.
    assert report.largest_correction_v_per_m == pytest.approx(2 * RATE, abs=4 * 1.2 * NOISE)
    assert report.extrapolated == 0 and not any(r.flags for r in result.readings)
    assert "V/m per hour" in report.summary()
    assert result.warnings == ()


def test_zero_readings_remove_absolute_offset_with_reference_mixed() -> None:
    readings, truth = session(seed=3, zero_offset=40.0, with_zeros=True)
    result = correct(readings, {"meter1": MeterProfile(id="meter1")}, check_outliers=False)
    assert result.applied == ("zero", "drift")
    errors = np.array([r.value_v_per_m - truth[r.reading.id] for r in result.readings])
    # The 40 V/m offset is gone: what is left is the error of the offset estimated from 7 zero
    # readings, standard error NOISE / sqrt(7); we allow three of those.
    assert abs(np.mean(errors)) < 3 * NOISE / np.sqrt(7)
    assert np.sqrt(np.mean(errors**2)) < 2.5 * NOISE  # as in the test above
    # Reference only: drift is relative to the first visit, so the 40 V/m offset stays.
    plain = [r for r in readings if r.kind != "zero"]
    result = correct(plain, {"meter1": MeterProfile(id="meter1")}, check_outliers=False)
    errors = np.array([r.value_v_per_m - truth[r.reading.id] for r in result.readings])
    assert np.mean(errors) == pytest.approx(40.0, abs=2 * NOISE)


def test_calibration_applied_before_drift() -> None:
    gain, offset = 1.1, 25.0
    readings, truth = session(seed=5)
    scaled = [
        r.__class__(**{**r.__dict__, "value_v_per_m": gain * r.value_v_per_m + offset})
        for r in readings
    ]
    profile = MeterProfile(id="meter1", gain=gain, offset_v_per_m=offset)
    result = correct(scaled, {"meter1": profile}, check_outliers=False)
    assert result.applied == ("calibration", "drift")
    assert result.readings[0].corrections == ("calibration", "drift")
    errors = np.array([r.value_v_per_m - truth[r.reading.id] for r in result.readings])
    assert np.sqrt(np.mean(errors**2)) < 2.5 * NOISE  # as in the first test


def test_piecewise_linear_exact_and_held_outside() -> None:
    t = np.array([0.0, 10.0, 10.0, 30.0])
    c = np.array([0.0, 4.0, 6.0, -5.0])  # two knots at t=10 are averaged to 5
    values, outside = piecewise_linear(t, c, np.array([-5.0, 0.0, 5.0, 10.0, 20.0, 30.0, 99.0]))
    np.testing.assert_allclose(values, [0.0, 0.0, 2.5, 5.0, 0.0, -5.0, -5.0])
    assert outside.tolist() == [True, False, False, False, False, False, True]


def test_readings_outside_visit_span_get_nearest_correction_and_flag() -> None:
    readings = [
        reading(1, 510.0, 10.0, kind="reference", point="REF"),
        reading(2, 530.0, 70.0, kind="reference", point="REF"),
        reading(3, 100.0, 0.0, x=3.0),  # before the first visit
        reading(4, 100.0, 40.0, x=4.0),  # halfway: correction 10
        reading(5, 100.0, 100.0, x=5.0),  # after the last visit
    ]
    result = correct(readings, {"meter1": MeterProfile(id="meter1")}, check_outliers=False)
    values = [r.value_v_per_m for r in result.readings]
    assert values == pytest.approx([100.0, 90.0, 80.0])
    assert [r.flags for r in result.readings] == [(DRIFT_EXTRAPOLATED,), (), (DRIFT_EXTRAPOLATED,)]
    assert result.drift_for("meter1").extrapolated == 2
    assert any("2 field readings lie outside" in w for w in result.warnings)


def test_second_station_tied_to_first() -> None:
    # Station A at 500 V/m, station B at 900 V/m; drift 1 V/m per minute from 09:00.
    visits = [("A", 0.0, 500.0), ("B", 10.0, 900.0), ("A", 30.0, 500.0), ("B", 40.0, 900.0)]
    controls = [
        reading(i, level + minutes, minutes, x=10.0 * (name == "B"), kind="reference", point=name)
        for i, (name, minutes, level) in enumerate(visits, 1)
    ]
    model = build_drift_model("meter1", controls, [r.value_v_per_m for r in controls])
    levels = dict(model.station_levels_v_per_m)
    assert levels["A"] == pytest.approx(500.0) and levels["B"] == pytest.approx(900.0)
    assert [k.correction_v_per_m for k in model.knots] == pytest.approx([0.0, 10.0, 30.0, 40.0])


def test_moved_reference_station_warns_with_times_and_fix() -> None:
    refs = [
        reading(1, 500.0, 0.0, x=1.0, y=1.0, kind="reference", point="REF"),
        reading(2, 502.0, 20.0, x=1.2, y=1.1, kind="reference", point="REF"),
        reading(3, 650.0, 40.0, x=3.5, y=1.0, kind="reference", point="REF"),
    ]
    warnings = station_moves(refs, tolerance_m=0.5)
    assert len(warnings) == 1
    assert "reference station 'REF' moved 2.50 m" in warnings[0]
    assert "09:40:00" in warnings[0] and "same marked spot" in warnings[0]
    field = [reading(10 + i, 100.0, 5.0 + i, x=float(i)) for i in range(3)]
    result = correct(refs + field, {"meter1": MeterProfile(id="meter1")}, check_outliers=False)
    assert any("moved 2.50 m" in w for w in result.warnings)
    assert station_moves(refs[:2], tolerance_m=0.5) == []


def test_overlapping_meters_without_own_control_warn() -> None:
    profiles = {"A": MeterProfile(id="A"), "B": MeterProfile(id="B")}
    readings = [
        reading(1, 500.0, 0.0, kind="reference", point="REF", meter="A"),
        reading(2, 510.0, 60.0, kind="reference", point="REF", meter="A"),
    ]
    readings += [reading(10 + i, 100.0, 5.0 * i, x=float(i), meter="A") for i in range(12)]
    readings += [reading(30 + i, 100.0, 20.0 + i, x=float(i), y=5.0, meter="B") for i in range(6)]
    result = correct(readings, profiles, check_outliers=False)
    overlap = [w for w in result.warnings if "overlap in time" in w]
    assert len(overlap) == 1
    assert "meters 'B' and 'A'" in overlap[0] and "6 field readings of 'B'" in overlap[0]
    assert "check the meter column" in overlap[0]
    assert any("meter 'B' has no zero or reference readings" in w for w in result.warnings)
    # Meters that each carry their own control readings may overlap without a warning.
    readings += [
        reading(50, 3.0, 19.0, kind="zero", meter="B"),
        reading(51, 4.0, 26.0, kind="zero", meter="B"),
    ]
    result = correct(readings, profiles, check_outliers=False)
    assert not [w for w in result.warnings if "overlap in time" in w]
    assert result.applied == ("zero", "drift")
    assert {r.reading.meter_id: r.corrections for r in result.readings} == {
        "A": ("drift",),
        "B": ("zero",),
    }


def test_missing_profile_and_overdue_calibration_warn() -> None:
    readings = [reading(1, 100.0, 0.0, meter="old"), reading(2, 100.0, 1.0, meter="nameless")]
    profiles = {
        "old": MeterProfile(id="old", calibration_date=date(2023, 1, 1), due_date=date(2024, 1, 1))
    }
    result = correct(readings, profiles, check_outliers=False)
    text = "\n".join(result.warnings)
    assert "meter 'old' calibration was due on 2024-01-01" in text
    assert "meter 'nameless' has no profile" in text


def test_excluded_controls_are_ignored_and_order_is_kept() -> None:
    readings = [
        reading(3, 100.0, 30.0, x=2.0),
        reading(1, 500.0, 0.0, kind="reference", point="REF"),
        reading(2, 900.0, 10.0, kind="reference", point="REF", flags=("excluded",)),
        reading(4, 200.0, 5.0, x=1.0),
        reading(5, 5.0, 0.0, kind="calibration"),
    ]
    result = correct(readings, {}, check_outliers=False)
    assert [r.reading.id for r in result.readings] == [3, 4]
    assert result.drift_for("meter1").n_reference == 1
