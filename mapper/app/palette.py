"""Colours of the terminal map's features and of its uncertainty layer.

Signed fields are coloured on the action-level scale shared with the report and the GeoPackage
styles (:mod:`mapper.features.colour_scale`); the uncertainty layer uses a sequential ramp,
piecewise-linear between published anchor colours. Colours are ``uint8`` RGB triples.
"""

from __future__ import annotations

import numpy as np

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


def sequential(values: np.ndarray, vmax: float) -> np.ndarray:
    """Colour non-negative values from dark (0) to bright (``vmax`` and above), V/m."""
    return _ramp(SEQUENTIAL, np.asarray(values, dtype=float) / vmax)


