"""Round numbers for grid cells, contour steps and colour scales."""

from __future__ import annotations

import math

#: Mantissas of "nice" numbers.
NICE_MANTISSAS = (1.0, 2.0, 2.5, 5.0, 10.0)


def nice_ceiling(value: float) -> float:
    """The smallest of 1, 2, 2.5 or 5 times a power of ten that is >= ``value``.

    Parameters
    ----------
    value : float
        Any positive finite number, in any unit (the result has the same unit). Anything else
        gives 1.0.
    """
    if not value > 0 or not math.isfinite(value):
        return 1.0
    power = 10.0 ** math.floor(math.log10(value))
    for mantissa in NICE_MANTISSAS:
        if value <= mantissa * power * (1 + 1e-9):
            return mantissa * power
    return 10.0 * power  # pragma: no cover - the mantissas end at 10
