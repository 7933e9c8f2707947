"""Inverse-distance weighting: the plain baseline."""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from mapper.errors import MapperError
from mapper.field import checks
from mapper.field.estimator import check_fitted
from mapper.field.neighbourhood import nearest_others
from mapper.field.repeats import MERGE_TOL_M, merge_repeats

_BATCH = 65536


class IDW:
    """Inverse-distance weighting over the k nearest readings.

    Parameters
    ----------
    power : float
        Distance exponent (2 is the usual choice, Shepard 1968).
    neighbors : int
        Number of nearest readings used (all if fewer).
    merge_tol_m : float
        Readings closer than this are merged as repeats, metres.
    """

    def __init__(self, power: float = 2.0, neighbors: int = 16, *, merge_tol_m: float = MERGE_TOL_M) -> None:
        # Settings stored as given (checked in fit): the estimator contract of mapper.field.estimator.
        self.power = power
        self.neighbors = neighbors
        self.merge_tol_m = merge_tol_m

    def _check_settings(self) -> None:
        """Refuse settings that cannot work, naming them (called by :meth:`fit`)."""
        checks.positive(self.power, "IDW power", "IDW")
        n = self.neighbors
        if isinstance(n, bool) or not isinstance(n, int | np.integer) or n < 1:
            raise MapperError(f"neighbors must be an integer >= 1, got {n!r}", where="IDW")

    def fit(self, xy, values) -> IDW:
        """Merge repeats and index the positions; returns self."""
        self._check_settings()
        xy, z = checks.readings(xy, values, "IDW.fit")
        self.merged_ = merge_repeats(xy, z, self.merge_tol_m)
        self.xy_, self.values_ = self.merged_.xy, self.merged_.values
        self.tree_ = cKDTree(self.xy_)
        return self

    def _weights_at(self, t: np.ndarray, k: int, exclude: np.ndarray | None = None):
        if exclude is None:
            d, idx = self.tree_.query(t, k=k)
            d, idx = d.reshape(t.shape[0], -1), idx.reshape(t.shape[0], -1)
        else:
            d, idx = nearest_others(self.tree_, exclude, k - 1)
        with np.errstate(divide="ignore"):
            w = 1.0 / d**self.power
        hit = ~np.isfinite(w)
        rows = hit.any(axis=1)
        w[rows] = hit[rows].astype(float)  # a target on a reading takes that reading
        return np.einsum("bk,bk->b", w, self.values_[idx]) / w.sum(axis=1)

    def predict(self, targets) -> tuple[np.ndarray, np.ndarray]:
        """Estimates (V/m) at ``targets`` (m, 2) metres; std is NaN (IDW gives none)."""
        check_fitted(self, "predict")
        t = checks.points(targets, "IDW.predict", "targets")
        k = min(self.neighbors, self.xy_.shape[0])
        est = np.concatenate(
            [self._weights_at(t[s:s + _BATCH], k) for s in range(0, t.shape[0], _BATCH)]
        ) if t.shape[0] else np.empty(0)
        return est, np.full(t.shape[0], np.nan)

    def loo(self, at: np.ndarray | None = None) -> tuple[np.ndarray, None]:
        """Leave-one-out errors (estimate minus reading, V/m) at merged positions ``at``."""
        check_fitted(self, "loo")
        n = self.xy_.shape[0]
        if n < 2:
            raise MapperError("leave-one-out needs at least 2 distinct positions", where="IDW.loo")
        ids = np.arange(n) if at is None else np.asarray(at)
        k = min(self.neighbors + 1, n)
        est = self._weights_at(self.xy_[ids], k, exclude=ids)
        return est - self.values_[ids], None
