"""Dense linear algebra of the field engine.

Batched small solves that survive an occasional singular system (moving neighbourhood), and the
Cholesky helpers of the global kriging solve.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import blas, lapack


def solve_batched(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``a[i] @ x[i] = b[i]`` for a stack; singular members get a least-squares answer.

    Parameters
    ----------
    a : ndarray, shape (B, N, N)
    b : ndarray, shape (B, N) or (B, N, K)

    Returns
    -------
    ndarray, shape of ``b``
    """
    vector = b.ndim == a.ndim - 1
    bb = b[..., None] if vector else b
    try:
        x = np.linalg.solve(a, bb)
    except np.linalg.LinAlgError:
        x = np.empty(bb.shape)
        for i in range(a.shape[0]):
            try:
                x[i] = np.linalg.solve(a[i], bb[i])
            except np.linalg.LinAlgError:
                x[i] = np.linalg.lstsq(a[i], bb[i], rcond=None)[0]
    return x[..., 0] if vector else x


def inv_batched(a: np.ndarray) -> np.ndarray:
    """Inverse of every matrix in a stack (B, N, N); singular members get the pseudo-inverse."""
    try:
        return np.linalg.inv(a)
    except np.linalg.LinAlgError:
        out = np.empty_like(a)
        for i in range(a.shape[0]):
            try:
                out[i] = np.linalg.inv(a[i])
            except np.linalg.LinAlgError:
                out[i] = np.linalg.pinv(a[i])
        return out


def bordered_system(block: np.ndarray, border: np.ndarray) -> np.ndarray:
    """The bordered system ``[[A, P], [P', 0]]`` of one or a stack of neighbourhoods.

    Kriging in variogram form (``A`` the semivariances, ``P`` the drift basis) and RBF
    interpolation (``A`` the kernel matrix with its smoothing, ``P`` the polynomial) share it.

    Parameters
    ----------
    block : ndarray, shape (..., n, n)
        Semivariances (V/m)^2 or kernel values among the data.
    border : ndarray, shape (..., n, p)
        Drift or polynomial basis at the data.

    Returns
    -------
    ndarray, shape (..., n + p, n + p)
    """
    n, p = border.shape[-2:]
    a = np.zeros(block.shape[:-2] + (n + p, n + p))
    a[..., :n, :n] = block
    a[..., :n, n:] = border
    a[..., n:, :n] = np.swapaxes(border, -1, -2)
    return a


def squared_within(pts: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """Squared distances (B, k, k) within each stack member of positions ``pts`` (B, k, 2), m^2.

    ``out`` (B, k, k), when given, receives the result (it may be a strided view).
    """
    px, py = pts[..., 0], pts[..., 1]
    out = np.subtract(px[:, :, None], px[:, None, :], out=out)
    np.multiply(out, out, out=out)
    dy = py[:, :, None] - py[:, None, :]
    dy *= dy
    out += dy
    return out


# ---------------------------------------------------------------------------------- global solves
# The global kriging solve is dominated by one triangular solve with n x (targets) right-hand
# sides. These helpers call LAPACK/BLAS (scipy's OpenBLAS) on Fortran-ordered views so that no
# n x n or n x chunk array is copied or transposed on the way in.


def cholesky_upper(a: np.ndarray) -> np.ndarray | None:
    """Cholesky factor of a symmetric positive definite matrix, computed in its memory.

    Parameters
    ----------
    a : ndarray, shape (n, n), float64, C-contiguous
        Symmetric matrix; overwritten.

    Returns
    -------
    ndarray, shape (n, n), Fortran-ordered, or None
        Upper factor ``U`` with ``U' U = a`` (so ``U.T`` is the lower factor ``L``, C-ordered),
        strictly lower triangle zeroed; None if ``a`` is not numerically positive definite.
    """
    if not a.flags.c_contiguous or a.dtype != np.float64:
        a = np.ascontiguousarray(a, dtype=np.float64)
    # a is symmetric, so a.T (Fortran-ordered, no copy) is the same matrix.
    u, info = lapack.dpotrf(a.T, lower=0, clean=1, overwrite_a=1)
    return u if info == 0 else None


def lower_solve_inplace(u: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``U' y = b`` (forward substitution with the lower factor) in the memory of ``b``.

    Parameters
    ----------
    u : ndarray, shape (n, n), Fortran-ordered
        Upper Cholesky factor from :func:`cholesky_upper`.
    b : ndarray, shape (n,) or (n, c)
        Right-hand sides; overwritten when Fortran-ordered (float64), copied otherwise.

    Returns
    -------
    ndarray, shape of ``b``
        ``y = U'^-1 b``.
    """
    vector = b.ndim == 1
    bb = b[:, None] if vector else b
    y = blas.dtrsm(1.0, u, bb, side=0, lower=0, trans_a=1, diag=0, overwrite_b=1)
    return y[:, 0] if vector else y


def chol_inverse_rows(u: np.ndarray) -> np.ndarray | None:
    """Inverse ``V = U^-1`` of an upper Cholesky factor (upper triangular, Fortran-ordered).

    ``a^-1 = V V'``, so ``diag(a^-1)`` is the row sums of ``V**2`` and ``a^-1 x = V (V' x)``;
    this costs one triangular inversion (n^3/3), half of LAPACK's full ``dpotri``.

    Parameters
    ----------
    u : ndarray, shape (n, n), Fortran-ordered
        Upper Cholesky factor from :func:`cholesky_upper` (not modified).

    Returns
    -------
    ndarray, shape (n, n), or None when the inversion fails.
    """
    v, info = lapack.dtrtri(u, lower=0, overwrite_c=0)
    return v if info == 0 else None
