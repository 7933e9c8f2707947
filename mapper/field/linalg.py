"""Batched small dense solves that survive an occasional singular system."""

from __future__ import annotations

import numpy as np


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
