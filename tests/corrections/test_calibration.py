"""Parallel-plate calibration: E = V/d, least-squares gain and offset, and bad check files."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from mapper.corrections.calibration import (
    check_meter_file,
    fit_calibration,
    plate_field,
    read_calibration_csv,
)
from mapper.errors import MapperError


def test_plate_field_is_voltage_over_gap_in_metres() -> None:
    # Parallel plates, E = V / d (textbook): 1 kV across 25 mm = 0.025 m gives 40 kV/m.
    assert plate_field(1000.0, 0.025) == pytest.approx(40_000.0)
    # 1 V across 1 in = 0.0254 m is 1 V/in = 39.3701 V/m (international inch, 1959).
    assert plate_field(1.0, 0.0254) == pytest.approx(39.3701, abs=1e-4)
    with pytest.raises(MapperError, match="gap 0.0 m must be a positive"):
        plate_field(100.0, 0.0)


def _plate_data(gain: float, offset: float, noise: float, seed: int):
    rng = np.random.default_rng(seed)
    voltages = np.array([-2000.0, -1000.0, -500.0, 0.0, 500.0, 1000.0, 2000.0])
    fields = np.repeat(voltages / 0.0254, 3)
    readings = gain * fields + offset + rng.normal(0.0, noise, fields.size)
    return fields, readings


def test_fit_recovers_gain_and_offset_within_standard_errors() -> None:
    gain, offset, noise = 1.037, -85.0, 120.0  # made-up meter: 3.7 % high, -85 V/m offset
    fields, readings = _plate_data(gain, offset, noise, seed=7)
    fit = fit_calibration(fields, readings)
    # Within three standard errors (a 99.7 % interval for a correct error estimate).
    assert abs(fit.gain - gain) < 3 * fit.gain_se
    assert abs(fit.offset_v_per_m - offset) < 3 * fit.offset_se_v_per_m
    assert fit.gain_se < 0.01 and fit.offset_se_v_per_m < 100.0  # the check is informative
    # Reference library: scipy.stats.linregress gives slope, intercept, their standard errors
    # and r; our fit must agree with it.
    ref = stats.linregress(fields, readings)
    assert fit.gain == pytest.approx(ref.slope, rel=1e-12)
    assert fit.offset_v_per_m == pytest.approx(ref.intercept, rel=1e-9, abs=1e-9)
    assert fit.gain_se == pytest.approx(ref.stderr, rel=1e-9)
    assert fit.offset_se_v_per_m == pytest.approx(ref.intercept_stderr, rel=1e-9)
    assert fit.r_squared == pytest.approx(ref.rvalue**2, rel=1e-12)
    residuals = readings - (ref.slope * fields + ref.intercept)
    np.testing.assert_allclose(fit.residuals_v_per_m, residuals, atol=1e-6)
    # Applying the fit inverts the meter's response.
    np.testing.assert_allclose(fit.true_field(gain * fields + offset), fields, rtol=0.01, atol=300)


def test_standard_errors_match_scatter_of_repeated_fits() -> None:
    # Exact property: over many independent checks the spread of the fitted gain equals the
    # standard error the fit reports. 400 repeats estimate a standard deviation to about 3.5 %
    # (1/sqrt(2*400)); we allow 15 %.
    gains, offsets, gain_se, offset_se = [], [], [], []
    for seed in range(400):
        fields, readings = _plate_data(0.98, 40.0, 150.0, seed)
        fit = fit_calibration(fields, readings)
        gains.append(fit.gain)
        offsets.append(fit.offset_v_per_m)
        gain_se.append(fit.gain_se)
        offset_se.append(fit.offset_se_v_per_m)
    assert np.std(gains) == pytest.approx(np.mean(gain_se), rel=0.15)
    assert np.std(offsets) == pytest.approx(np.mean(offset_se), rel=0.15)
    assert np.mean(gains) == pytest.approx(0.98, abs=3 * np.mean(gain_se) / 20)


def test_fewer_than_three_distinct_fields_refused() -> None:
    with pytest.raises(MapperError, match="at least 3 distinct plate fields, got 2"):
        fit_calibration([0.0, 0.0, 1000.0, 1000.0], [1.0, 2.0, 990.0, 1001.0])
    with pytest.raises(MapperError, match="got 1"):
        fit_calibration([5000.0] * 4, [4990.0, 5010.0, 5003.0, 4998.0])


def test_falling_readings_refused() -> None:
    with pytest.raises(MapperError, match="check the polarity"):
        fit_calibration([0.0, 1000.0, 2000.0], [0.0, -1000.0, -2001.0])


def _write(tmp_path: Path, text: str, name: str = "plates.csv") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_read_check_file_with_gap_units_and_reading_units(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        "plate_voltage_v,gap,reading,unit\n"
        "0,25 mm,0.01,kV/m\n"
        "500,25 mm,20.3,kV/m\n"
        "1000,2.5 cm,40.5,kV/m\n"
        "\n"
        "1000,1 in,1010,V/in\n",
    )
    rows = read_calibration_csv(path)
    assert [r.line for r in rows] == [2, 3, 4, 6]
    assert rows[1].field_v_per_m == pytest.approx(20_000.0)  # 500 V / 0.025 m
    assert rows[3].gap_m == pytest.approx(0.0254)
    assert rows[3].field_v_per_m == pytest.approx(1000 / 0.0254)
    assert rows[3].read_v_per_m == pytest.approx(1010 / 0.0254)
    fit = check_meter_file(path)
    assert fit.n == 4 and fit.lines == (2, 3, 4, 6) and fit.source == str(path)
    assert fit.gain == pytest.approx(1.01, abs=0.01)
    assert "largest residual" in fit.summary()[-1]


def test_atmospheric_file_flips_offset_not_gain(tmp_path: Path) -> None:
    text = "plate_voltage_v,gap_m,reading\n0,0.02,50\n200,0.02,10100\n400,0.02,20150\n"
    physics = check_meter_file(_write(tmp_path, text), default_unit="V/m")
    atmos = check_meter_file(
        _write(tmp_path, text, "b.csv"), default_unit="V/m", sign="atmospheric"
    )
    assert atmos.gain == pytest.approx(physics.gain)
    assert atmos.offset_v_per_m == pytest.approx(-physics.offset_v_per_m)


@pytest.mark.parametrize(
    ("text", "where", "fragment"),
    [
        ("plate_voltage_v,gap_m,reading\n100,0,40 V/m\n", ":2: gap_m", "gap '0' is not positive"),
        ("plate_voltage_v,gap_m,reading\n100,0.01,forty\n", ":2: reading", "not a field value"),
        ("plate_voltage_v,gap,reading\n100,10,4 kV/m\n", ":2: gap", "has no unit"),
        ("plate_voltage_v,gap_m,reading\n100,0.01,4\n", ":2: reading", "has no unit"),
        ("plate_voltage_v,gap_m,reading\n100,0.01\n", ":2", "2 fields, header has 3"),
        ("volts,gap_m,reading\n100,0.01,4 kV/m\n", ":1", "no plate voltage column"),
        ("plate_voltage_v,gap_m,reading\n", "plates.csv", "no readings"),
        ("", "plates.csv", "empty"),
    ],
)
def test_bad_check_files_name_file_line_and_column(
    tmp_path: Path, text: str, where: str, fragment: str
) -> None:
    path = _write(tmp_path, text)
    with pytest.raises(MapperError, match=fragment) as info:
        read_calibration_csv(path)
    assert info.value.where is not None and info.value.where.endswith(where)


def test_check_file_with_one_field_only_is_refused(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        "plate_voltage_v,gap_m,reading\n1000,0.025,40.1 kV/m\n1000,0.025,39.8 kV/m\n"
        "1000,0.025,40.3 kV/m\n",
    )
    with pytest.raises(MapperError, match="got 1 .*add readings at other plate voltages") as info:
        check_meter_file(path)
    assert info.value.where == str(path)
