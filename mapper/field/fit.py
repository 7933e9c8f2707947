"""Weighted least-squares fit of a variogram model to an empirical variogram."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from mapper.errors import MapperError
from mapper.field import checks
from mapper.field.empirical import EmpiricalVariogram, empirical_variogram
from mapper.field.variogram import MODELS, Variogram

#: Weighting schemes: ``cressie`` = N_h / gamma_model(h)^2 (Cressie 1985), ``pairs`` = N_h.
WEIGHTS = ("cressie", "pairs")
#: Bins with fewer pairs are not fitted (the "at least 30 pairs per lag" rule of thumb of
#: Journel & Huijbregts 1978, from memory).
MIN_PAIRS = 30
_WHERE = "fit_variogram"


@dataclass(frozen=True)
class VariogramFit:
    """A fitted variogram and how well it fits.

    Attributes
    ----------
    variogram : Variogram
        The fitted model.
    empirical : EmpiricalVariogram
        The binned semivariance it was fitted to.
    weights : str
        Weighting scheme used.
    n_bins : int
        Bins used in the fit (those with at least ``MIN_PAIRS`` pairs).
    rmse : float
        Root-mean-square difference model - empirical over the bins used, (V/m)^2.
    r2 : float
        Pair-weighted coefficient of determination of the fit (1 = perfect).
    converged : bool
        True when the optimiser reported convergence.
    message : str
        Optimiser message.
    """

    variogram: Variogram
    empirical: EmpiricalVariogram
    weights: str
    n_bins: int
    rmse: float
    r2: float
    converged: bool
    message: str

    def to_dict(self) -> dict:
        """JSON-ready summary (without the binned values)."""
        return {
            "variogram": self.variogram.to_dict(),
            "weights": self.weights,
            "n_bins": self.n_bins,
            "rmse": self.rmse,
            "r2": self.r2,
            "converged": self.converged,
            "estimator": self.empirical.estimator,
            "pairs_sampled": self.empirical.sampled,
        }


def _model(model: str, theta: np.ndarray, nu: float, angle: float, ratio: float) -> Variogram:
    if model == "linear":
        return Variogram("linear", nugget=theta[0], slope=theta[1], angle=angle, ratio=ratio)
    return Variogram(model, nugget=theta[0], sill=theta[1], range=theta[2], nu=nu, angle=angle, ratio=ratio)


def fit_model(
    emp: EmpiricalVariogram,
    model: str = "exponential",
    *,
    nu: float = 1.5,
    weights: str = "cressie",
    nugget: float | None = None,
    angle: float = 0.0,
    ratio: float = 1.0,
    min_pairs: int = MIN_PAIRS,
) -> VariogramFit:
    """Fit a model to an empirical variogram by weighted least squares.

    Parameters
    ----------
    emp : EmpiricalVariogram
        Binned semivariance (lags in major-axis metres if anisotropic).
    model : str
        One of :data:`mapper.field.variogram.MODELS`.
    nu : float
        Matérn smoothness (held fixed).
    weights : str
        ``cressie`` (N_h / gamma(h)^2, Cressie 1985) or ``pairs`` (N_h).
    nugget : float, optional
        Hold the nugget at this value, (V/m)^2; None fits it.
    angle, ratio : float
        Anisotropy copied into the result (the lags must already be anisotropic).
    min_pairs : int
        Bins with fewer pairs are ignored.

    Returns
    -------
    VariogramFit
    """
    model = checks.choose(model, MODELS, "variogram model", _WHERE)
    wts = checks.choose(weights, WEIGHTS, "weights", _WHERE)
    use = emp.pairs >= min_pairs
    n_par = (2 if model == "linear" else 3) - (nugget is not None)
    if int(use.sum()) < n_par + 1:
        raise MapperError(
            f"too few pairs to fit the {model} variogram: {int(use.sum())} lag bin(s) have at least "
            f"{min_pairs} pairs, {n_par + 1} are needed (add readings or widen the lag bins)",
            where=_WHERE,
        )
    h, g, npair = emp.lags_m[use], emp.gamma[use], emp.pairs[use].astype(float)
    gmax = float(max(g.max(), emp.variance, 1e-300))
    hmax = float(emp.edges_m[-1])
    wn = npair / npair.sum()

    def full(x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        if nugget is None:
            return x
        return np.concatenate([[nugget / gmax], x])

    def curve(x: np.ndarray) -> np.ndarray:
        t = full(x)
        if model == "linear":
            return gmax * (t[0] + t[1] * h / hmax)
        vg = _model(model, np.array([t[0] * gmax, t[1] * gmax, t[2] * hmax]), nu, 0.0, 1.0)
        return vg(h)

    def resid(x: np.ndarray) -> np.ndarray:
        m = curve(x)
        if wts == "cressie":
            return np.sqrt(npair) * (g / np.maximum(m, 1e-12 * gmax) - 1.0) / np.sqrt(npair.sum())
        return np.sqrt(wn) * (g - m) / gmax

    # Starting values from the shape of the empirical curve (several, best kept).
    tail = g[int(len(g) * 2 / 3):] if len(g) >= 3 else g
    plateau = float(np.clip(np.mean(tail), 1e-9 * gmax, None))
    nug0 = float(np.clip(g[0] - (g[1] - g[0]) * h[0] / max(h[1] - h[0], 1e-12), 0.0, 0.8 * plateau))
    if model == "linear":
        slope0 = max((g[-1] - nug0) / max(h[-1], 1e-12), 1e-9 * gmax / hmax)
        starts = [np.array([nug0 / gmax, slope0 * hmax / gmax])]
        lo, hi = np.array([0.0, 1e-12]), np.array([2.0, 1e3])
    else:
        reach = np.flatnonzero(g >= 0.95 * plateau)
        r0 = float(h[reach[0]]) if reach.size else hmax
        starts = [
            np.array([nug0, max(plateau - nug0, 0.1 * plateau), r]) / np.array([gmax, gmax, hmax])
            for r in (r0, 0.5 * r0, 2.0 * r0)
        ]
        starts.append(np.array([0.0, plateau / gmax, 0.5]))
        lo = np.array([0.0, 1e-9, 1e-3 * min(h[0], hmax) / hmax])
        hi = np.array([2.0, 4.0, 5.0])
    if nugget is not None:
        starts = [s[1:] for s in starts]
        lo, hi = lo[1:], hi[1:]
    best = None
    for x0 in starts:
        x0 = np.clip(x0, lo + 1e-9, hi - 1e-9)
        res = least_squares(resid, x0, bounds=(lo, hi), method="trf", x_scale="jac", max_nfev=400)
        if best is None or res.cost < best.cost:
            best = res
    t = full(best.x)
    if model == "linear":
        theta = np.array([t[0] * gmax, t[1] * gmax / hmax])
    else:
        theta = np.array([t[0] * gmax, t[1] * gmax, t[2] * hmax])
    vg = _model(model, theta, nu, angle, ratio)
    m = curve(best.x)
    gbar = np.sum(wn * g)
    ss_tot = float(np.sum(wn * (g - gbar) ** 2))
    r2 = 1.0 - float(np.sum(wn * (g - m) ** 2)) / ss_tot if ss_tot > 0 else 1.0
    return VariogramFit(
        variogram=vg,
        empirical=emp,
        weights=wts,
        n_bins=int(use.sum()),
        rmse=float(np.sqrt(np.mean((g - m) ** 2))),
        r2=r2,
        converged=bool(best.status > 0),
        message=str(best.message),
    )


def default_n_lags(n: int) -> int:
    """Lag bins for ``n`` readings: 15, fewer for small surveys so that bins keep about 40 pairs.

    Common practice, no source.
    """
    return int(np.clip(n * (n - 1) / 2 / 2 / 40, 4, 15))


def fit_variogram(
    xy,
    values,
    model: str = "exponential",
    *,
    nu: float = 1.5,
    weights: str = "cressie",
    estimator: str = "matheron",
    nugget: float | None = None,
    angle: float = 0.0,
    ratio: float = 1.0,
    n_lags: int | None = None,
    max_lag_m: float | None = None,
    max_pairs: int | None = None,
) -> VariogramFit:
    """Empirical variogram of the readings and a weighted least-squares model fit to it.

    Parameters
    ----------
    xy : array_like, shape (n, 2)
        Positions, metres.
    values : array_like, shape (n,)
        Readings, V/m.
    model, nu, weights, nugget
        As in :func:`fit_model`.
    estimator : str
        ``matheron`` or ``cressie`` (robust).
    angle, ratio : float
        Geometric anisotropy assumed known (degrees CCW from +x, major/minor).
    n_lags, max_lag_m, max_pairs
        As in :func:`mapper.field.empirical.empirical_variogram`; ``n_lags`` defaults to 15, fewer
        for small surveys so that bins keep about 40 pairs (common practice, no source).

    Returns
    -------
    VariogramFit
    """
    kw = {} if max_pairs is None else {"max_pairs": max_pairs}
    if n_lags is None:
        n_lags = default_n_lags(np.asarray(values).shape[0])
    emp = empirical_variogram(
        xy, values, n_lags=n_lags, max_lag_m=max_lag_m, estimator=estimator, angle=angle,
        ratio=ratio, **kw,
    )
    return fit_model(emp, model, nu=nu, weights=weights, nugget=nugget, angle=angle, ratio=ratio)
