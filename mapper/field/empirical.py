"""Empirical (experimental) variogram: binned semivariance with pair counts.

Pairs are enumerated in blocks and binned with ``np.bincount``, so memory stays at a few tens of
MB whatever the number of readings. Above ``max_pairs`` pairs (about 3 200 readings at the
default), a fixed-seed uniform random sample of ``max_pairs`` pairs is used instead of all of
them; every pair is equally likely, so each lag bin's estimate stays unbiased and the pair count
reported is the number actually used.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from mapper.errors import MapperError
from mapper.field import checks
from mapper.field.variogram import Variogram

#: Accepted estimators.
ESTIMATORS = ("matheron", "cressie")
#: Largest number of pairs used before switching to a random pair sample.
MAX_PAIRS = 5_000_000
_BLOCK_PAIRS = 2_000_000
_WHERE = "empirical_variogram"


@dataclass(frozen=True)
class EmpiricalVariogram:
    """Binned semivariance.

    Attributes
    ----------
    lags_m : ndarray, shape (b,)
        Mean pair distance in each non-empty bin, metres (anisotropic lag if a transform was used).
    gamma : ndarray, shape (b,)
        Semivariance in each bin, (V/m)^2.
    pairs : ndarray, shape (b,)
        Number of pairs in each bin.
    edges_m : ndarray, shape (n_lags + 1,)
        Bin edges, metres.
    estimator : str
        ``matheron`` (classical) or ``cressie`` (Cressie–Hawkins robust).
    direction_deg : float or None
        Azimuth of a directional variogram, degrees CCW from +x; None for omnidirectional.
    tolerance_deg : float
        Half-width of the direction window, degrees.
    sampled : bool
        True when a random sample of pairs was used.
    variance : float
        Sample variance of the values, (V/m)^2 (a reference level for the sill).
    """

    lags_m: np.ndarray
    gamma: np.ndarray
    pairs: np.ndarray
    edges_m: np.ndarray
    estimator: str
    direction_deg: float | None
    tolerance_deg: float
    sampled: bool
    variance: float


def default_max_lag(xy: np.ndarray) -> float:
    """Half the diagonal of the readings' bounding box, metres (common practice, no source)."""
    ext = xy.max(axis=0) - xy.min(axis=0)
    return float(np.hypot(*ext) / 2.0)


def _pair_blocks(n: int, max_pairs: int, seed: int):
    """Yield (i, j) index arrays covering all pairs i < j, or a random sample of them."""
    total = n * (n - 1) // 2
    if total <= max_pairs:
        rows = max(1, _BLOCK_PAIRS // max(n, 1))
        for s in range(0, n - 1, rows):
            e = min(n - 1, s + rows)
            i = np.repeat(np.arange(s, e), n)
            j = np.tile(np.arange(n), e - s)
            keep = j > i
            yield i[keep], j[keep]
        return
    rng = np.random.default_rng(seed)
    left = max_pairs
    while left > 0:
        size = min(_BLOCK_PAIRS, left)
        i = rng.integers(0, n, size)
        j = rng.integers(0, n, size)
        keep = i != j
        left -= size
        yield i[keep], j[keep]


def empirical_variogram(
    xy,
    values,
    *,
    n_lags: int = 15,
    max_lag_m: float | None = None,
    estimator: str = "matheron",
    direction_deg: float | None = None,
    tolerance_deg: float = 22.5,
    angle: float = 0.0,
    ratio: float = 1.0,
    max_pairs: int = MAX_PAIRS,
    seed: int = 0,
) -> EmpiricalVariogram:
    """Binned empirical semivariance of readings.

    Parameters
    ----------
    xy : array_like, shape (n, 2)
        Positions, metres.
    values : array_like, shape (n,)
        Readings, V/m.
    n_lags : int
        Number of equal-width lag bins from 0 to ``max_lag_m``.
    max_lag_m : float, optional
        Largest lag, metres; default half the bounding-box diagonal.
    estimator : str
        ``matheron``: sum (dz^2) / 2N. ``cressie``: Cressie–Hawkins robust estimator,
        (mean |dz|^(1/2))^4 / (2 (0.457 + 0.494/N + 0.045/N^2)) (Cressie 1993, *Statistics for
        Spatial Data*, eq. 2.4.12; constants from memory).
    direction_deg : float, optional
        Keep only pairs whose separation azimuth (degrees CCW from +x) lies within
        ``tolerance_deg`` of this direction (either sense).
    tolerance_deg : float
        Direction half-window, degrees.
    angle, ratio : float
        Geometric anisotropy (as in :class:`Variogram`); lags are measured in major-axis metres.
    max_pairs : int
        Use a random sample of this many pairs above it.
    seed : int
        Seed of the pair sample.

    Returns
    -------
    EmpiricalVariogram
    """
    return empirical_variograms(
        xy, [values], n_lags=n_lags, max_lag_m=max_lag_m, estimator=estimator, direction_deg=direction_deg,
        tolerance_deg=tolerance_deg, angle=angle, ratio=ratio, max_pairs=max_pairs, seed=seed,
    )[0]


def empirical_variograms(
    xy,
    columns,
    *,
    n_lags: int = 15,
    max_lag_m: float | None = None,
    estimator: str = "matheron",
    direction_deg: float | None = None,
    tolerance_deg: float = 22.5,
    angle: float = 0.0,
    ratio: float = 1.0,
    max_pairs: int = MAX_PAIRS,
    seed: int = 0,
) -> list[EmpiricalVariogram]:
    """Binned empirical semivariance of several value columns at the same positions, in one pass.

    The pairs, their lags and bins are found once and shared, so each variogram is exactly what
    :func:`empirical_variogram` gives for its column alone (same pairs, same sums in the same
    order). ``columns`` is a sequence of arrays of shape (n,), V/m; the other parameters are
    those of :func:`empirical_variogram`. Returns one :class:`EmpiricalVariogram` per column.
    """
    if len(columns) == 0:
        raise MapperError("no value column given", where=_WHERE)
    checked = [checks.readings(xy, values, _WHERE, minimum=2) for values in columns]
    xy, zs = checked[0][0], [c[1] for c in checked]
    est = checks.choose(estimator, ESTIMATORS, "estimator", _WHERE)
    if int(n_lags) < 1:
        raise MapperError(f"n_lags must be >= 1, got {n_lags!r}", where=_WHERE)
    n_lags = int(n_lags)
    xt = Variogram("linear", slope=1.0, angle=angle, ratio=ratio).transform(xy)
    max_lag = default_max_lag(xt) if max_lag_m is None else checks.positive(max_lag_m, "max_lag_m", _WHERE)
    if max_lag <= 0:
        raise MapperError("all readings are at one position; a variogram needs spread", where=_WHERE)
    width = max_lag / n_lags
    tol = None
    if direction_deg is not None:
        tol = checks.positive(tolerance_deg, "tolerance_deg", _WHERE)
    cnt = np.zeros(n_lags)
    sum_d = np.zeros(n_lags)
    sums = [np.zeros(n_lags) for _ in zs]
    n = xy.shape[0]
    sampled = n * (n - 1) // 2 > max_pairs
    for i, j in _pair_blocks(n, int(max_pairs), seed):
        dx = xt[j, 0] - xt[i, 0]
        dy = xt[j, 1] - xt[i, 1]
        d = np.hypot(dx, dy)
        keep = (d > 0) & (d < max_lag)
        if tol is not None:
            ox = xy[j, 0] - xy[i, 0]
            oy = xy[j, 1] - xy[i, 1]
            az = np.degrees(np.arctan2(oy, ox))
            off = np.abs((az - direction_deg + 90.0) % 180.0 - 90.0)
            keep &= off <= tol
        d = d[keep]
        ik, jk = i[keep], j[keep]
        b = np.minimum((d / width).astype(np.int64), n_lags - 1)
        cnt += np.bincount(b, minlength=n_lags)
        sum_d += np.bincount(b, d, n_lags)
        for z, acc in zip(zs, sums, strict=True):
            dz = np.abs(z[jk] - z[ik])
            acc += np.bincount(b, dz * dz if est == "matheron" else np.sqrt(dz), n_lags)
    ok = cnt > 0
    nn = cnt[ok]
    out = []
    for z, acc in zip(zs, sums, strict=True):
        if est == "matheron":
            gamma = acc[ok] / (2.0 * nn)
        else:
            gamma = (acc[ok] / nn) ** 4 / (2.0 * (0.457 + 0.494 / nn + 0.045 / nn**2))
        out.append(EmpiricalVariogram(
            lags_m=sum_d[ok] / nn,
            gamma=gamma,
            pairs=nn.astype(np.int64),
            edges_m=np.linspace(0.0, max_lag, n_lags + 1),
            estimator=est,
            direction_deg=None if direction_deg is None else float(direction_deg),
            tolerance_deg=float(tolerance_deg),
            sampled=bool(sampled),
            variance=float(np.var(z, ddof=1)) if n > 1 else 0.0,
        ))
    return out
