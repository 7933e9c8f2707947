"""Field units, quantity parsing, physical sanity and sign conventions.

Everything inside the engine is SI: electric field in V/m, lengths in metres, time in seconds.
Other units exist only at the edges (entry, display, files).
"""

from __future__ import annotations

import math
import re

from mapper.errors import MapperError

#: The international inch, exactly (international yard and pound agreement, 1959).
INCH_M = 0.0254
#: The international foot, exactly.
FOOT_M = 0.3048

#: Factor from each accepted field unit to V/m.
FIELD_UNITS: dict[str, float] = {
    "V/m": 1.0,
    "kV/m": 1e3,
    "MV/m": 1e6,
    "V/cm": 1e2,
    "kV/cm": 1e5,
    "V/in": 1.0 / INCH_M,
    "kV/in": 1e3 / INCH_M,
}
_UNIT_LOOKUP = {name.lower(): name for name in FIELD_UNITS}

#: Dielectric strength of air at sea level, V/m (about 3 MV/m; AMS Glossary of Meteorology).
AIR_BREAKDOWN_V_PER_M = 3.0e6

#: Sign conventions a survey can record its readings in.
SIGN_CONVENTIONS = ("physics", "atmospheric")

#: Length units accepted for site coordinates, factor to metres.
LENGTH_UNITS: dict[str, float] = {"m": 1.0, "ft": FOOT_M, "cm": 0.01, "mm": 0.001, "in": INCH_M}

_QUANTITY = re.compile(
    r"^\s*(?P<num>[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(?P<unit>[A-Za-z/]+)?\s*$"
)


def canonical_unit(unit: str) -> str:
    """Return the canonical spelling of a field unit, or raise a one-line error.

    Parameters
    ----------
    unit : str
        A unit name in any letter case, e.g. ``"kv/m"``.
    """
    text = unit.strip()
    if text in FIELD_UNITS:
        return text
    if text.startswith("m") and text.lower().startswith("mv/"):
        # letter case is the only difference between milli and mega: refuse rather than guess
        raise MapperError(f"unit {unit!r} is ambiguous; write MV/m for megavolts per metre (millivolt units are not "
                          "accepted)")
    name = _UNIT_LOOKUP.get(text.lower())
    if name is None:
        raise MapperError(f"unknown field unit {unit!r}; accepted: {', '.join(FIELD_UNITS)}")
    return name


def to_si(value: float, unit: str) -> float:
    """Convert a field value to V/m.

    Parameters
    ----------
    value : float
        Field strength in ``unit``.
    unit : str
        One of :data:`FIELD_UNITS`.

    Returns
    -------
    float
        Field strength in V/m.
    """
    return value * FIELD_UNITS[canonical_unit(unit)]


def from_si(value_v_per_m: float, unit: str) -> float:
    """Convert a field value in V/m to ``unit``.

    Parameters
    ----------
    value_v_per_m : float
        Field strength in V/m.
    unit : str
        Target unit, one of :data:`FIELD_UNITS`.
    """
    return value_v_per_m / FIELD_UNITS[canonical_unit(unit)]


def check_field(value_v_per_m: float) -> float:
    """Refuse a field value that cannot have been measured in air.

    Parameters
    ----------
    value_v_per_m : float
        Field strength in V/m.

    Returns
    -------
    float
        The same value, when it is finite and below the breakdown strength of air.
    """
    if not math.isfinite(value_v_per_m):
        raise MapperError(f"field value {value_v_per_m} is not a finite number")
    if abs(value_v_per_m) > AIR_BREAKDOWN_V_PER_M:
        raise MapperError(
            f"|{value_v_per_m:.4g} V/m| exceeds the dielectric strength of air "
            f"(about {AIR_BREAKDOWN_V_PER_M:.0e} V/m at sea level); not a possible reading"
        )
    return value_v_per_m


def decimal_mark(text: str) -> str:
    """Accept a decimal comma: ``"2,5"`` is 2.5 (one number, one mark); refuse what is ambiguous.

    A single comma with no point is a decimal mark, as much of the world writes it. A comma
    beside a point (``"1,234.5"``) or several commas could be thousands separators or two numbers:
    refused rather than guessed.
    """
    if "," not in text:
        return text
    if text.count(",") == 1 and "." not in text:
        return text.replace(",", ".")
    raise MapperError(
        f"{text.strip()!r} is ambiguous: write one number with a point or a comma as its decimal "
        "mark, without thousands separators"
    )


def parse_number(text: str) -> float:
    """Parse a plain finite number (a decimal comma accepted), refusing empty text, NaN and
    infinity."""
    stripped = decimal_mark(text.strip())
    if not stripped:
        raise MapperError("empty value; expected a number")
    try:
        number = float(stripped)
    except ValueError:
        raise MapperError(f"{stripped!r} is not a number") from None
    if not math.isfinite(number):
        raise MapperError(f"{stripped!r} is not a finite number")
    return number


def parse_field(text: str, default_unit: str | None = None) -> tuple[float, str, float]:
    """Parse a field quantity such as ``"125 V/in"``, ``"-2.3 kV/m"`` or ``"40"``.

    Parameters
    ----------
    text : str
        Number with an optional unit suffix.
    default_unit : str, optional
        Unit used when ``text`` has none.

    Returns
    -------
    value : float
        The number as written.
    unit : str
        The canonical unit it was written in.
    value_v_per_m : float
        The field strength in V/m, checked against the breakdown strength of air.
    """
    stripped = text.strip()
    if not stripped:
        raise MapperError("empty value; expected a field value such as '2.1 kV/m'")
    match = _QUANTITY.match(decimal_mark(stripped))
    if match is None:
        raise MapperError(f"{stripped!r} is not a field value; expected e.g. '-2.3 kV/m' or '125 V/in'")
    unit_text = match.group("unit")
    if unit_text is None:
        if default_unit is None:
            raise MapperError(f"{stripped!r} has no unit; accepted: {', '.join(FIELD_UNITS)}")
        unit_text = default_unit
    unit = canonical_unit(unit_text)
    value = float(match.group("num"))
    return value, unit, check_field(to_si(value, unit))


class BareNumber(float):
    """An action level typed without a unit: the number, to be read in the survey's display
    unit (the one rule for every command and the survey app). Resolve with :func:`resolve_threshold`."""


def parse_threshold_text(text: str) -> float:
    """An action level as typed: V/m when it has a unit, else a :class:`BareNumber`."""
    stripped = decimal_mark(text.strip())
    match = _QUANTITY.match(stripped)
    if match is not None and match.group("unit") is None:
        number = parse_number(match.group("num"))
        if number <= 0:
            raise MapperError(f"threshold {text!r} must be positive")
        return BareNumber(number)
    return parse_threshold(text)


def resolve_threshold(value: float, display_unit: str) -> float:
    """An action level in V/m: a :class:`BareNumber` is read in ``display_unit``."""
    if isinstance(value, BareNumber):
        return check_field(to_si(float(value), canonical_unit(display_unit)))
    return float(value)


def parse_threshold(text: str, default_unit: str = "V/m") -> float:
    """Parse an action level such as ``"1kV/m"``; returns a positive value in V/m."""
    _, _, value = parse_field(text, default_unit)
    if value <= 0:
        raise MapperError(f"threshold {text!r} must be positive")
    return value


def to_physics_sign(value: float, convention: str) -> float:
    """Convert a field value from a survey's sign convention to the physics convention.

    The physics convention takes the vertical field positive upward, so the fair-weather field
    (about 100 V/m, pointing down; Feynman Lectures II sec. 9-1) reads negative. The atmospheric
    potential-gradient convention reads it positive. The engine works in the physics convention.

    Parameters
    ----------
    value : float
        Field strength in V/m in ``convention``.
    convention : str
        ``"physics"`` or ``"atmospheric"``.
    """
    if convention not in SIGN_CONVENTIONS:
        raise MapperError(f"unknown sign convention {convention!r}; accepted: physics, atmospheric")
    return value if convention == "physics" else -value


def from_physics_sign(value: float, convention: str) -> float:
    """Inverse of :func:`to_physics_sign` (the conversion is its own inverse)."""
    return to_physics_sign(value, convention)


def plain_number(value: float, digits: int = 4) -> str:
    """``digits`` significant digits in fixed-point notation: never ``1.048e+04`` in what a
    person reads (``10480``), trailing zeros dropped."""
    if value == 0 or not math.isfinite(value):
        return f"{value:g}"
    magnitude = math.floor(math.log10(abs(value)))
    text = f"{round(value, digits - 1 - magnitude):.{max(digits - 1 - magnitude, 0)}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


_V_PER_M_VALUE = re.compile(r"(?<![\w.])(-?\d+(?:\.\d+)?(?:e[-+]?\d+)?) V/m\b")
_OTHERS = re.compile(r"\(others: ([^)]*?) V/m\)")


def field_text_in(text: str, unit: str, digits: int = 4) -> str:
    """A sentence the engine wrote in V/m, with its field values in a display unit.

    ``"RMSE 85.74 V/m (others: kriging 1411, rbf 1199 V/m)"`` in kV/m becomes
    ``"RMSE 0.08574 kV/m (others: kriging 1.411, rbf 1.199 kV/m)"``.
    """
    unit = canonical_unit(unit)
    if unit == "V/m":
        return text

    def others(m: re.Match) -> str:
        parts = []
        for part in m.group(1).split(", "):
            name, _, number = part.rpartition(" ")
            try:
                parts.append(f"{name} {plain_number(from_si(float(number), unit), digits)}")
            except ValueError:
                parts.append(part)
        return f"(others: {', '.join(parts)} {unit})"

    text = _OTHERS.sub(others, text)
    return _V_PER_M_VALUE.sub(lambda m: format_field(float(m.group(1)), unit, digits), text)


def format_field(value_v_per_m: float, unit: str, digits: int = 4) -> str:
    """Format a V/m value in a display unit, e.g. ``"4.921 kV/m"`` (fixed-point, no exponent)."""
    unit = canonical_unit(unit)
    return f"{plain_number(from_si(value_v_per_m, unit), digits)} {unit}"
