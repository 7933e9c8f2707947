"""Colours of the terminal map: a diverging palette for signed fields, a sequential one for spread.

Both are piecewise-linear between published anchor colours, evaluated with numpy so a whole map
is coloured in one call. Colours are ``uint8`` RGB triples.
"""

from __future__ import annotations

import numpy as np

#: ColorBrewer RdBu, 11 classes (Brewer, colorbrewer2.org), from strong negative (blue) to strong
#: positive (red); reversed from Brewer's order so that red means positive.
DIVERGING = (
    "#053061", "#2166ac", "#4393c3", "#92c5de", "#d1e5f0", "#f7f7f7",
    "#fddbc7", "#f4a582", "#d6604d", "#b2182b", "#67001f",
)
#: Anchors of matplotlib's viridis at 0, 0.25, 0.5, 0.75, 1 (van der Walt and Smith, 2015).
SEQUENTIAL = ("#440154", "#3b528b", "#21918c", "#5ec962", "#fde725")

#: Colours of the map's drawn features.
FEATURE_COLOURS = {
    "outside": "#101010",
    "inside": "#3a3a3a",
    "outline": "#e4e4e4",
    "asset": "#00d7d7",
    "zone": "#ffd75f",
    "unvisited": "#9e9e9e",
    "visited": "#000000",
    "free": "#ff8700",
    "current": "#00ff5f",
    "suggested": "#ff00ff",
    "cursor": "#00ff5f",
}


def hex_rgb(colour: str) -> tuple[int, int, int]:
    """``"#rrggbb"`` to an RGB triple."""
    c = colour.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


def _ramp(anchors: tuple[str, ...], t: np.ndarray) -> np.ndarray:
    """Interpolate anchor colours at positions ``t`` in [0, 1]; NaN gives 0."""
    table = np.array([hex_rgb(a) for a in anchors], dtype=float)
    t = np.clip(np.nan_to_num(np.asarray(t, dtype=float), nan=0.0), 0.0, 1.0) * (len(anchors) - 1)
    lo = np.minimum(np.floor(t).astype(int), len(anchors) - 2)
    frac = (t - lo)[..., None]
    return np.rint(table[lo] * (1 - frac) + table[lo + 1] * frac).astype(np.uint8)


def diverging(values: np.ndarray, scale: float) -> np.ndarray:
    """Colour signed values: blue negative, near-white zero, red positive, saturated at ``±scale``.

    Parameters
    ----------
    values : ndarray
        Field values, V/m.
    scale : float
        Magnitude shown at full colour, V/m (> 0).

    Returns
    -------
    ndarray, shape ``values.shape + (3,)``, uint8
    """
    return _ramp(DIVERGING, 0.5 + 0.5 * np.asarray(values, dtype=float) / scale)


def sequential(values: np.ndarray, vmax: float) -> np.ndarray:
    """Colour non-negative values from dark (0) to bright (``vmax`` and above), V/m."""
    return _ramp(SEQUENTIAL, np.asarray(values, dtype=float) / vmax)


