"""Robust local outlier check: each reading against its neighbours, net of the local trend.

For reading ``i`` and its ``k`` nearest other readings ``N(i)``:

1. The expected spatial variation is a local plane ``a + b dx + c dy`` fitted to ``N(i)``
   (coordinates relative to reading ``i``) by iteratively reweighted least squares with Tukey's
   bisquare weights (Huber, *Robust Statistics*, 1981; Tukey's biweight with c = 4.685), so a
   spike among the neighbours does not drag it. ``a`` is the robust local value at ``i``; on a
   flat field it plays the part of the neighbours' median.
2. The local spread is ``1.4826 * MAD`` of the neighbours' residuals about that plane, inflated by
   ``sqrt(k_eff / (k_eff - 3))`` for the three fitted parameters.
3. The deviation ``d_i = (v_i - a) / sqrt(1 + h_i)`` is standardised by the leverage ``h_i`` of
   predicting at ``i`` from the fit.
4. Curvature of a smooth field (at a peak every neighbour is lower) makes neighbouring readings
   deviate alike, so the scale is the largest of: the spread at ``i``, the median spread over
   ``N(i)``, ``1.4826 * median |d_j|`` over ``N(i)``, and a site-wide floor, the median of the
   local spreads over all readings (about the reading noise where the field is quiet).

The score ``|d_i| / scale`` is a modified z-score (Iglewicz and Hoaglin 1993, *How to Detect and
Handle Outliers*, ASQC) and is compared with their customary cut-off 3.5. Readings above it are
flagged for review; nothing is removed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Scale factor making the MAD a consistent estimate of a normal standard deviation (1/0.6745).
MAD_TO_SIGMA = 1.4826

#: Cut-off of the modified z-score (Iglewicz and Hoaglin 1993).
DEFAULT_THRESHOLD = 3.5

#: Neighbours per reading: about the readings within two grid steps on a square grid
#: (choice, no source; with 8 the three-parameter trend leaves too few degrees of freedom for
#: a steady spread estimate).
DEFAULT_NEIGHBOURS = 12

#: Tukey bisquare tuning constant (95 % efficiency at the normal distribution).
BISQUARE_C = 4.685

#: Reweighting passes of the local plane fit.
ROBUST_ITERATIONS = 3

#: Smallest scale, V/m, so a perfectly flat patch does not flag rounding differences
#: (choice, no source; about the last digit of a handheld meter reading in V/m).
DEFAULT_MIN_SCALE_V_PER_M = 1.0

#: Flag added to readings the check picks out.
OUTLIER_FLAG = "outlier?"


@dataclass(frozen=True)
class OutlierCheck:
    """Result of :func:`local_outliers`; arrays are in input order.

    Attributes
    ----------
    flagged : ndarray of bool
        Readings to review.
    score : ndarray
        Robust score ``|d| / scale`` (dimensionless).
    local_value_v_per_m : ndarray
        Robust local value at each reading from its neighbours (trend included), V/m.
    scale_v_per_m : ndarray
        Scale each deviation was divided by, V/m.
    neighbours : int
        Neighbours used per reading (0 when there were too few readings to check).
    threshold : float
        Cut-off used.
    """

    flagged: np.ndarray
    score: np.ndarray
    local_value_v_per_m: np.ndarray
    scale_v_per_m: np.ndarray
    neighbours: int
    threshold: float


def _neighbour_indices(xy: np.ndarray, k: int) -> np.ndarray:
    """Indices of each point's ``k`` nearest *other* points (self removed by index)."""
    from scipy.spatial import cKDTree  # about a quarter of a second to import: only when checking

    n = xy.shape[0]
    _, idx = cKDTree(xy).query(xy, k=k + 1)
    idx = np.atleast_2d(idx)
    own = idx == np.arange(n)[:, None]
    # Rows where duplicates pushed the point itself out of its own list: drop the farthest.
    missing = ~own.any(axis=1)
    own[missing, -1] = True
    return idx[~own].reshape(n, k)


def local_planes(
    x: np.ndarray, y: np.ndarray, v: np.ndarray, neigh: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Robust plane through each reading's neighbours, evaluated at the reading.

    Parameters
    ----------
    x, y : ndarray
        Positions, metres, shape ``(n,)``.
    v : ndarray
        Values, shape ``(n,)``.
    neigh : ndarray of int
        Neighbour indices, shape ``(n, k)``.

    Returns
    -------
    value : ndarray
        Plane value at each reading (same unit as ``v``).
    spread : ndarray
        ``1.4826 * MAD`` of the neighbours' residuals, corrected for three fitted parameters.
    leverage : ndarray
        Leverage of predicting at the reading, dimensionless.
    """
    n, k = neigh.shape
    dx = x[neigh] - x[:, None]
    dy = y[neigh] - y[:, None]
    length = np.sqrt(np.mean(dx**2 + dy**2, axis=1))[:, None]
    length[length == 0] = 1.0
    design = np.stack([np.ones_like(dx), dx / length, dy / length], axis=2)  # (n, k, 3)
    b = v[neigh]
    # A tiny ridge on the slopes keeps collinear neighbourhoods (a walked line) solvable;
    # the slope across the line is then taken as zero.
    ridge = np.diag([0.0, 1e-6, 1e-6]) * k
    weights = np.ones_like(b)
    floor = 1e-12 * max(float(np.max(np.abs(v))), 1.0)
    for _ in range(ROBUST_ITERATIONS + 1):
        weighted_t = design.transpose(0, 2, 1) * weights[:, None, :]
        normal = weighted_t @ design + ridge
        coef = np.linalg.solve(normal, (weighted_t @ b[:, :, None]))[..., 0]
        resid = b - (design @ coef[:, :, None])[..., 0]
        spread = np.maximum(MAD_TO_SIGMA * np.median(np.abs(resid), axis=1), floor)
        u = resid / (BISQUARE_C * spread[:, None])
        weights = np.where(np.abs(u) < 1.0, (1.0 - u**2) ** 2, 0.0)
    leverage = np.linalg.inv(normal)[:, 0, 0]
    k_eff = np.maximum(weights.sum(axis=1), 4.0)
    spread = spread * np.sqrt(k_eff / (k_eff - 3.0))
    return coef[:, 0], spread, leverage


def local_outliers(
    x: np.ndarray,
    y: np.ndarray,
    values_v_per_m: np.ndarray,
    k: int = DEFAULT_NEIGHBOURS,
    threshold: float = DEFAULT_THRESHOLD,
    min_scale_v_per_m: float = DEFAULT_MIN_SCALE_V_PER_M,
) -> OutlierCheck:
    """Flag readings that stand out from their neighbourhood.

    Parameters
    ----------
    x, y : ndarray
        Positions, metres.
    values_v_per_m : ndarray
        Field values, V/m.
    k : int
        Neighbours per reading; fewer are used when there are fewer readings.
    threshold : float
        Cut-off of the robust score (3.5, Iglewicz and Hoaglin 1993).
    min_scale_v_per_m : float
        Smallest scale, V/m.

    Returns
    -------
    OutlierCheck
        Flags and the numbers behind them. With fewer than 6 readings nothing is checked
        (a plane through fewer than 5 neighbours has no robust spread).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    v = np.asarray(values_v_per_m, dtype=float)
    if not (x.shape == y.shape == v.shape and v.ndim == 1):
        raise ValueError(f"x {x.shape}, y {y.shape} and values {v.shape} must be 1-D, same shape")
    n = v.size
    k = min(k, n - 1)
    if k < 5:
        return OutlierCheck(
            np.zeros(n, dtype=bool), np.zeros(n), v.copy(), np.full(n, np.nan), 0, threshold
        )
    neigh = _neighbour_indices(np.column_stack([x, y]), k)
    local, spread, leverage = local_planes(x, y, v, neigh)
    dev = (v - local) / np.sqrt(1.0 + leverage)
    expected = MAD_TO_SIGMA * np.median(np.abs(dev[neigh]), axis=1)
    # Site-wide floor: the median local spread, i.e. the reading noise over most of the site;
    # keeps a corner or edge reading with a few lucky neighbours from a too-small scale.
    floor = max(float(np.median(spread)), min_scale_v_per_m)
    scale = np.maximum.reduce(
        [spread, np.median(spread[neigh], axis=1), expected, np.full(n, floor)]
    )
    score = np.abs(dev) / scale
    return OutlierCheck(score > threshold, score, local, scale, k, threshold)
