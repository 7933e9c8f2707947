"""Moving-neighbourhood RBF prediction: one solve per distinct set of k nearest readings.

Each target is interpolated from its own k nearest readings, exactly as scipy's
``RBFInterpolator(neighbors=k)`` does (the reference in the tests), but the work is shared:

* targets are grouped by their set of k nearest readings
  (:func:`mapper.field.neighbourhood.map_nearest_sets`), so a set is solved once for all of its
  targets;
* within a square of targets, the ``c`` candidates nearest its centre belong to every set (the
  square's core). With the unknowns ordered core, polynomial, rest, a set's system is
  ``[[B, E_r], [E_r', K_rr + s I]]`` where ``B = [[K_cc + s I, P_c], [P_c', 0]]`` is the bordered
  system of the core alone. Per square, ``B`` is solved once against all of the square's other
  candidates, giving ``G = B^-1 E_N``, ``y = B^-1 [z_c; 0]`` and the Schur complement
  ``S = K_NN + s I - E_N' G`` with its right-hand side ``z_N - E_N' y``; per set only the rows
  ``r`` of its rest are solved, ``S_rr w_r = (z_N - E_N' y)_r``, and the core weights and
  polynomial coefficients follow as ``y - G_r w_r``. This is block Gaussian elimination of the
  set's own system, so the result is the per-set solve up to rounding.

For the conditionally positive definite kernels used here (Wendland 2005, *Scattered Data
Approximation*, ch. 8; from memory) ``S`` is positive definite whenever the core is unisolvent
for the polynomial. A square whose core is too small or nearly collinear is solved set by set
with the full bordered system instead. Positions are in metres; values in V/m.
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from mapper.field.linalg import bordered_system, solve_batched, squared_within
from mapper.field.neighbourhood import NeighbourSets, map_nearest_sets

#: Squares handled together (bounds the per-square matrices to a few tens of MB).
_SQUARE_CHUNK = 128
#: Sets solved together.
_SET_CHUNK = 2048
#: A core whose polynomial block has a singular-value ratio below this is not eliminated first.
_UNISOLVENT_RATIO = 1e-8


def kernel_of_squared(name: str, d2: np.ndarray) -> np.ndarray:
    """Kernel values from squared distances ``d2`` (m^2), in the memory of ``d2``.

    Same kernels and signs as scipy's RBFInterpolator (``thin_plate_spline`` r^2 log r,
    ``cubic`` r^3, ``quintic`` -r^5, ``linear`` -r).
    """
    if name == "thin_plate_spline":
        # r^2 log r = d2 log(d2) / 2, and 0 at r = 0 (the tiny floor keeps the log finite there).
        lg = np.log(np.maximum(d2, 1e-300))
        d2 *= lg
        d2 *= 0.5
        return d2
    np.sqrt(d2, out=d2)
    if name == "cubic":
        return np.power(d2, 3, out=d2)
    if name == "quintic":
        np.power(d2, 5, out=d2)
        return np.negative(d2, out=d2)
    return np.negative(d2, out=d2)


def monomials(xy: np.ndarray, degree: int) -> np.ndarray:
    """Monomials of total degree <= ``degree`` in (already scaled) coordinates, last axis."""
    cols = [np.ones(xy.shape[:-1])]
    for d in range(1, degree + 1):
        for i in range(d + 1):
            cols.append(xy[..., 0] ** (d - i) * xy[..., 1] ** i)
    return np.stack(cols, axis=-1)


def predict_sets(xy: np.ndarray, values: np.ndarray, targets: np.ndarray, k: int, kernel: str, degree: int,
                 smoothing: float, tree: cKDTree | None = None) -> np.ndarray:
    """Local RBF interpolant from the ``k`` nearest readings of each target.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Reading positions, metres (distinct).
    values : ndarray, shape (n,)
        Readings, V/m.
    targets : ndarray, shape (m, 2)
        Where to interpolate, metres.
    k : int
        Readings per neighbourhood (k <= n).
    kernel : str
        ``thin_plate_spline``, ``cubic``, ``quintic`` or ``linear``.
    degree : int
        Degree of the polynomial term (0, 1 or 2).
    smoothing : float
        Added to the kernel diagonal (scipy's meaning), (V/m)-free.
    tree : cKDTree, optional
        Tree of ``xy``.

    Returns
    -------
    ndarray, shape (m,)
        Interpolated values, V/m.
    """
    xy = np.ascontiguousarray(xy, dtype=float)
    values = np.asarray(values, dtype=float)
    targets = np.ascontiguousarray(targets, dtype=float)
    out = np.empty(targets.shape[0])
    job = _Job(xy, values, targets, int(k), kernel, int(degree), float(smoothing), out)
    map_nearest_sets(xy, targets, int(k), job.block, tree)
    return out


class _Job:
    """The fixed inputs of one prediction and the output array the blocks write into."""

    def __init__(self, xy, values, targets, k, kernel, degree, smoothing, out):
        self.xy, self.values, self.targets, self.k = xy, values, targets, k
        self.kernel, self.degree, self.smoothing, self.out = kernel, degree, smoothing, out
        self.q = (degree + 1) * (degree + 2) // 2

    def block(self, b: NeighbourSets) -> None:
        """Interpolate the targets of one block of sets."""
        pad = b.cand < 0
        cpos = self.xy[np.where(pad, 0, b.cand)]
        cpos[pad] = np.broadcast_to(b.centre[:, None, :], cpos.shape)[pad]
        reach = np.where(pad, 0.0, np.max(np.abs(cpos - b.centre[:, None, :]), axis=2)).max(axis=1)
        scale = np.maximum(reach, 1e-12)
        zc = np.where(pad, 0.0, self.values[np.where(pad, 0, b.cand)])
        set_of = b.set_of_rows()
        # Sets and rows ordered by square, so each run of squares finds its own by bisection.
        set_order = np.argsort(b.square, kind="stable")
        set_sq = b.square[set_order]
        row_order = np.argsort(b.row_square, kind="stable")
        row_sq = b.row_square[row_order]
        for c in np.unique(b.core):
            lo, hi = (int(i) for i in np.searchsorted(b.core, [c, c + 1]))  # squares numbered by core
            for a in range(lo, hi, _SQUARE_CHUNK):
                e = min(hi, a + _SQUARE_CHUNK)
                s0, s1 = np.searchsorted(set_sq, [a, e])
                r0, r1 = np.searchsorted(row_sq, [a, e])
                self._squares(b, a, e, int(c), pad, cpos, scale, zc, set_order[s0:s1], row_order[r0:r1], set_of)

    def _squares(self, b, a, e, c, pad, cpos, scale, zc, sets, rows, set_of) -> None:
        """Squares ``a`` to ``e - 1`` (core ``c``): their sets solved, their targets evaluated."""
        k, q, s = self.k, self.q, self.smoothing
        # Only the candidates some set of the chunk uses enter the systems (the core first, as
        # all sets hold it), compacted to the front of each square's list; what is left over at
        # the end of a shorter list is never referenced.
        set_sq = b.square[sets] - a
        nq = e - a
        used = np.zeros((nq, b.cand.shape[1]), bool)
        used[set_sq[:, None], b.colpos[sets]] = True
        used[:, :c] = True
        width = int(used.sum(axis=1).max())
        keep = np.argsort(~used, axis=1, kind="stable")[:, :width]
        newpos = np.cumsum(used, axis=1) - 1
        colpos = newpos[set_sq[:, None], b.colpos[sets]]  # (ns, k), ascending, core first
        centre = b.centre[a:e]
        pts = np.take_along_axis(cpos[a:e], keep[:, :, None], axis=1)
        pm = monomials((pts - centre[:, None, :]) / scale[a:e, None, None], self.degree)  # (nq, width, q)
        kk = kernel_of_squared(self.kernel, squared_within(pts))  # (nq, width, width)
        if s != 0.0:
            diag = np.arange(width)
            kk[:, diag, diag] += s
        z = np.take_along_axis(zc[a:e], keep, axis=1)
        parts = None
        if c >= q:
            sv = np.linalg.svd(pm[:, :c], compute_uv=False)
            if np.all(sv[:, -1] > _UNISOLVENT_RATIO * sv[:, 0]):
                parts = _core_parts(kk, pm, z, c)
        loc = np.empty(b.n_sets, np.int64)
        loc[sets] = np.arange(sets.shape[0])
        coef = np.empty((sets.shape[0], k))
        lam = np.empty((sets.shape[0], q))
        for i in range(0, sets.shape[0], _SET_CHUNK):
            sl = slice(i, i + _SET_CHUNK)
            if parts is None:
                coef[sl], lam[sl] = _direct(kk, pm, z, set_sq[sl], colpos[sl])
            else:
                coef[sl], lam[sl] = _reduced(parts, set_sq[sl], colpos[sl, c:] - c, c)
        # Each target from its own set's weights and polynomial.
        ls = loc[set_of[rows]]
        dist = np.take_along_axis(b.cand_dist[rows], b.colpos[sets[ls]], axis=1)
        dist *= dist
        phi = kernel_of_squared(self.kernel, dist)
        sq_rows = b.row_square[rows]
        tgt = b.target[rows]
        pt = monomials((self.targets[tgt] - b.centre[sq_rows]) / scale[sq_rows, None], self.degree)
        self.out[tgt] = np.einsum("rk,rk->r", phi, coef[ls]) + np.einsum("rq,rq->r", pt, lam[ls])


def _core_parts(kk: np.ndarray, pm: np.ndarray, z: np.ndarray, c: int):
    """Per square, the core's bordered system solved against the other candidates.

    Returns ``G = B^-1 E_N`` (nq, c + q, N), ``y = B^-1 [z_c; 0]`` (nq, c + q), the Schur
    complement ``S`` (nq, N, N) and its right-hand side (nq, N), N = cmax - c.
    """
    nq, cmax, q = pm.shape
    b = bordered_system(kk[:, :c, :c], pm[:, :c])
    en = np.concatenate([kk[:, :c, c:], np.swapaxes(pm[:, c:], 1, 2)], axis=1)  # (nq, c + q, N)
    rhs = np.concatenate([en, np.concatenate([z[:, :c], np.zeros((nq, q))], axis=1)[:, :, None]], axis=2)
    sol = solve_batched(b, rhs)
    g, y = sol[:, :, :-1], sol[:, :, -1]
    schur = kk[:, c:, c:] - np.matmul(np.swapaxes(en, 1, 2), g)
    rz = z[:, c:] - np.einsum("qjn,qj->qn", en, y)
    return g, y, schur, rz


def _reduced(parts, sq: np.ndarray, rest: np.ndarray, c: int) -> tuple[np.ndarray, np.ndarray]:
    """Weights (ns, k) and polynomial coefficients (ns, q) of sets from their rest rows only."""
    g, y, schur, rz = parts
    nq, m, n = g.shape
    # Gathers through flat indices (one index array each, much faster than three broadcast ones).
    row = sq[:, None] * n + rest  # (ns, r): flat (square, candidate) of each rest member
    srr = np.take(schur.reshape(-1), (sq[:, None, None] * n + rest[:, :, None]) * n + rest[:, None, :])
    wr = solve_batched(srr, np.take(rz.reshape(-1), row))
    gt = np.swapaxes(g, 1, 2).reshape(nq * n, m)  # (square, candidate) rows of G'
    gr = np.take(gt, row, axis=0)  # (ns, r, c + q)
    wc = y[sq] - np.einsum("brj,br->bj", gr, wr)
    return np.concatenate([wc[:, :c], wr], axis=1), wc[:, c:]


def _direct(kk: np.ndarray, pm: np.ndarray, z: np.ndarray, sq: np.ndarray,
            colpos: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Weights and polynomial coefficients of sets from their full bordered systems."""
    ns, k = colpos.shape
    q = pm.shape[2]
    a = bordered_system(kk[sq[:, None, None], colpos[:, :, None], colpos[:, None, :]], pm[sq[:, None], colpos])
    rhs = np.zeros((ns, k + q))
    rhs[:, :k] = z[sq[:, None], colpos]
    sol = solve_batched(a, rhs)
    return sol[:, :k], sol[:, k:]
