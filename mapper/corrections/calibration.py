"""Parallel-plate calibration check: known fields E = V / d, least-squares gain and offset.

The meter reads a field set up between two parallel plates, one at a known voltage ``V`` and the
other grounded, a gap ``d`` apart, so the field between them is ``E = V / d`` (textbook parallel
plates, edge effects neglected). Regressing the meter's readings on the known fields by ordinary
least squares gives ``E_read = gain * E_true + offset`` with standard errors (the usual
straight-line regression formulas), R^2 and residuals.

Caution: plate voltages used for checks can be hazardous. Use a current-limited supply, keep
hands clear of the live plate, and follow the site's electrical safety rules.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from mapper.errors import MapperError
from mapper.textfile import open_utf8
from mapper.units import (
    LENGTH_UNITS,
    check_field,
    parse_field,
    parse_number,
    to_physics_sign,
)

#: Smallest number of distinct plate fields accepted for a fit (two points always fit exactly).
MIN_DISTINCT_FIELDS = 3

_VOLTAGE_UNITS = {"v": 1.0, "kv": 1e3}
_VOLTAGE_COLUMNS = ("plate_voltage_v", "plate_voltage", "voltage_v")
_GAP_COLUMNS = ("gap_m", "gap")
_READING_COLUMNS = ("reading", "value")


@dataclass(frozen=True)
class PlateReading:
    """One meter reading in a known parallel-plate field.

    Attributes
    ----------
    line : int
        Line of the calibration file it came from (1 = header).
    plate_voltage_v : float
        Plate voltage, volts.
    gap_m : float
        Gap between the plates, metres.
    reading_value : float
        The meter's reading as written in the file.
    reading_unit : str
        Unit of ``reading_value``.
    read_v_per_m : float
        The reading in V/m, physics sign convention.
    field_v_per_m : float
        The known field ``V / d`` in V/m, physics sign convention.
    """

    line: int
    plate_voltage_v: float
    gap_m: float
    reading_value: float
    reading_unit: str
    read_v_per_m: float
    field_v_per_m: float


@dataclass(frozen=True)
class CalibrationFit:
    """Least-squares fit of ``E_read = gain * E_true + offset``.

    Attributes
    ----------
    gain : float
        Dimensionless gain.
    offset_v_per_m : float
        Offset, V/m.
    gain_se : float
        Standard error of ``gain``.
    offset_se_v_per_m : float
        Standard error of ``offset_v_per_m``, V/m.
    r_squared : float
        Coefficient of determination.
    residual_se_v_per_m : float
        Residual standard error ``sqrt(SSR / (n - 2))``, V/m.
    field_v_per_m : tuple of float
        Known fields, V/m.
    read_v_per_m : tuple of float
        Meter readings, V/m.
    residuals_v_per_m : tuple of float
        ``read - (gain * field + offset)``, V/m.
    lines : tuple of int
        File line of each reading (empty when the fit was made from arrays).
    source : str
        File the readings came from, if any.
    """

    gain: float
    offset_v_per_m: float
    gain_se: float
    offset_se_v_per_m: float
    r_squared: float
    residual_se_v_per_m: float
    field_v_per_m: tuple[float, ...]
    read_v_per_m: tuple[float, ...]
    residuals_v_per_m: tuple[float, ...]
    lines: tuple[int, ...] = ()
    source: str = ""

    @property
    def n(self) -> int:
        """Number of readings in the fit."""
        return len(self.field_v_per_m)

    def true_field(self, read_v_per_m: float | np.ndarray) -> float | np.ndarray:
        """Apply the fit: ``(E_read - offset) / gain``, V/m."""
        return (read_v_per_m - self.offset_v_per_m) / self.gain

    def summary(self) -> list[str]:
        """Human-readable lines: gain, offset, R^2 and the largest residual."""
        worst = int(np.argmax(np.abs(self.residuals_v_per_m)))
        where = f" (line {self.lines[worst]})" if self.lines else ""
        return [
            f"gain {self.gain:.5g} +/- {self.gain_se:.2g}",
            f"offset {self.offset_v_per_m:.5g} +/- {self.offset_se_v_per_m:.2g} V/m",
            f"R^2 {self.r_squared:.6f} from {self.n} readings",
            f"largest residual {self.residuals_v_per_m[worst]:.4g} V/m{where}",
        ]


def plate_field(plate_voltage_v: float, gap_m: float) -> float:
    """Field between parallel plates, ``E = V / d`` (edge effects neglected).

    Parameters
    ----------
    plate_voltage_v : float
        Voltage of the live plate against the grounded one, volts.
    gap_m : float
        Distance between the plates, metres; must be positive.

    Returns
    -------
    float
        Field strength, V/m.
    """
    if not (math.isfinite(gap_m) and gap_m > 0):
        raise MapperError(f"plate gap {gap_m} m must be a positive distance, e.g. 0.0254 m")
    if not math.isfinite(plate_voltage_v):
        raise MapperError(f"plate voltage {plate_voltage_v} V is not a finite number")
    return plate_voltage_v / gap_m


def fit_calibration(
    field_v_per_m: Sequence[float] | np.ndarray,
    read_v_per_m: Sequence[float] | np.ndarray,
    lines: Sequence[int] = (),
    source: str = "",
) -> CalibrationFit:
    """Fit ``E_read = gain * E_true + offset`` by ordinary least squares.

    Parameters
    ----------
    field_v_per_m : array_like
        Known (plate) fields, V/m.
    read_v_per_m : array_like
        Meter readings in those fields, V/m.
    lines : sequence of int, optional
        File line of each reading, for messages.
    source : str, optional
        File name, for messages.

    Returns
    -------
    CalibrationFit
        Gain, offset, their standard errors, R^2 and residuals.

    Notes
    -----
    With ``n`` readings, ``Sxx = sum (x - mean x)^2`` and residual variance
    ``s^2 = SSR / (n - 2)``: ``se(gain) = s / sqrt(Sxx)`` and
    ``se(offset) = s * sqrt(sum x^2 / (n Sxx))``. Fewer than three distinct fields are refused:
    two fields always fit exactly and leave no estimate of the error.
    """
    where = source or None
    x = np.asarray(field_v_per_m, dtype=float)
    y = np.asarray(read_v_per_m, dtype=float)
    if x.shape != y.shape or x.ndim != 1:
        raise ValueError(f"fields {x.shape} and readings {y.shape} must be 1-D and the same shape")
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))):
        raise MapperError("calibration fields and readings must be finite numbers", where=where)
    scale = max(float(np.max(np.abs(x), initial=0.0)), 1.0)
    distinct = np.unique(np.round(x / scale, 9)).size
    if distinct < MIN_DISTINCT_FIELDS:
        raise MapperError(
            f"calibration needs at least {MIN_DISTINCT_FIELDS} distinct plate fields, got "
            f"{distinct} ({x.size} readings); add readings at other plate voltages or gaps, e.g. "
            "0, half and full scale",
            where=where,
        )
    n = x.size
    x_mean, y_mean = float(x.mean()), float(y.mean())
    sxx = float(np.sum((x - x_mean) ** 2))
    sxy = float(np.sum((x - x_mean) * (y - y_mean)))
    gain = sxy / sxx
    offset = y_mean - gain * x_mean
    residuals = y - (gain * x + offset)
    ssr = float(np.sum(residuals**2))
    sst = float(np.sum((y - y_mean) ** 2))
    if not gain > 0:
        raise MapperError(
            f"calibration fit gives gain {gain:.3g} <= 0: the readings do not rise with the plate "
            "field; check the polarity and the column order",
            where=where,
        )
    s2 = ssr / (n - 2) if n > 2 else 0.0
    gain_se = math.sqrt(s2 / sxx)
    offset_se = math.sqrt(s2 * float(np.sum(x**2)) / (n * sxx))
    r_squared = 1.0 - ssr / sst if sst > 0 else 1.0
    return CalibrationFit(
        gain=gain,
        offset_v_per_m=offset,
        gain_se=gain_se,
        offset_se_v_per_m=offset_se,
        r_squared=r_squared,
        residual_se_v_per_m=math.sqrt(s2),
        field_v_per_m=tuple(float(v) for v in x),
        read_v_per_m=tuple(float(v) for v in y),
        residuals_v_per_m=tuple(float(v) for v in residuals),
        lines=tuple(int(v) for v in lines),
        source=source,
    )


def _parse_voltage(text: str) -> float:
    stripped = text.strip()
    lower = stripped.lower()
    for suffix in ("kv", "v"):
        if lower.endswith(suffix):
            return parse_number(stripped[: -len(suffix)]) * _VOLTAGE_UNITS[suffix]
    return parse_number(stripped)


def _parse_gap(text: str, unit: str | None) -> float:
    stripped = text.strip()
    lower = stripped.lower()
    if unit is None:
        for name in sorted(LENGTH_UNITS, key=len, reverse=True):
            if lower.endswith(name):
                unit = name
                stripped = stripped[: -len(name)]
                break
    if unit is None:
        raise MapperError(
            f"gap {text.strip()!r} has no unit; write e.g. '25 mm' or use a gap_m column "
            f"(accepted units: {', '.join(LENGTH_UNITS)})"
        )
    unit_key = unit.strip().lower()
    if unit_key not in LENGTH_UNITS:
        raise MapperError(f"unknown length unit {unit!r}; accepted: {', '.join(LENGTH_UNITS)}")
    return parse_number(stripped) * LENGTH_UNITS[unit_key]


def _pick(header: list[str], names: Sequence[str], what: str, where: str) -> int:
    for name in names:
        if name in header:
            return header.index(name)
    raise MapperError(
        f"no {what} column; expected one of {', '.join(names)} (header: {', '.join(header)})",
        where=where,
    )


def read_calibration_csv(
    path: str | Path, default_unit: str | None = None, sign: str = "physics"
) -> list[PlateReading]:
    """Read a parallel-plate check file.

    Parameters
    ----------
    path : str or Path
        CSV with a header. Columns: plate voltage (``plate_voltage_v`` in volts, or
        ``plate_voltage`` with an optional ``V``/``kV`` suffix); gap (``gap_m`` in metres, or
        ``gap`` with a length suffix such as ``25 mm`` or a ``gap_unit`` column); the meter
        reading (``reading`` or ``value``, with a unit suffix, a ``unit`` column or
        ``default_unit``).
    default_unit : str, optional
        Unit of readings that carry none (usually the meter's display unit).
    sign : str
        Sign convention of the readings and plate voltages (``physics`` or ``atmospheric``);
        both are converted to the physics convention, which flips the offset, not the gain.

    Returns
    -------
    list of PlateReading
        One per data row, in file order.
    """
    path = Path(path)
    name = str(path)
    handle = open_utf8(path, "calibration file")
    with handle:
        reader = csv.reader(handle)
        try:
            header = [h.strip().lower() for h in next(reader)]
        except StopIteration:
            raise MapperError(
                "calibration file is empty; expected a header line", where=name
            ) from None
        v_col = _pick(header, _VOLTAGE_COLUMNS, "plate voltage", f"{name}:1")
        g_col = _pick(header, _GAP_COLUMNS, "gap", f"{name}:1")
        r_col = _pick(header, _READING_COLUMNS, "reading", f"{name}:1")
        gap_in_m = header[g_col] == "gap_m"
        gap_unit_col = header.index("gap_unit") if "gap_unit" in header else None
        unit_col = header.index("unit") if "unit" in header else None
        rows: list[PlateReading] = []
        for row in reader:
            line = reader.line_num
            if not any(cell.strip() for cell in row):
                continue
            if len(row) != len(header):
                raise MapperError(
                    f"{len(row)} fields, header has {len(header)}", where=f"{name}:{line}"
                )
            column = header[v_col]
            try:
                voltage = _parse_voltage(row[v_col])
                column = header[g_col]
                gap_unit = (
                    "m" if gap_in_m else (row[gap_unit_col] if gap_unit_col is not None else None)
                )
                gap = _parse_gap(row[g_col], gap_unit)
                if gap <= 0:
                    raise MapperError(
                        f"gap {row[g_col].strip()!r} is not positive; the plates must be apart, "
                        "e.g. 0.0254 m"
                    )
                column = header[r_col]
                unit = (
                    row[unit_col].strip()
                    if unit_col is not None and row[unit_col].strip()
                    else default_unit
                )
                value, unit_name, read = parse_field(row[r_col], unit)
                field = check_field(plate_field(voltage, gap))
            except MapperError as exc:
                raise MapperError(exc.message, where=f"{name}:{line}: {column}") from None
            rows.append(
                PlateReading(
                    line=line,
                    plate_voltage_v=voltage,
                    gap_m=gap,
                    reading_value=value,
                    reading_unit=unit_name,
                    read_v_per_m=to_physics_sign(read, sign),
                    field_v_per_m=to_physics_sign(field, sign),
                )
            )
    if not rows:
        raise MapperError("calibration file has a header but no readings", where=name)
    return rows


def check_meter_file(
    path: str | Path, default_unit: str | None = None, sign: str = "physics"
) -> CalibrationFit:
    """Read a parallel-plate check file and fit gain and offset (see :func:`fit_calibration`).

    Parameters
    ----------
    path : str or Path
        The check file (see :func:`read_calibration_csv`).
    default_unit : str, optional
        Unit of readings without one.
    sign : str
        Sign convention of the file.
    """
    rows = read_calibration_csv(path, default_unit=default_unit, sign=sign)
    return fit_calibration(
        [r.field_v_per_m for r in rows],
        [r.read_v_per_m for r in rows],
        lines=[r.line for r in rows],
        source=str(path),
    )
