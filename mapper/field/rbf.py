"""Radial basis function interpolation, as ``scipy.interpolate.RBFInterpolator`` defines it.

The global interpolant is scipy's. Our own are the smoothing choice and the leave-one-out
residuals (the closed form of Dubrule 1983 for the global interpolant, and a batched local solve
with the k nearest *other* readings, exactly what scipy does with ``neighbors``, for large
surveys), and the moving-neighbourhood prediction (:mod:`mapper.field.rbf_local`: one solve per
distinct set of k nearest readings, the same values as scipy's per-neighbourhood solves).
"""

from __future__ import annotations

import numpy as np
from scipy.interpolate import RBFInterpolator
from scipy.spatial import cKDTree
from scipy.spatial.distance import cdist

from mapper.errors import MapperError
from mapper.field import checks
from mapper.field.estimator import check_fitted
from mapper.field.linalg import bordered_system, solve_batched, squared_within
from mapper.field.neighbourhood import nearest_others
from mapper.field.rbf_local import kernel_of_squared, monomials, predict_sets
from mapper.field.repeats import MERGE_TOL_M, merge_repeats
from mapper.field.threads import blas_threads

#: Scale-free kernels (no shape parameter) and the polynomial degree scipy requires for each.
KERNELS = {"thin_plate_spline": 1, "cubic": 1, "quintic": 2, "linear": 0}
#: Above this many positions the smoothing is chosen on the local (neighbours) interpolant.
GLOBAL_MAX = 2000
_RELATIVE_SMOOTHING = (0.0, 1e-6, 1e-5, 1e-4, 1e-3, 1e-2, 1e-1, 1.0)
_LOCAL_BATCH = 2048


def kernel(name: str, r: np.ndarray) -> np.ndarray:
    """Kernel values as defined by scipy's RBFInterpolator, for distance ``r`` (metres)."""
    if name == "thin_plate_spline":
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(r > 0, r * r * np.log(np.where(r > 0, r, 1.0)), 0.0)
    if name == "cubic":
        return r**3
    if name == "quintic":
        return -(r**5)
    return -r


class RBF:
    """RBF interpolation with smoothing chosen by leave-one-out cross-validation.

    Parameters
    ----------
    kernel : str
        One of :data:`KERNELS`; thin-plate spline by default.
    smoothing : float, optional
        Smoothing added to the kernel diagonal (scipy's meaning); None chooses it by LOO RMSE
        among multiples of the mean kernel magnitude.
    neighbors : int, optional
        Local interpolant from this many nearest readings (scipy ``neighbors``); None global.
    merge_tol_m : float
        Readings closer than this are merged as repeats, metres.
    """

    def __init__(
        self,
        kernel: str = "thin_plate_spline",
        smoothing: float | None = None,
        neighbors: int | None = None,
        *,
        merge_tol_m: float = MERGE_TOL_M,
    ) -> None:
        # Settings stored as given (checked in fit): the estimator contract of mapper.field.estimator.
        self.kernel = kernel
        self.smoothing = smoothing
        self.neighbors = neighbors
        self.merge_tol_m = merge_tol_m

    def _check_settings(self) -> None:
        """Refuse settings that cannot work, naming them; sets ``kernel_`` and ``degree_``."""
        self.kernel_ = checks.choose(self.kernel, KERNELS, "RBF kernel", "RBF")
        self.degree_ = KERNELS[self.kernel_]
        if self.smoothing is not None:
            checks.positive(self.smoothing, "smoothing", "RBF", allow_zero=True)
        n = self.neighbors
        if n is not None and (isinstance(n, bool) or not isinstance(n, int | np.integer) or n < 3):
            raise MapperError(f"neighbors must be an integer >= 3 or None, got {n!r}", where="RBF")

    def fit(self, xy, values) -> RBF:
        """Merge repeats, choose the smoothing and build the interpolant; returns self."""
        where = "RBF.fit"
        self._check_settings()
        xy, z = checks.readings(xy, values, where)
        merged = merge_repeats(xy, z, self.merge_tol_m)
        q = (self.degree_ + 1) * (self.degree_ + 2) // 2
        if merged.xy.shape[0] < max(q + 1, 3):
            raise MapperError(
                f"RBF ({self.kernel_}) needs at least {max(q + 1, 3)} distinct positions, got "
                f"{merged.xy.shape[0]}",
                where=where,
            )
        if self.degree_ >= 1:
            checks.not_collinear(merged.xy, where, f"RBF ({self.kernel_}, with a plane term)")
        self.merged_ = merged
        self.xy_, self.values_ = merged.xy, merged.values
        n = self.xy_.shape[0]
        self.local_ = self.neighbors is not None and self.neighbors < n
        self._loo_cache_ = None
        self.shift_ = (self.xy_.max(axis=0) + self.xy_.min(axis=0)) / 2.0
        self.scale_ = float(max(np.max(self.xy_.max(axis=0) - self.xy_.min(axis=0)) / 2.0, 1e-12))
        if self.local_:
            self.tree_ = cKDTree(self.xy_)
        if self.smoothing is None:
            self.smoothing_, self.smoothing_table_ = self._choose_smoothing()
        else:
            self.smoothing_, self.smoothing_table_ = self.smoothing, ()
        # The global interpolant is scipy's; the local one is evaluated by predict_sets.
        self.interp_ = None if self.local_ else RBFInterpolator(
            self.xy_, self.values_, smoothing=self.smoothing_, kernel=self.kernel_, degree=self.degree_,
        )
        return self

    # ------------------------------------------------------------------ smoothing and LOO
    def _scale_kernel(self) -> float:
        sub = self.xy_[:: max(1, self.xy_.shape[0] // 500)]
        return float(np.mean(np.abs(kernel(self.kernel_, cdist(sub, sub))))) or 1.0

    def _candidates(self) -> list[float]:
        base = self._scale_kernel()
        return [c * base for c in _RELATIVE_SMOOTHING]

    def _eig(self):
        """Eigen-decomposition of the kernel on the polynomial null space (cached)."""
        if getattr(self, "_eig_cache", None) is None:
            p = monomials((self.xy_ - self.shift_) / self.scale_, self.degree_)
            qmat, _ = np.linalg.qr(p, mode="complete")
            q2 = qmat[:, p.shape[1]:]
            k = kernel(self.kernel_, cdist(self.xy_, self.xy_))
            lam, v = np.linalg.eigh(q2.T @ k @ q2)
            self._eig_cache = (lam, q2 @ v)
        return self._eig_cache

    def _loo_global(self, smoothing: float) -> np.ndarray:
        # Top-left block of the inverse of [[K + sI, P], [P', 0]] is W diag(1/(lam+s)) W'
        # (W spans the polynomial null space); LOO residual z_i - zhat_-i = a_i / B_ii.
        lam, w = self._eig()
        inv = 1.0 / (lam + smoothing)
        diag = np.einsum("ij,j,ij->i", w, inv, w)
        a = w @ (inv * (w.T @ self.values_))
        return -a / diag

    def _loo_local(self, smoothings, at: np.ndarray) -> np.ndarray:
        """LOO errors (len(smoothings), len(at)) of the local interpolant, one row per smoothing.

        The neighbourhood systems are built once and solved for every smoothing in turn.
        """
        k, xy, z = self.neighbors, self.xy_, self.values_
        smoothings = np.atleast_1d(np.asarray(smoothings, dtype=float))
        err = np.empty((smoothings.shape[0], at.shape[0]))
        with blas_threads(1):
            for s in range(0, at.shape[0], _LOCAL_BATCH):
                ids = at[s:s + _LOCAL_BATCH]
                t = xy[ids]
                _, idx = nearest_others(self.tree_, ids, k)
                pts = xy[idx]
                # scipy shifts and scales each neighbourhood for the polynomial; the solution is the same.
                centre = pts.mean(axis=1, keepdims=True)
                scale = np.maximum(np.max(np.abs(pts - centre), axis=(1, 2), keepdims=True), 1e-12)
                pm = monomials((pts - centre) / scale, self.degree_)
                q = pm.shape[-1]
                kd = kernel_of_squared(self.kernel_, squared_within(pts))
                a = bordered_system(kd, pm)
                rhs = np.zeros((ids.shape[0], k + q))
                rhs[:, :k] = z[idx]
                kt = kernel(self.kernel_, np.sqrt(np.sum((pts - t[:, None, :]) ** 2, axis=-1)))
                pt = monomials((t[:, None, :] - centre) / scale, self.degree_)[:, 0, :]
                diag = np.arange(k)
                for j, smoothing in enumerate(smoothings):
                    a[:, diag, diag] = kd[:, diag, diag] + smoothing
                    coef = solve_batched(a, rhs)
                    est = np.einsum("bk,bk->b", coef[:, :k], kt) + np.einsum("bq,bq->b", coef[:, k:], pt)
                    err[j, s:s + _LOCAL_BATCH] = est - z[ids]
        return err

    def _choose_smoothing(self) -> tuple[float, tuple[tuple[float, float], ...]]:
        n = self.xy_.shape[0]
        at = _cv_subset(n)
        cands = self._candidates()
        if self.local_:
            errs = self._loo_local(cands, at)
            # Kept for loo() at the same positions (build_field asks for exactly these).
            self._loo_cache_ = (at, dict(zip(cands, errs, strict=True)))
        elif n <= GLOBAL_MAX:
            errs = [self._loo_global(s) for s in cands]
        else:  # large global interpolant: judge the smoothing on a local proxy
            self.tree_ = getattr(self, "tree_", None) or cKDTree(self.xy_)
            self.neighbors, keep = 64, self.neighbors
            errs = self._loo_local(cands, at)
            self.neighbors = keep
        table = [(float(s), float(np.sqrt(np.mean(e**2)))) for s, e in zip(cands, errs, strict=True)]
        best = min(table, key=lambda r: r[1])
        return best[0], tuple(table)

    def loo(self, at: np.ndarray | None = None) -> tuple[np.ndarray, None]:
        """Leave-one-out errors (estimate minus reading, V/m) at merged positions ``at``.

        Closed form for the global interpolant (n <= GLOBAL_MAX); local batched solves with the
        k nearest other readings when ``neighbors`` is set. ``at`` defaults to all positions.
        The second value is None (RBF gives no standard deviation).
        """
        check_fitted(self, "loo")
        n = self.xy_.shape[0]
        ids = np.arange(n) if at is None else np.asarray(at)
        if self.local_:
            cached = getattr(self, "_loo_cache_", None)
            if cached is not None and np.array_equal(cached[0], ids) and self.smoothing_ in cached[1]:
                return cached[1][self.smoothing_].copy(), None
            return self._loo_local([self.smoothing_], ids)[0], None
        if n > GLOBAL_MAX:
            return self._loo_direct(self.smoothing_)[ids], None
        return self._loo_global(self.smoothing_)[ids], None

    def _loo_direct(self, smoothing: float) -> np.ndarray:
        # Same closed form from an explicit inverse of the bordered system (one n^3 step).
        p = monomials((self.xy_ - self.shift_) / self.scale_, self.degree_)
        n = p.shape[0]
        a = bordered_system(kernel(self.kernel_, cdist(self.xy_, self.xy_)) + smoothing * np.eye(n), p)
        top = np.linalg.inv(a)[:n, :n]
        return -(top @ self.values_) / np.diag(top)

    def predict(self, targets) -> tuple[np.ndarray, np.ndarray]:
        """Interpolated values (V/m) at ``targets`` (m, 2) metres; std is NaN (none given)."""
        check_fitted(self, "predict")
        t = checks.points(targets, "RBF.predict", "targets")
        if self.local_:
            with blas_threads(1):
                est = predict_sets(self.xy_, self.values_, t, self.neighbors, self.kernel_, self.degree_,
                                   self.smoothing_, self.tree_)
        else:
            est = self.interp_(t)
        return est, np.full(t.shape[0], np.nan)


def _cv_subset(n: int, cap: int = 2000, seed: int = 0) -> np.ndarray:
    """All positions, or a fixed-seed random subset of ``cap`` of them (sorted)."""
    if n <= cap:
        return np.arange(n)
    return np.sort(np.random.default_rng(seed).choice(n, cap, replace=False))
