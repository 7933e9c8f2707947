"""Ordinary and universal kriging with global solve or moving neighbourhood.

Both estimators return the estimate *and* the kriging standard deviation. The nugget is a
discontinuity at the origin by default, so kriging honours the data exactly; with
``nugget_as_error=True`` the nugget is treated as measurement error and filtered: the estimate
is then of the error-free field (smooth through the data) and its variance excludes the nugget.

Global solve (``neighbors=None``): for models with a sill the covariance matrix is factored once
(Cholesky) and targets are processed in chunks, so memory grows with n^2 + n x chunk, never with
n x targets. The linear model (no covariance) uses an LU factorisation of the bordered
variogram system.

Moving neighbourhood (``neighbors=k``): each target uses its k nearest data (anisotropic
distance, via a KD-tree); systems are built and solved in batches. With ``share_m`` targets in
one square of that side share the k nearest data of the square's centre, so one system is
factored per square rather than per target (much faster on dense grids; differences from the
per-target solve are small and measured by ``benchmarks/field.py``).
"""

from __future__ import annotations

import numpy as np
import scipy.linalg as sla
from scipy.linalg import blas
from scipy.spatial import cKDTree
from scipy.spatial.distance import cdist

from mapper.errors import MapperError
from mapper.field import checks
from mapper.field.estimator import check_fitted
from mapper.field.linalg import (
    chol_inverse_rows,
    cholesky_upper,
    inv_batched,
    lower_solve_inplace,
    solve_batched,
)
from mapper.field.neighbourhood import map_nearest_sets
from mapper.field.repeats import MERGE_TOL_M, MergedReadings, merge_repeats
from mapper.field.variogram import Variogram

#: Drift (trend) models accepted by :class:`UniversalKriging`.
DRIFTS = ("linear",)
_CHUNK_ELEMENTS = 2**22  # doubles per n x chunk block in the global solve (32 MB)
_LOCAL_BATCH = 2048  # targets (or squares) per batch in the moving neighbourhood
_SET_BATCH_ELEMENTS = 2**17  # doubles per batch of bordered set matrices (1 MB, to stay in cache)
_HUGE = 1e200  # trailing diagonal of the bordered factorisation (never enters the used block)


class _Kriging:
    """Shared machinery of ordinary and universal kriging (not public)."""

    _name = "kriging"
    _n_drift = 1

    def __init__(
        self,
        variogram: Variogram | None = None,
        neighbors: int | None = None,
        *,
        nugget_as_error: bool = False,
        share_m: float | None = None,
        merge_tol_m: float = MERGE_TOL_M,
    ) -> None:
        # Settings stored as given (checked in fit): the estimator contract of mapper.field.estimator.
        self.variogram = variogram
        self.neighbors = neighbors
        self.nugget_as_error = nugget_as_error
        self.share_m = share_m
        self.merge_tol_m = merge_tol_m

    def _check_settings(self) -> None:
        """Refuse settings that cannot work, naming them (called by :meth:`fit`)."""
        where = type(self).__name__
        if self.variogram is not None and not isinstance(self.variogram, Variogram):
            raise MapperError(
                f"variogram must be a Variogram (or None to fit one), got {type(self.variogram).__name__}",
                where=where,
            )
        n = self.neighbors
        if n is not None and (isinstance(n, bool) or not isinstance(n, int | np.integer) or n < 2):
            raise MapperError(f"neighbors must be an integer >= 2 or None (global solve), got {n!r}", where=where)
        if self.share_m is not None:
            checks.positive(self.share_m, "share_m (side of a shared-neighbourhood square)", where)
        checks.positive(self.merge_tol_m, "merge_tol_m", where)

    # ------------------------------------------------------------------------------ fitting
    def _drift(self, xt: np.ndarray, centre: np.ndarray, scale: float) -> np.ndarray:
        """Drift basis at transformed positions: constant, or constant + plane."""
        ones = np.ones(xt.shape[:-1] + (1,))
        if self._n_drift == 1:
            return ones
        return np.concatenate([ones, (xt - centre) / scale], axis=-1)

    def fit(self, xy, values) -> _Kriging:
        """Merge repeats, fit a variogram if none was given, and factor the system.

        Parameters
        ----------
        xy : array_like, shape (n, 2)
            Reading positions, metres.
        values : array_like, shape (n,)
            Readings, V/m.

        Returns
        -------
        self
        """
        self._check_settings()
        where = f"{type(self).__name__}.fit"
        xy, z = checks.readings(xy, values, where, minimum=1)
        merged = merge_repeats(xy, z, self.merge_tol_m)
        need = 2 if self._n_drift == 1 else 3
        if merged.xy.shape[0] < need:
            raise MapperError(
                f"{self._name} needs at least {need} distinct positions, got {merged.xy.shape[0]} "
                f"(from {xy.shape[0]} readings)",
                where=where,
            )
        if self._n_drift > 1:
            checks.not_collinear(merged.xy, where, "universal kriging with a linear drift")
        vg = self.variogram
        self.variogram_fit_ = None
        if vg is None:
            from mapper.field.fit import fit_variogram

            self.variogram_fit_ = fit_variogram(merged.xy, merged.values)
            vg = self.variogram_fit_.variogram
        self.variogram_ = vg
        self.merged_: MergedReadings = merged
        self.xy_ = merged.xy
        self.values_ = merged.values
        self.xt_ = vg.transform(merged.xy)
        lo, hi = self.xt_.min(axis=0), self.xt_.max(axis=0)
        self.centre_ = (lo + hi) / 2.0
        self.scale_ = float(max(np.max(hi - lo) / 2.0, 1e-12))
        n = merged.xy.shape[0]
        self.global_ = self.neighbors is None or self.neighbors >= n
        if self.global_:
            self._factor_global()
        else:
            self.tree_ = cKDTree(self.xt_)
        return self

    def _check_fitted(self, what: str) -> None:
        check_fitted(self, what)

    def _factor_global(self) -> None:
        vg, xt, z = self.variogram_, self.xt_, self.values_
        f = self._drift(xt, self.centre_, self.scale_)
        self.chol_ = None
        if vg.bounded:
            # C = U'U; everything after this is triangular solves with U' (no bordered system).
            up = cholesky_upper(vg.covariance_into(_pairwise(xt), with_nugget=True))
            if up is not None:
                u = lower_solve_inplace(up, np.asfortranarray(f))
                v = lower_solve_inplace(up, z.copy())
                g = u.T @ u
                beta = np.linalg.solve(g, u.T @ v)
                self.chol_ = up
                self.u_, self.g_, self.beta_ = u, g, beta
                self.r_ = v - u @ beta
                return
        n, p = f.shape
        a = np.zeros((n + p, n + p))
        a[:n, :n] = vg(_pairwise(xt))
        a[:n, n:] = f
        a[n:, :n] = f.T
        self.lu_ = sla.lu_factor(a, overwrite_a=True, check_finite=False)

    # ------------------------------------------------------------------------------ predicting
    def predict(self, targets) -> tuple[np.ndarray, np.ndarray]:
        """Kriging estimate and standard deviation at ``targets``.

        Parameters
        ----------
        targets : array_like, shape (m, 2)
            Positions, metres.

        Returns
        -------
        est : ndarray, shape (m,)
            Estimate, V/m.
        std : ndarray, shape (m,)
            Kriging standard deviation, V/m.
        """
        self._check_fitted("predict")
        t = checks.points(targets, f"{type(self).__name__}.predict", "targets")
        tt = self.variogram_.transform(t)
        if self.global_:
            est, var = self._predict_global(tt)
        elif self.share_m is not None:
            est, var = self._predict_shared(t, tt)
        else:
            est, var = self._predict_sets(tt)
        return est, np.sqrt(np.maximum(var, 0.0))

    def weights(self, targets) -> np.ndarray:
        """Kriging weights of every (merged) reading for each target, global solve only.

        Parameters
        ----------
        targets : array_like, shape (m, 2)
            Positions, metres.

        Returns
        -------
        ndarray, shape (m, n)
            Weights (each row sums to 1).
        """
        self._check_fitted("weights")
        if not self.global_:
            raise MapperError("weights are offered for the global solve only (neighbors=None)",
                              where=f"{type(self).__name__}.weights")
        t = self.variogram_.transform(checks.points(targets, f"{type(self).__name__}.weights", "targets"))
        xt = self.xt_
        n = xt.shape[0]
        f = self._drift(xt, self.centre_, self.scale_)
        p = f.shape[1]
        a = np.zeros((n + p, n + p))
        a[:n, :n] = self.variogram_(_pairwise(xt))
        a[:n, n:] = f
        a[n:, :n] = f.T
        rhs = np.vstack([self._rhs_gamma(_cross(xt, t)), self._drift(t, self.centre_, self.scale_).T])
        return np.linalg.solve(a, rhs)[:n].T

    def _g00(self) -> float:
        return self.variogram_.nugget if self.nugget_as_error else 0.0

    def _rhs_gamma(self, h: np.ndarray) -> np.ndarray:
        """Variogram between data and target: full gamma, or nugget + structured when filtering.

        ``h`` (anisotropic lags, metres) may be overwritten.
        """
        vg = self.variogram_
        if self.nugget_as_error:
            return vg.nugget + vg.structured(h)
        return vg.semivariance_into(h)

    def _predict_global(self, tt: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if self.chol_ is not None:
            return self._predict_global_chol(tt)
        xt = self.xt_
        n, m = xt.shape[0], tt.shape[0]
        est, var = np.empty(m), np.empty(m)
        chunk = max(64, _CHUNK_ELEMENTS // n)
        for s in range(0, m, chunk):
            sl = slice(s, min(m, s + chunk))
            f0 = self._drift(tt[sl], self.centre_, self.scale_).T  # (p, c)
            rhs = np.vstack([self._rhs_gamma(_cross(xt, tt[sl])), f0])
            w = sla.lu_solve(self.lu_, rhs, check_finite=False)
            est[sl] = self.values_ @ w[:n]
            var[sl] = np.einsum("ij,ij->j", w, rhs) - self._g00()
        return est, var

    def _predict_global_chol(self, tt: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Global solve from the Cholesky factor ``C = U'U`` of the data covariance.

        For each target with covariances ``k`` to the data and drift ``f0``: ``y = U'^-1 k``
        (one triangular solve per block of targets, in place), estimate ``f0' beta + r' y``
        with ``r = U'^-1 (z - F beta)``, variance ``c(0) - y'y + d' G^-1 d`` with
        ``d = f0 - F' C^-1 k`` and ``G = F' C^-1 F`` (the Lagrange / drift term).
        """
        vg, xt = self.variogram_, self.xt_
        n, m = xt.shape[0], tt.shape[0]
        est, var = np.empty(m), np.empty(m)
        c00 = vg.sill if self.nugget_as_error else vg.total_sill
        chunk = min(m, max(64, _CHUNK_ELEMENTS // n))
        # One (targets, data) C-ordered buffer, reused: its transpose is the Fortran-ordered
        # (data, targets) block the triangular solve overwrites, so nothing is copied and no
        # fresh pages are touched per block.
        buf = np.empty((chunk, n))
        # Targets that coincide with a reading (the nugget belongs to lag 0 only).
        dist0, near = cKDTree(xt).query(tt, k=1)
        on_data = np.flatnonzero(dist0 == 0.0)
        with_nugget = not self.nugget_as_error
        ru = np.asfortranarray(np.column_stack([self.r_, self.u_]))  # (n, 1 + p)
        for s in range(0, m, chunk):
            e = min(m, s + chunk)
            h = buf[: e - s]
            cdist(tt[s:e], xt, out=h)
            hit = on_data[(on_data >= s) & (on_data < e)]
            kt = vg.covariance_into(h, with_nugget=with_nugget, zero=(hit - s, near[hit]))
            y = lower_solve_inplace(self.chol_, kt.T)  # (n, c) Fortran: columns U'^-1 k
            # r'y and F'C^-1 k for the block in one product (scipy's BLAS, like the solve).
            proj = blas.dgemm(1.0, y, ru, trans_a=1)  # (c, 1 + p)
            f0 = self._drift(tt[s:e], self.centre_, self.scale_)  # (c, p)
            est[s:e] = f0 @ self.beta_ + proj[:, 0]
            d = f0 - proj[:, 1:]
            var[s:e] = c00 - np.einsum("ij,ij->i", y.T, y.T) + np.einsum(
                "ij,ji->i", d, np.linalg.solve(self.g_, d.T)
            )
        return est, var

    def _local_matrices(self, idx: np.ndarray, centre: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Bordered variogram systems (B, k+p, k+p) for neighbourhoods ``idx`` (B, k)."""
        pts = self.xt_[idx]  # (B, k, 2)
        k, p = idx.shape[1], self._n_drift
        d = _within(pts)
        scale = self.scale_
        if p > 1:  # drift columns scaled by the neighbourhood size, for conditioning only
            scale = np.maximum(np.max(np.abs(pts - centre[:, None, :]), axis=(1, 2)), 1e-12)[:, None, None]
        f = self._drift(pts, centre[:, None, :], scale)
        a = np.zeros((idx.shape[0], k + p, k + p))
        a[:, :k, :k] = self.variogram_.semivariance_into(d)
        a[:, :k, k:] = f
        a[:, k:, :k] = np.swapaxes(f, 1, 2)
        return a, pts, scale

    def _predict_local(self, tt: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        k, m = self.neighbors, tt.shape[0]
        est, var = np.empty(m), np.empty(m)
        for s in range(0, m, _LOCAL_BATCH):
            sl = slice(s, min(m, s + _LOCAL_BATCH))
            t = tt[sl]
            _, idx = self.tree_.query(t, k=k)
            a, pts, _ = self._local_matrices(idx, t)
            h = _to_point(pts, t)
            rhs = np.concatenate([self._rhs_gamma(h), self._drift(t, t, 1.0)], axis=1)
            w = solve_batched(a, rhs)
            est[sl] = np.einsum("bk,bk->b", w[:, :k], self.values_[idx])
            var[sl] = np.einsum("bk,bk->b", w, rhs) - self._g00()
        return est, var

    def _predict_sets(self, tt: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Moving neighbourhood, exact: one factorisation per distinct set of k nearest readings.

        Targets whose k nearest readings are the same set share that set's system (grouped by
        :func:`mapper.field.neighbourhood.map_nearest_sets`). For a set with covariance
        ``C = L L'``, drift ``F``, values ``z`` and its targets' covariances ``c_1 .. c_w``, one
        Cholesky factorisation of the bordered matrix ``[[C, B'], [B, D]]`` with
        ``B' = [F, z, c_1 .. c_w]`` and a large diagonal ``D`` yields ``L`` and, in its lower-left
        block, the rows of ``L^-1 B'`` (computed from the first k columns only, so ``D`` never
        enters them). From ``G = L^-1 F``, ``g = L^-1 z`` and ``y_j = L^-1 c_j`` each target's
        estimate and variance follow by dot products, as in the global solve.
        """
        if not self.variogram_.bounded:
            return self._predict_local(tt)
        m = tt.shape[0]
        est, var = np.empty(m), np.empty(m)

        def consume(block) -> None:
            width = np.left_shift(1, np.ceil(np.log2(block.count)).astype(np.int64))
            size0 = self.neighbors + self._n_drift + 1
            for w in np.unique(width):
                ids = np.flatnonzero(width == w)
                step = max(1, _SET_BATCH_ELEMENTS // ((size0 + int(w)) ** 2))
                for s in range(0, ids.shape[0], step):
                    self._solve_sets(block, ids[s:s + step], int(w), tt, est, var)

        map_nearest_sets(self.xt_, tt, self.neighbors, consume, self.tree_)
        return est, var

    def _solve_sets(self, block, ids: np.ndarray, w: int, tt: np.ndarray, est: np.ndarray,
                    var: np.ndarray) -> None:
        """Estimate and variance of the targets of sets ``ids`` of ``block`` (each with <= w targets)."""
        vg, k, p = self.variogram_, self.neighbors, self._n_drift
        nb = ids.shape[0]
        members = block.members[ids]  # (nb, k)
        pts = self.xt_[members]
        c00 = vg.sill if self.nugget_as_error else vg.total_sill
        # Each set's targets (rows of the block), padded to w slots by repeating the last one.
        count = block.count[ids]
        slot = np.arange(w)
        valid = slot[None, :] < count[:, None]
        rows = block.start[ids, None] + np.minimum(slot[None, :], count[:, None] - 1)  # (nb, w)
        size = k + p + 1 + w
        a = np.empty((nb, size, size))
        # Lower triangle only (all the factorisation reads): covariances within the set ...
        _within_into(pts, a[:, :k, :k])
        cov = vg.covariance_into(a[:, :k, :k], with_nugget=False)
        if cov.base is not a:  # models computed out of place
            a[:, :k, :k] = cov
        diag = np.arange(k)
        a[:, diag, diag] = vg.total_sill
        centre = pts.mean(axis=1)
        scale = 1.0
        if p > 1:  # drift columns scaled by the neighbourhood size, for conditioning only
            scale = np.maximum(np.max(np.abs(pts - centre[:, None, :]), axis=(1, 2)), 1e-12)[:, None, None]
        # ... then the rows of B: drift, values, and the targets' covariances (nugget at lag 0).
        a[:, k:k + p, :k] = np.swapaxes(self._drift(pts, centre[:, None, :], scale), 1, 2)
        a[:, k + p, :k] = self.values_[members]
        h = block.dist[rows]  # (nb, w, k)
        on_data = (h == 0.0) if (vg.nugget > 0 and not self.nugget_as_error) else None
        kt = vg.covariance_into(h, with_nugget=False)
        if on_data is not None:
            kt[on_data] += vg.nugget
        a[:, k + p + 1:, :k] = kt
        a[:, k:, k:] = 0.0
        tail = np.arange(k, size)
        a[:, tail, tail] = _HUGE
        try:
            low = np.linalg.cholesky(a)
        except np.linalg.LinAlgError:  # some set's covariance is not numerically positive definite
            for i in range(nb):
                t_i = block.target[rows[i, valid[i]]]
                est[t_i], var[t_i] = self._bordered_at(members[i], tt[t_i])
            return
        g = low[:, k:k + p, :k]  # (nb, p, k): rows of L^-1 F
        gz = low[:, k + p, :k]  # (nb, k)
        y = low[:, k + p + 1:, :k]  # (nb, w, k)
        gt = np.swapaxes(g, 1, 2)
        gram = np.matmul(g, gt)  # F' C^-1 F, (nb, p, p)
        beta = np.linalg.solve(gram, np.matmul(g, gz[:, :, None]))  # (nb, p, 1)
        r = gz - np.matmul(gt, beta)[:, :, 0]
        tgt = block.target[rows]  # (nb, w)
        f0 = self._drift(tt[tgt], centre[:, None, :], scale)  # (nb, w, p)
        e = np.matmul(f0, beta)[:, :, 0] + np.matmul(y, r[:, :, None])[:, :, 0]
        d = f0 - np.matmul(y, gt)  # (nb, w, p)
        gi_d = np.linalg.solve(gram, np.swapaxes(d, 1, 2))  # (nb, p, w)
        v = c00 - np.einsum("bwk,bwk->bw", y, y) + np.einsum("bwp,bpw->bw", d, gi_d)
        est[tgt[valid]] = e[valid]
        var[tgt[valid]] = v[valid]

    def _bordered_at(self, members: np.ndarray, tt: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Estimate and variance at targets ``tt`` from one neighbourhood, by the bordered solve."""
        idx = np.broadcast_to(members, (tt.shape[0], members.shape[0]))
        a, pts, _ = self._local_matrices(idx, tt)
        h = _to_point(pts, tt)
        rhs = np.concatenate([self._rhs_gamma(h), self._drift(tt, tt, 1.0)], axis=1)
        w = solve_batched(a, rhs)
        k = members.shape[0]
        return (np.einsum("bk,bk->b", w[:, :k], self.values_[idx]),
                np.einsum("bk,bk->b", w, rhs) - self._g00())

    def _predict_shared(self, t: np.ndarray, tt: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        k, m, side = self.neighbors, t.shape[0], self.share_m
        origin = t.min(axis=0)
        key = np.floor((t - origin) / side).astype(np.int64)
        flat = key[:, 0] * (int(key[:, 1].max()) + 1) + key[:, 1]
        uniq, first, tile = np.unique(flat, return_index=True, return_inverse=True)
        centres = origin + (key[first] + 0.5) * side
        ct = self.variogram_.transform(centres)
        order = np.argsort(tile, kind="stable")
        counts = np.bincount(tile, minlength=uniq.shape[0])
        start = np.concatenate([[0], np.cumsum(counts)])
        est, var = np.empty(m), np.empty(m)
        n_tiles = uniq.shape[0]
        cmax_all = int(counts.max())
        batch = max(1, min(_LOCAL_BATCH, (2**21) // max(1, cmax_all * (k + self._n_drift))))
        for s in range(0, n_tiles, batch):
            e = min(n_tiles, s + batch)
            _, idx = self.tree_.query(ct[s:e], k=k)
            a, pts, scale = self._local_matrices(idx, ct[s:e])
            sel = order[start[s]:start[e]]
            tid = tile[sel] - s
            pos = np.arange(sel.shape[0]) - (start[tile[sel]] - start[s])
            cmax = int(counts[s:e].max())
            tp = np.zeros((e - s, cmax, 2))
            tp[tid, pos] = tt[sel]
            g = self._rhs_gamma(_square_lags(pts, tp))  # (tiles, c, k)
            f0 = self._drift(tp, ct[s:e, None, :], scale)  # (tiles, c, p)
            # One inverse per square, then batched matrix products for all its targets (cheaper
            # than a multi-right-hand-side solve for small systems); rows are weight vectors.
            ainv = inv_batched(a)
            w = np.matmul(g, np.ascontiguousarray(ainv[:, :k, :]))
            w += np.matmul(f0, np.ascontiguousarray(ainv[:, k:, :]))
            est_b = np.einsum("tck,tk->tc", w[:, :, :k], self.values_[idx])
            var_b = np.einsum("tck,tck->tc", w[:, :, :k], g)
            var_b += np.einsum("tcp,tcp->tc", w[:, :, k:], f0)
            var_b -= self._g00()
            est[sel] = est_b[tid, pos]
            var[sel] = var_b[tid, pos]
        return est, var

    # ------------------------------------------------------------------------------ cross-validation
    def loo(self, at: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Leave-one-out errors and standard deviations at the (merged) data positions.

        ``at`` selects merged positions to leave out in turn (default all of them).

        Global solve: closed form from the inverse of the system matrix (Dubrule 1983).
        Moving neighbourhood: each position is predicted from its k nearest *other* positions,
        which is exactly the refit-free brute-force leave-one-out of that estimator.

        Returns
        -------
        error : ndarray, shape (m,)
            Left-out estimate minus the reading, V/m.
        std : ndarray, shape (m,)
            Kriging standard deviation of the left-out prediction, V/m.
        """
        self._check_fitted("loo")
        ids = np.arange(self.xy_.shape[0]) if at is None else np.asarray(at, dtype=np.int64)
        if self.global_:
            err, std = _loo_global(self)
            return err[ids], std[ids]
        return _loo_local(self, ids)


def _pairwise(xt: np.ndarray) -> np.ndarray:
    """Distance matrix (n, n) built in row blocks to keep temporaries small, metres."""
    n = xt.shape[0]
    out = np.empty((n, n))
    step = max(1, _CHUNK_ELEMENTS // n)
    for s in range(0, n, step):
        out[s:s + step] = cdist(xt[s:s + step], xt)
    return out


def _within(pts: np.ndarray) -> np.ndarray:
    """Distances (B, k, k) within each neighbourhood of positions ``pts`` (B, k, 2)."""
    px, py = np.ascontiguousarray(pts[..., 0]), np.ascontiguousarray(pts[..., 1])
    dx = px[:, :, None] - px[:, None, :]
    dy = py[:, :, None] - py[:, None, :]
    dx *= dx
    dy *= dy
    dx += dy
    return np.sqrt(dx, out=dx)


def _within_into(pts: np.ndarray, out: np.ndarray) -> np.ndarray:
    """Distances (B, k, k) within each neighbourhood of positions ``pts`` (B, k, 2), into ``out``."""
    px, py = pts[..., 0], pts[..., 1]
    np.subtract(px[:, :, None], px[:, None, :], out=out)
    np.multiply(out, out, out=out)
    dy = py[:, :, None] - py[:, None, :]
    dy *= dy
    out += dy
    return np.sqrt(out, out=out)


def _square_lags(pts: np.ndarray, tp: np.ndarray) -> np.ndarray:
    """Distances (T, c, k) from targets ``tp`` (T, c, 2) to their square's data ``pts`` (T, k, 2)."""
    hx = np.ascontiguousarray(pts[..., 0])[:, None, :] - np.ascontiguousarray(tp[..., 0])[:, :, None]
    hx *= hx
    hy = np.ascontiguousarray(pts[..., 1])[:, None, :] - np.ascontiguousarray(tp[..., 1])[:, :, None]
    hy *= hy
    hx += hy
    return np.sqrt(hx, out=hx)


def _to_point(pts: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Distances (B, k) from neighbourhood positions ``pts`` (B, k, 2) to targets ``t`` (B, 2)."""
    dx = pts[..., 0] - t[:, None, 0]
    dy = pts[..., 1] - t[:, None, 1]
    return np.sqrt(dx * dx + dy * dy)


def _cross(xt: np.ndarray, tt: np.ndarray) -> np.ndarray:
    """Distances data x targets (n, c), metres."""
    return cdist(xt, tt)


def _loo_global(kr: _Kriging) -> tuple[np.ndarray, np.ndarray]:
    vg, xt, z = kr.variogram_, kr.xt_, kr.values_
    n = xt.shape[0]
    f = kr._drift(xt, kr.centre_, kr.scale_)
    if vg.bounded:
        up = getattr(kr, "chol_", None)  # the factor of the fit, when it was a global solve
        if up is None:
            up = cholesky_upper(vg.covariance_into(_pairwise(xt), with_nugget=True))
        v = None if up is None else chol_inverse_rows(up)
        if v is not None:
            # B = C^-1 - C^-1 F (F' C^-1 F)^-1 F' C^-1; error_i = (B z)_i / B_ii, var_i = 1 / B_ii.
            # With V = U^-1 (C = U'U): C^-1 = V V', so diag(C^-1) is the row sums of V^2.
            cinv_diag = np.einsum("ij,ij->i", v, v)
            cf = v @ (v.T @ f)
            cz = v @ (v.T @ z)
            del v
            g = f.T @ cf
            gi_cf = np.linalg.solve(g, cf.T)
            diag = cinv_diag - np.einsum("ij,ji->i", cf, gi_cf)
            bz = cz - cf @ (gi_cf @ z)
            return -bz / diag, np.sqrt(np.maximum(1.0 / diag, 0.0))
    h = _pairwise(xt)
    p = f.shape[1]
    a = np.zeros((n + p, n + p))
    a[:n, :n] = vg(h)
    a[:n, n:] = f
    a[n:, :n] = f.T
    ainv = np.linalg.inv(a)
    top = ainv[:n, :n]
    diag = np.diag(top)
    # In variogram form the top-left block is minus the covariance-form B.
    return -(top @ z) / diag, np.sqrt(np.maximum(-1.0 / diag, 0.0))


def _loo_local(kr: _Kriging, ids: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    k, xt, z = kr.neighbors, kr.xt_, kr.values_
    n = ids.shape[0]
    err, var = np.empty(n), np.empty(n)
    for s in range(0, n, _LOCAL_BATCH):
        sl = slice(s, min(n, s + _LOCAL_BATCH))
        own = ids[sl]
        t = xt[own]
        _, idx = kr.tree_.query(t, k=k + 1)
        # Drop the point itself (normally the first column; duplicates were merged).
        keep = idx != own[:, None]
        keep[keep.all(axis=1), -1] = False  # self not among them (ties): drop the farthest
        idx = idx[keep].reshape(idx.shape[0], k)
        a, pts, _ = kr._local_matrices(idx, t)
        h = _to_point(pts, t)
        rhs = np.concatenate([kr.variogram_(h), kr._drift(t, t, 1.0)], axis=1)
        w = solve_batched(a, rhs)
        err[sl] = np.einsum("bk,bk->b", w[:, :k], z[idx]) - z[own]
        var[sl] = np.einsum("bk,bk->b", w, rhs)
    return err, np.sqrt(np.maximum(var, 0.0))


class OrdinaryKriging(_Kriging):
    """Ordinary kriging (unknown constant mean).

    Parameters
    ----------
    variogram : Variogram, optional
        Model used as is; None fits one to the data (:func:`mapper.field.fit.fit_variogram`).
    neighbors : int, optional
        Moving neighbourhood of this many nearest readings; None solves globally.
    nugget_as_error : bool
        Treat the nugget as measurement error and filter it (estimate not exact at data).
    share_m : float, optional
        Side of the squares whose targets share one neighbourhood, metres (moving
        neighbourhood only); None gives every target its own k nearest.
    merge_tol_m : float
        Readings closer than this are merged as repeats, metres.
    """

    _name = "ordinary kriging"
    _n_drift = 1


class UniversalKriging(_Kriging):
    """Universal kriging with a linear drift (a plane trend across the site).

    Parameters
    ----------
    variogram : Variogram, optional
        Variogram of the residual from the trend, used as is; None fits one to the data.
    drift : str
        ``linear`` (the only drift offered).
    neighbors, nugget_as_error, share_m, merge_tol_m
        As for :class:`OrdinaryKriging`.
    """

    _name = "universal kriging"
    _n_drift = 3

    def __init__(
        self,
        variogram: Variogram | None = None,
        drift: str = "linear",
        neighbors: int | None = None,
        *,
        nugget_as_error: bool = False,
        share_m: float | None = None,
        merge_tol_m: float = MERGE_TOL_M,
    ) -> None:
        self.drift = drift
        super().__init__(
            variogram, neighbors, nugget_as_error=nugget_as_error, share_m=share_m,
            merge_tol_m=merge_tol_m,
        )

    def _check_settings(self) -> None:
        checks.choose(self.drift, DRIFTS, "drift", "UniversalKriging")
        super()._check_settings()
