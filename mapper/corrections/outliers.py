"""Robust local outlier check: each reading against its neighbours, net of the local trend.

For reading ``i`` and its ``k`` nearest other readings ``N(i)`` (with every reading exactly as far
as the k-th, so that on a walked grid the neighbourhood is symmetric and does not depend on the
order a search visits equally distant readings in):

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
_SWEEP_ROWS = 256  # rows per block of the neighbour sweep
_SWEEP_MAX = 8000  # readings up to which the sweep is used; a k-d tree above (same neighbourhoods)

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
        Neighbours per reading, ``k`` (more where readings tie with the k-th; 0 when there were
        too few readings to check).
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
    """Each point's ``k`` nearest *other* points and every other point tied with the k-th.

    On a walked grid several neighbours are often exactly equally far; taking all of them keeps
    the neighbourhood symmetric and independent of how the search runs (a k-d tree breaks such
    ties in its own order). Up to :data:`_SWEEP_MAX` readings the search sweeps the points in
    order of x: a block of rows is compared with the points within ``R`` of it in x, and ``R`` is
    doubled for the block until every row's k-th distance is at most ``R`` (then no point outside
    the window can be as near; exact, and no k-d tree to import, which costs a quarter of a second).
    Above, a k-d tree proposes the candidates; either way the squared distances are computed the
    same way here, so both give the same neighbourhoods.

    Returns
    -------
    ndarray of int, shape (n, m), m >= k
        Neighbour indices, nearest first (ties by index); rows with fewer than ``m`` are padded
        with -1.
    """
    n = xy.shape[0]
    x, y = np.ascontiguousarray(xy[:, 0]), np.ascontiguousarray(xy[:, 1])
    if n > _SWEEP_MAX:
        return _tree_neighbours(xy, x, y, k)
    order = np.argsort(x, kind="stable")
    xs = x[order]
    span = np.ptp(xy, axis=0)
    area = float(max(span[0], 1e-9) * max(span[1], 1e-9))
    reach = 2.0 * np.sqrt(k * area / (np.pi * n))  # about twice the k-th distance of spread points
    parts = []
    for s in range(0, n, _SWEEP_ROWS):
        e = min(n, s + _SWEEP_ROWS)
        rows = order[s:e]
        r = reach
        while True:
            lo = int(np.searchsorted(xs, xs[s] - r, side="left"))
            hi = int(np.searchsorted(xs, xs[e - 1] + r, side="right"))
            cols = order[lo:hi]
            d2 = _squared(x, y, rows[:, None], cols[None, :])
            d2[rows[:, None] == cols[None, :]] = np.inf  # not its own neighbour
            kth = np.partition(d2, k - 1, axis=1)[:, k - 1]
            if (lo == 0 and hi == n) or kth.max() <= r * r:
                break
            r *= 2.0
        parts.append((rows, _within_kth(d2, np.broadcast_to(cols, d2.shape), k)))
    width = max(p.shape[1] for _, p in parts)
    out = np.full((n, width), -1, np.int64)
    for rows, p in parts:
        out[rows, :p.shape[1]] = p
    return out


def _tree_neighbours(xy: np.ndarray, x: np.ndarray, y: np.ndarray, k: int) -> np.ndarray:
    """:func:`_neighbour_indices` for large surveys: a k-d tree proposes the candidates."""
    n = xy.shape[0]
    from scipy.spatial import cKDTree  # large surveys only: about a quarter of a second to import

    tree = cKDTree(xy)
    extra = 8
    _, cand = tree.query(xy, k=min(n, k + 1 + extra))
    d2 = _squared(x, y, np.arange(n)[:, None], cand)
    d2[cand == np.arange(n)[:, None]] = np.inf
    out = _within_kth(d2, cand, k)
    # Rows whose ties reach past the candidates the tree gave: every point within the k-th distance.
    kth = np.partition(d2, k - 1, axis=1)[:, k - 1]
    short = np.flatnonzero(np.sort(d2, axis=1)[:, -2] <= kth) if cand.shape[1] < n else np.empty(0, int)
    if short.size:
        rows = [np.asarray(tree.query_ball_point(xy[i], np.sqrt(kth[i]) * (1 + 1e-9) + 1e-12), dtype=np.int64)
                for i in short]
        width = max(out.shape[1], max(len(r) for r in rows))
        out = np.pad(out, ((0, 0), (0, width - out.shape[1])), constant_values=-1)
        for i, r in zip(short, rows, strict=True):
            r = r[r != i]
            rd = _squared(x, y, np.full(r.shape, i), r)
            r, rd = r[rd <= kth[i]], rd[rd <= kth[i]]
            order = np.lexsort((r, rd))
            out[i] = -1
            out[i, :r.shape[0]] = r[order]
    return out


def _squared(x: np.ndarray, y: np.ndarray, i: np.ndarray, j: np.ndarray) -> np.ndarray:
    """Squared distances between points ``i`` and ``j`` (broadcast index arrays), metres^2."""
    d2 = x[i] - x[j]
    d2 *= d2
    dy = y[i] - y[j]
    dy *= dy
    d2 += dy
    return d2


def _within_kth(d2: np.ndarray, idx: np.ndarray, k: int) -> np.ndarray:
    """Per row, the indices ``idx`` whose ``d2`` is at most the row's k-th smallest, nearest first
    (ties by index), padded with -1 to the widest row."""
    kth = np.partition(d2, k - 1, axis=1)[:, k - 1:k]
    rows, cols = np.nonzero(d2 <= kth)
    count = np.bincount(rows, minlength=d2.shape[0])
    width = int(count.max())
    block = np.full((d2.shape[0], width), -1, np.int64)
    dist = np.full((d2.shape[0], width), np.inf)
    slot = np.arange(rows.shape[0]) - np.repeat(np.cumsum(count) - count, count)
    block[rows, slot] = idx[rows, cols]
    dist[rows, slot] = d2[rows, cols]
    order = np.lexsort((np.where(block < 0, np.iinfo(np.int64).max, block), dist), axis=1)
    return np.take_along_axis(block, order, axis=1)


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
        Neighbour indices, shape ``(n, m)``; -1 pads rows with fewer neighbours.

    Returns
    -------
    value : ndarray
        Plane value at each reading (same unit as ``v``).
    spread : ndarray
        ``1.4826 * MAD`` of the neighbours' residuals, corrected for three fitted parameters.
    leverage : ndarray
        Leverage of predicting at the reading, dimensionless.
    """
    n, m = neigh.shape
    real = neigh >= 0
    nb = np.where(real, neigh, np.arange(n)[:, None])  # pads point at the reading itself, weight 0
    count = real.sum(axis=1)
    dx = x[nb] - x[:, None]
    dy = y[nb] - y[:, None]
    length = np.sqrt((dx**2 + dy**2).sum(axis=1) / count)[:, None]
    length[length == 0] = 1.0
    design = np.stack([np.ones_like(dx), dx / length, dy / length], axis=2)  # (n, m, 3)
    b = v[nb]
    # A tiny ridge on the slopes keeps collinear neighbourhoods (a walked line) solvable;
    # the slope across the line is then taken as zero.
    ridge = np.diag([0.0, 1e-6, 1e-6])[None] * count[:, None, None]
    weights = real.astype(float)
    floor = 1e-12 * max(float(np.max(np.abs(v))), 1.0)
    for _ in range(ROBUST_ITERATIONS + 1):
        weighted_t = design.transpose(0, 2, 1) * weights[:, None, :]
        normal = weighted_t @ design + ridge
        coef = np.linalg.solve(normal, (weighted_t @ b[:, :, None]))[..., 0]
        resid = b - (design @ coef[:, :, None])[..., 0]
        spread = np.maximum(MAD_TO_SIGMA * _median(np.abs(resid), real), floor)
        u = resid / (BISQUARE_C * spread[:, None])
        weights = np.where(real & (np.abs(u) < 1.0), (1.0 - u**2) ** 2, 0.0)
    leverage = np.linalg.inv(normal)[:, 0, 0]
    k_eff = np.maximum(weights.sum(axis=1), 4.0)
    spread = spread * np.sqrt(k_eff / (k_eff - 3.0))
    return coef[:, 0], spread, leverage


def _median(values: np.ndarray, real: np.ndarray) -> np.ndarray:
    """Median of each row over its real entries (the plain median where every entry is real)."""
    if real.all():
        return np.median(values, axis=1)
    return np.nanmedian(np.where(real, values, np.nan), axis=1)


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
    real = neigh >= 0
    local, spread, leverage = local_planes(x, y, v, neigh)
    dev = (v - local) / np.sqrt(1.0 + leverage)
    expected = MAD_TO_SIGMA * _median(np.abs(dev[neigh]), real)
    # Site-wide floor: the median local spread, i.e. the reading noise over most of the site;
    # keeps a corner or edge reading with a few lucky neighbours from a too-small scale.
    floor = max(float(np.median(spread)), min_scale_v_per_m)
    scale = np.maximum.reduce(
        [spread, _median(spread[neigh], real), expected, np.full(n, floor)]
    )
    score = np.abs(dev) / scale
    return OutlierCheck(score > threshold, score, local, scale, k, threshold)
