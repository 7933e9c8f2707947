"""Ordinary and universal kriging with global solve or moving neighbourhood.

Both estimators return the estimate *and* the kriging standard deviation. The nugget is a
discontinuity at the origin by default, so kriging honours the data exactly; with
``nugget_as_error=True`` the nugget is treated as measurement error and filtered: the estimate
is then of the error-free field (smooth through the data) and its variance excludes the nugget.

Global solve (``neighbors=None``): for models with a sill the covariance matrix is factored once
(Cholesky) and targets are processed in chunks, so memory grows with n^2 + n x chunk, never with
n x targets. The linear model (no covariance) uses an LU factorisation of the bordered
variogram system.

Moving neighbourhood (``neighbors=k``): each target uses exactly its own k nearest data
(anisotropic distance). Targets whose k nearest data are the same set share one factorisation
of that set's system (:mod:`mapper.field.neighbourhood`), and the sets of one square share the
elimination of the data every one of them holds; the result is the per-target solve's, to
rounding (``benchmarks/field.py`` compares it with PyKrige's C backend side by side).
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
    bordered_system,
    chol_inverse_rows,
    cholesky_upper,
    lower_solve_inplace,
    solve_batched,
    squared_within,
)
from mapper.field.neighbourhood import map_nearest_sets, nearest_others
from mapper.field.repeats import MERGE_TOL_M, MergedReadings, merge_repeats
from mapper.field.variogram import Variogram

#: Drift (trend) models accepted by :class:`UniversalKriging`.
DRIFTS = ("linear",)
_CHUNK_ELEMENTS = 2**22  # doubles per n x chunk block in the global solve (32 MB)
_LOCAL_BATCH = 2048  # targets (or squares) per batch in the moving neighbourhood
_SET_BATCH_ELEMENTS = 2**17  # doubles per batch of bordered set matrices (1 MB, to stay in cache)
_SETS_PER_SQUARE = 3  # below this many distinct sets a square, sets are factored whole
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
        merge_tol_m: float = MERGE_TOL_M,
    ) -> None:
        # Settings stored as given (checked in fit): the estimator contract of mapper.field.estimator.
        self.variogram = variogram
        self.neighbors = neighbors
        self.nugget_as_error = nugget_as_error
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
        self.lu_ = sla.lu_factor(bordered_system(vg(_pairwise(xt)), f), overwrite_a=True, check_finite=False)

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
        a = bordered_system(self.variogram_(_pairwise(xt)), self._drift(xt, self.centre_, self.scale_))
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
        p = self._n_drift
        d = _within(pts)
        scale = self.scale_
        if p > 1:  # drift columns scaled by the neighbourhood size, for conditioning only
            scale = np.maximum(np.max(np.abs(pts - centre[:, None, :]), axis=(1, 2)), 1e-12)[:, None, None]
        a = bordered_system(self.variogram_.semivariance_into(d), self._drift(pts, centre[:, None, :], scale))
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

        Targets are grouped by their set of k nearest readings
        (:func:`mapper.field.neighbourhood.map_nearest_sets`), square by square. Within a square
        the candidates nearest its centre, the first ``c``, belong to every set, so the set
        covariance is ``[[C_cc, C_cr], [C_rc, C_rr]]`` with a shared leading block: per square,
        ``L_c`` (Cholesky of ``C_cc``), ``X = L_c^-1 C_cN`` and the Schur complement
        ``S = C_NN - X' X`` over all its other candidates; per set, only the rows ``r`` of the
        rest are factored, bordered by the drift, the values and the targets' covariances:
        ``[[S_rr, B_r'], [B_r, D]]`` with ``B_r`` reduced by the core the same way and a large
        diagonal ``D`` (the lower-left block of the factor, ``L_r^-1 B_r``, is computed from the
        first columns only, so ``D`` never enters it). Stacking the core and rest parts gives
        ``G = L^-1 F``, ``g = L^-1 z`` and each target's ``y = L^-1 c``, from which estimate and
        variance follow by dot products, as in the global solve.
        """
        if not self.variogram_.bounded:
            return self._predict_local(tt)
        m = tt.shape[0]
        est, var = np.empty(m), np.empty(m)
        map_nearest_sets(self.xt_, tt, self.neighbors, lambda block: self._solve_block(block, tt, est, var),
                         self.tree_)
        return est, var

    def _solve_block(self, block, tt: np.ndarray, est: np.ndarray, var: np.ndarray) -> None:
        """Estimate and variance of one block of targets grouped by neighbourhood."""
        vg, p = self.variogram_, self._n_drift
        nsq, cmax = block.cand.shape
        if block.n_sets < _SETS_PER_SQUARE * nsq:  # few sets a square: eliminating a core does not pay
            self._solve_block_direct(block, tt, est, var)
            return
        pad = block.cand < 0
        cpos = self.xt_[block.cand]
        cpos[pad] = np.inf
        with np.errstate(invalid="ignore"):
            cc = vg.covariance_into(_within(cpos), with_nugget=False)  # (nsq, cmax, cmax)
        diag = np.arange(cmax)
        cc[:, diag, diag] = vg.total_sill
        scale = 1.0
        if p > 1:  # drift columns scaled by the square's reach, for conditioning only
            reach = np.where(pad, 0.0, np.max(np.abs(cpos - block.centre[:, None, :]), axis=2))
            scale = np.maximum(reach.max(axis=1), 1e-12)[:, None, None]
        bcol = np.empty((nsq, cmax, p + 1))  # drift and value of each candidate
        bcol[:, :, :p] = self._drift(np.where(pad[..., None], 0.0, cpos), block.centre[:, None, :], scale)
        bcol[:, :, p] = self.values_[block.cand]
        bcol[pad] = 0.0
        # Targets' covariances to their square's candidates, in a (square, slot) layout.
        kc = np.zeros((nsq, int(block.row_slot.max()) + 1, cmax))
        kc[block.row_square, block.row_slot] = block.cand_dist
        kc = vg.covariance_into(kc, with_nugget=False)
        if vg.nugget > 0 and not self.nugget_as_error:
            hit = np.flatnonzero(block.on_datum >= 0)
            kc[block.row_square[hit], block.row_slot[hit], block.on_datum[hit]] += vg.nugget
        set_core = block.core[block.square]
        for c in np.unique(block.core):
            lo, hi = np.searchsorted(block.core, [c, c + 1])  # squares are numbered by core size
            sqs = slice(int(lo), int(hi))
            local = np.arange(nsq) - lo
            ids_c = np.flatnonzero(set_core == c)
            try:
                parts = _core_parts(cc[sqs], bcol[sqs], kc[sqs], int(c))
            except np.linalg.LinAlgError:  # a core not numerically positive definite: no shared block
                c = 0
                parts = _core_parts(cc[sqs], bcol[sqs], kc[sqs], 0)
            for ids, w in _batches(block.count, ids_c, self.neighbors - int(c) + p + 1):
                self._solve_sets(block, ids, w, int(c), local, parts, scale, tt, est, var)

    def _solve_block_direct(self, block, tt: np.ndarray, est: np.ndarray, var: np.ndarray) -> None:
        """Each set's system built from its own members (no shared core): for sparse targets."""
        vg, k, p = self.variogram_, self.neighbors, self._n_drift
        dist = block.dist()  # (rows, k), by row
        for ids, w in _batches(block.count, np.arange(block.n_sets), k + p + 1):
            nb = ids.shape[0]
            members = block.members[ids]
            pts = self.xt_[members]
            rows, valid = _set_rows(block, ids, w)
            size = k + p + 1 + w
            a = np.zeros((nb, size, size))
            _within(pts, a[:, :k, :k])
            cov = vg.covariance_into(a[:, :k, :k], with_nugget=False)
            if cov.base is not a:  # models computed out of place
                a[:, :k, :k] = cov
            diag = np.arange(k)
            a[:, diag, diag] = vg.total_sill
            centre = block.centre[block.square[ids]]
            scale = 1.0
            if p > 1:  # drift columns scaled by the neighbourhood's reach, for conditioning only
                scale = np.maximum(np.max(np.abs(pts - centre[:, None, :]), axis=(1, 2)), 1e-12)[:, None, None]
            a[:, k:k + p, :k] = np.swapaxes(self._drift(pts, centre[:, None, :], scale), 1, 2)
            a[:, k + p, :k] = self.values_[members]
            h = dist[rows]  # (nb, w, k)
            on_data = (h == 0.0) if (vg.nugget > 0 and not self.nugget_as_error) else None
            kt = vg.covariance_into(h, with_nugget=False)
            if on_data is not None:
                kt[on_data] += vg.nugget
            a[:, k + p + 1:, :k] = kt
            low = _factor_bordered(a, k)
            if low is None:
                self._bordered_sets(block, ids, rows, valid, tt, est, var)
                continue
            self._combine(low[:, k:k + p, :k], low[:, k + p, :k], low[:, k + p + 1:, :k], block.target[rows],
                          valid, centre, scale, tt, est, var)

    def _solve_sets(self, block, ids, w, c, local, parts, scale, tt, est, var) -> None:
        """The targets of sets ``ids`` of ``block`` (each with at most ``w`` targets, ``c`` core)."""
        k, p = self.neighbors, self._n_drift
        schur, bred, kred, u, v = parts
        nb, kr = ids.shape[0], k - c
        sq_block = block.square[ids]
        sq = local[sq_block]
        rest = block.colpos[ids, c:] - c  # (nb, kr): positions among the square's other candidates
        rows, valid = _set_rows(block, ids, w)
        rsq, rsl = local[block.row_square[rows]], block.row_slot[rows]
        size = kr + p + 1 + w
        a = np.zeros((nb, size, size))
        a[:, :kr, :kr] = schur[sq[:, None, None], rest[:, :, None], rest[:, None, :]]
        a[:, kr:kr + p + 1, :kr] = np.swapaxes(bred[sq[:, None], rest], 1, 2)
        a[:, kr + p + 1:, :kr] = kred[rsq[:, :, None], rsl[:, :, None], rest[:, None, :]]
        low = _factor_bordered(a, kr)
        if low is None:
            self._bordered_sets(block, ids, rows, valid, tt, est, var)
            return
        # Core and rest parts stacked: G = L^-1 F (nb, p, k), g = L^-1 z (nb, k), y = L^-1 c (nb, w, k).
        us = np.swapaxes(u[sq], 1, 2)  # (nb, p + 1, c)
        g = np.concatenate([us[:, :p], low[:, kr:kr + p, :kr]], axis=2)
        gz = np.concatenate([us[:, p], low[:, kr + p, :kr]], axis=1)
        y = np.concatenate([v[rsq, rsl], low[:, kr + p + 1:, :kr]], axis=2)
        sc = scale if np.isscalar(scale) else scale[sq_block]
        self._combine(g, gz, y, block.target[rows], valid, block.centre[sq_block], sc, tt, est, var)

    def _combine(self, g, gz, y, tgt, valid, centre, scale, tt, est, var) -> None:
        """Estimates and variances from ``G = L^-1 F`` (nb, p, k), ``g = L^-1 z`` (nb, k) and the
        targets' ``y = L^-1 c`` (nb, w, k), written at targets ``tgt[valid]``."""
        vg, p = self.variogram_, self._n_drift
        c00 = vg.sill if self.nugget_as_error else vg.total_sill
        if p == 1:  # ordinary kriging: G is one row, F' C^-1 F a number
            g1 = g[:, 0]
            gram = np.einsum("bk,bk->b", g1, g1)
            beta = np.einsum("bk,bk->b", g1, gz) / gram
            r = gz - g1 * beta[:, None]
            e = beta[:, None] + np.matmul(y, r[:, :, None])[:, :, 0]
            d = 1.0 - np.matmul(y, g1[:, :, None])[:, :, 0]  # (nb, w)
            v = c00 - np.einsum("bwk,bwk->bw", y, y) + d * d / gram[:, None]
        else:
            gt = np.swapaxes(g, 1, 2)
            gram = np.matmul(g, gt)  # F' C^-1 F, (nb, p, p)
            beta = np.linalg.solve(gram, np.matmul(g, gz[:, :, None]))  # (nb, p, 1)
            r = gz - np.matmul(gt, beta)[:, :, 0]
            f0 = self._drift(tt[tgt], centre[:, None, :], scale)  # (nb, w, p)
            e = np.matmul(f0, beta)[:, :, 0] + np.matmul(y, r[:, :, None])[:, :, 0]
            d = f0 - np.matmul(y, gt)  # (nb, w, p)
            gi_d = np.linalg.solve(gram, np.swapaxes(d, 1, 2))  # (nb, p, w)
            v = c00 - np.einsum("bwk,bwk->bw", y, y) + np.einsum("bwp,bpw->bw", d, gi_d)
        est[tgt[valid]] = e[valid]
        var[tgt[valid]] = v[valid]

    def _bordered_sets(self, block, ids, rows, valid, tt, est, var) -> None:
        """Sets whose covariance is not numerically positive definite: the bordered solve, one by one."""
        for i in range(ids.shape[0]):
            t_i = block.target[rows[i, valid[i]]]
            est[t_i], var[t_i] = self._bordered_at(block.members[ids[i]], tt[t_i])

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


def _factor_bordered(a: np.ndarray, k: int) -> np.ndarray | None:
    """Cholesky factors of a stack of bordered matrices whose first ``k`` rows and columns are a
    covariance: the rest of the diagonal is set to a huge value (it never enters the first ``k``
    columns of the factor, which hold ``L`` and ``L^-1 B``). None when some member is not
    numerically positive definite."""
    tail = np.arange(k, a.shape[-1])
    a[:, tail, tail] = _HUGE
    try:
        return np.linalg.cholesky(a)
    except np.linalg.LinAlgError:
        return None


def _batches(count: np.ndarray, ids: np.ndarray, size0: int):
    """Sets ``ids`` in batches of equal target slots ``w`` (a power of 2 at least each set's target
    count), each batch's bordered matrices of side ``size0 + w`` within the batch size limit."""
    width = np.left_shift(1, np.ceil(np.log2(count[ids])).astype(np.int64))
    for w in np.unique(width):
        sel = ids[width == w]
        step = max(1, _SET_BATCH_ELEMENTS // ((size0 + int(w)) ** 2))
        for s in range(0, sel.shape[0], step):
            yield sel[s:s + step], int(w)


def _set_rows(block, ids: np.ndarray, w: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows of sets ``ids`` in ``w`` slots each (padded by repeating the last) and which are real."""
    count = block.count[ids]
    slot = np.arange(w)
    valid = slot[None, :] < count[:, None]
    rows = block.set_rows[block.start[ids, None] + np.minimum(slot[None, :], count[:, None] - 1)]
    return rows, valid


def _core_parts(cc: np.ndarray, bcol: np.ndarray, kc: np.ndarray, c: int):
    """Per square, eliminate the ``c`` core candidates shared by all its sets.

    Parameters
    ----------
    cc : ndarray, shape (q, n, n)
        Covariances among each square's candidates (core first).
    bcol : ndarray, shape (q, n, p + 1)
        Drift columns and values of the candidates.
    kc : ndarray, shape (q, t, n)
        Covariances from each square's targets to its candidates.
    c : int
        Core size.

    Returns
    -------
    schur, bred, kred, u, v
        Schur complement of the core over the other candidates (q, n - c, n - c), the reduced
        drift/value columns (q, n - c, p + 1) and target covariances (q, t, n - c), and the core
        parts ``L_c^-1 B_c`` (q, c, p + 1) and ``L_c^-1 k_c`` as rows (q, t, c).
    """
    if c == 0:
        q, t = kc.shape[:2]
        return cc, bcol, kc, np.zeros((q, 0, bcol.shape[2])), np.zeros((q, t, 0))
    li = np.linalg.inv(np.linalg.cholesky(cc[:, :c, :c]))  # (q, c, c), lower triangular
    x = np.matmul(li, cc[:, :c, c:])  # (q, c, n - c)
    xt = np.swapaxes(x, 1, 2)
    schur = cc[:, c:, c:] - np.matmul(xt, x)
    u = np.matmul(li, bcol[:, :c])
    bred = bcol[:, c:] - np.matmul(xt, u)
    v = np.matmul(kc[:, :, :c], np.swapaxes(li, 1, 2))
    kred = kc[:, :, c:] - np.matmul(v, x)
    return schur, bred, kred, u, v


def _pairwise(xt: np.ndarray) -> np.ndarray:
    """Distance matrix (n, n) built in row blocks to keep temporaries small, metres."""
    n = xt.shape[0]
    out = np.empty((n, n))
    step = max(1, _CHUNK_ELEMENTS // n)
    for s in range(0, n, step):
        out[s:s + step] = cdist(xt[s:s + step], xt)
    return out


def _within(pts: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """Distances (B, k, k) within each neighbourhood of positions ``pts`` (B, k, 2), metres."""
    return np.sqrt(squared_within(pts, out), out=out)


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
    ainv = np.linalg.inv(bordered_system(vg(_pairwise(xt)), f))
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
        _, idx = nearest_others(kr.tree_, own, k)
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
    neighbors, nugget_as_error, merge_tol_m
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
        merge_tol_m: float = MERGE_TOL_M,
    ) -> None:
        self.drift = drift
        super().__init__(variogram, neighbors, nugget_as_error=nugget_as_error, merge_tol_m=merge_tol_m)

    def _check_settings(self) -> None:
        checks.choose(self.drift, DRIFTS, "drift", "UniversalKriging")
        super()._check_settings()
