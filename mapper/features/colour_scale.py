"""One colour scale for every map, tied to the action level.

The survey app, the report and the styles stored with the GeoPackage all colour a field value by
the band it falls in, and the band edges are fixed fractions and multiples of the action level
``T``: ``±0.1 T, ±0.25 T, ±0.5 T, ±T, ±2 T, ±4 T, ±8 T``. So one colour means the same field on
every map and at every moment of a walk, a colour change marks the action level exactly, and the
neutral band ``|E| < 0.1 T`` keeps meter noise around zero from flipping colours. The edges are
our own choice (common practice, no source: a factor-of-two ladder around the action level).

Colours: ColorBrewer sequential Blues and Reds, 9 classes, the seven darkest of each (Brewer,
colorbrewer2.org, from memory), blue for negative fields and red for positive ones, a near-white
neutral between.
"""

from __future__ import annotations

import math

import numpy as np

from mapper.nice import nice_ceiling
from mapper.units import canonical_unit, from_si, plain_number, to_physics_sign

#: Band edges as multiples of the action level, positive side (our choice, see the module text).
EDGE_MULTIPLES: tuple[float, ...] = (0.1, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0)
#: Colour of the neutral band around zero.
NEUTRAL = "#f7f7f7"
#: Colours of the positive bands, from just above the neutral band outwards (ColorBrewer Reds 9).
POSITIVE = ("#fcbba1", "#fc9272", "#fb6a4a", "#ef3b2c", "#cb181d", "#a50f15", "#67000d")
#: Colours of the negative bands, from just below the neutral band outwards (ColorBrewer Blues 9).
NEGATIVE = ("#c6dbef", "#9ecae1", "#6baed6", "#4292c6", "#2171b5", "#08519c", "#08306b")
#: Index of the first band at or beyond the action level (band 1 starts at 0.1 T).
ACTION_BAND = EDGE_MULTIPLES.index(1.0) + 1


def _hex_rgb(colour: str) -> tuple[int, int, int]:
    c = colour.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


def _check(threshold_v_per_m: float) -> float:
    t = float(threshold_v_per_m)
    if not (math.isfinite(t) and t > 0):
        raise ValueError(f"action level must be a positive finite field, V/m; got {threshold_v_per_m!r}")
    return t


def edges_v_per_m(threshold_v_per_m: float) -> tuple[float, ...]:
    """All band edges, increasing, V/m.

    Parameters
    ----------
    threshold_v_per_m : float
        Action level ``T``, V/m (> 0).

    Returns
    -------
    tuple of float
        ``-8 T ... -0.1 T, 0.1 T ... 8 T`` (14 edges, 15 bands).
    """
    t = _check(threshold_v_per_m)
    pos = [m * t for m in EDGE_MULTIPLES]
    return tuple([-v for v in reversed(pos)] + pos)


def band_index(values_v_per_m: np.ndarray | float, threshold_v_per_m: float) -> np.ndarray:
    """Signed band number of each value: 0 neutral, 1..7 positive, -1..-7 negative.

    A value exactly on an edge belongs to the band outside it (|E| = T is at the action level).
    NaN gives 0.
    """
    t = _check(threshold_v_per_m)
    v = np.nan_to_num(np.asarray(values_v_per_m, dtype=float), nan=0.0)
    k = np.searchsorted(np.asarray(EDGE_MULTIPLES) * t, np.abs(v), side="right")
    return (np.sign(v) * k).astype(int)


def _table() -> np.ndarray:
    """RGB of bands -7..7, row ``i`` for band ``i - 7``."""
    colours = [*reversed(NEGATIVE), NEUTRAL, *POSITIVE]
    return np.array([_hex_rgb(c) for c in colours], dtype=np.uint8)


_TABLE = _table()


def colours_rgb(values_v_per_m: np.ndarray, threshold_v_per_m: float) -> np.ndarray:
    """Colour of each value, ``values.shape + (3,)`` uint8 RGB."""
    return _TABLE[band_index(values_v_per_m, threshold_v_per_m) + len(POSITIVE)]


def display_sign(sign_convention: str) -> float:
    """The factor (+1 or -1) that turns a physics-sign field into a survey's sign convention.

    Maps colour signed fields as the meter reads them, so red is positive as read. The two
    conventions differ by the sign alone, so the same factor converts either way.

    Parameters
    ----------
    sign_convention : str
        ``physics`` or ``atmospheric``.
    """
    return to_physics_sign(1.0, sign_convention)


def colours_as_read(values_v_per_m: np.ndarray, threshold_v_per_m: float, sign_convention: str) -> np.ndarray:
    """Colour of each physics-sign value (V/m) as the meter reads it, ``values.shape + (3,)`` uint8 RGB."""
    return colours_rgb(display_sign(sign_convention) * np.asarray(values_v_per_m, dtype=float), threshold_v_per_m)


def uncertainty_scale(std_v_per_m: np.ndarray) -> float:
    """Full-colour magnitude of an uncertainty (standard deviation) map, V/m.

    The signed layers keep the fixed action-level scale; the uncertainty layer spans its own
    values, up to a round number at or above the largest finite one (1.0 when there is none).
    """
    std = np.asarray(std_v_per_m, dtype=float)
    finite = std[np.isfinite(std)]
    return nice_ceiling(float(finite.max())) if finite.size else 1.0


def band_hex(index: int) -> str:
    """Colour of a signed band number as ``#rrggbb``."""
    if index == 0:
        return NEUTRAL
    colours = POSITIVE if index > 0 else NEGATIVE
    return colours[min(abs(int(index)), len(colours)) - 1]


def colour_hex(value_v_per_m: float, threshold_v_per_m: float) -> str:
    """Colour of one value as ``#rrggbb``."""
    return band_hex(int(band_index(value_v_per_m, threshold_v_per_m)))


def interval_hex(lower_v_per_m: float, upper_v_per_m: float, threshold_v_per_m: float) -> str:
    """Colour of a value interval (a contour band) that lies within one band of the scale.

    Open ends (``±inf``) are allowed; the colour is that of the scale band holding the interval's
    inner end (for an open interval) or its middle.
    """
    lo, hi = float(lower_v_per_m), float(upper_v_per_m)
    if math.isinf(lo) and math.isinf(hi):
        return NEUTRAL
    if math.isinf(lo):
        probe = hi - 1e-9 * max(abs(hi), 1.0)
    elif math.isinf(hi):
        probe = lo + 1e-9 * max(abs(lo), 1.0)
    else:
        probe = 0.5 * (lo + hi)
    return colour_hex(probe, threshold_v_per_m)


def scale_levels(threshold_v_per_m: float, lo_v_per_m: float, hi_v_per_m: float) -> tuple[float, ...]:
    """The band edges strictly inside a field range, V/m (for contour levels).

    Each contour band between consecutive returned edges, and each open end beyond them, then lies
    in exactly one band of the scale. When no edge lies inside the range, the range's middle.
    """
    inside = tuple(e for e in edges_v_per_m(threshold_v_per_m) if lo_v_per_m < e < hi_v_per_m)
    return inside or (0.5 * (lo_v_per_m + hi_v_per_m),)


def legend_rows(threshold_v_per_m: float, unit: str) -> list[tuple[str, str]]:
    """Legend of the scale from the most positive band down: ``(colour, label)`` pairs.

    Labels are in the display unit, e.g. ``("#ef3b2c", "125 to 250 V/in (action level)")``.
    """
    unit = canonical_unit(unit)
    t = _check(threshold_v_per_m)
    pos = [plain_number(from_si(m * t, unit), 4) for m in EDGE_MULTIPLES]
    n = len(pos)
    rows: list[tuple[str, str]] = []
    for k in range(n, 0, -1):
        label = f"{pos[k - 1]} {unit} and above" if k == n else f"{pos[k - 1]} to {pos[k]} {unit}"
        rows.append((band_hex(k), label + (" (action level)" if k == ACTION_BAND else "")))
    rows.append((NEUTRAL, f"-{pos[0]} to {pos[0]} {unit} (neutral)"))
    for k in range(1, n + 1):
        label = f"-{pos[k - 1]} {unit} and below" if k == n else f"-{pos[k]} to -{pos[k - 1]} {unit}"
        rows.append((band_hex(-k), label + (" (action level)" if k == ACTION_BAND else "")))
    return rows


__all__ = [
    "ACTION_BAND",
    "EDGE_MULTIPLES",
    "NEGATIVE",
    "NEUTRAL",
    "POSITIVE",
    "band_hex",
    "band_index",
    "colour_hex",
    "colours_as_read",
    "colours_rgb",
    "display_sign",
    "edges_v_per_m",
    "interval_hex",
    "legend_rows",
    "scale_levels",
    "uncertainty_scale",
]

