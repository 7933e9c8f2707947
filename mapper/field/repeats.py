"""Merging repeat readings taken at one position before any solve."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

#: Positions closer than this are one position, metres (common practice, no source: well below
#: the positioning accuracy of a walked survey).
MERGE_TOL_M = 0.01


@dataclass(frozen=True)
class MergedReadings:
    """Readings with repeats at one position merged into their mean.

    Attributes
    ----------
    xy : ndarray, shape (m, 2)
        Distinct positions (mean of the merged positions), metres.
    values : ndarray, shape (m,)
        Mean reading at each position, V/m.
    counts : ndarray, shape (m,)
        Number of readings merged into each position.
    spread_v_per_m : ndarray, shape (m,)
        Sample standard deviation of the repeats at each position (0 where single), V/m.
    group : ndarray, shape (n,)
        For every input reading, the index of its merged position.
    """

    xy: np.ndarray
    values: np.ndarray
    counts: np.ndarray
    spread_v_per_m: np.ndarray
    group: np.ndarray

    @property
    def n_repeats(self) -> int:
        """Number of readings that were repeats of an earlier position."""
        return int(self.group.shape[0] - self.xy.shape[0])

    @property
    def repeatability_v_per_m(self) -> float | None:
        """Pooled within-position standard deviation of repeats, V/m; None without repeats."""
        dof = int(np.sum(self.counts - 1))
        if dof == 0:
            return None
        ss = np.sum((self.counts - 1) * self.spread_v_per_m**2)
        return float(np.sqrt(ss / dof))


def merge_repeats(xy: np.ndarray, values: np.ndarray, tol_m: float = MERGE_TOL_M) -> MergedReadings:
    """Merge readings whose positions lie within ``tol_m`` of each other (chains included).

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Positions, metres (already checked finite).
    values : ndarray, shape (n,)
        Readings, V/m (already checked finite).
    tol_m : float
        Merge distance, metres.

    Returns
    -------
    MergedReadings
    """
    n = xy.shape[0]
    pairs = cKDTree(xy).query_pairs(tol_m, output_type="ndarray") if n > 1 else np.empty((0, 2), int)
    if pairs.shape[0] == 0:
        return MergedReadings(
            xy=xy.copy(), values=values.copy(), counts=np.ones(n, dtype=int),
            spread_v_per_m=np.zeros(n), group=np.arange(n),
        )
    graph = coo_matrix((np.ones(pairs.shape[0]), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    m, labels = connected_components(graph, directed=False)
    # Number groups in order of first appearance so merged output keeps the input order.
    first = np.full(m, n)
    np.minimum.at(first, labels, np.arange(n))
    order = np.argsort(first)
    rank = np.empty(m, dtype=int)
    rank[order] = np.arange(m)
    group = rank[labels]
    counts = np.bincount(group, minlength=m)
    mx = np.bincount(group, xy[:, 0], m) / counts
    my = np.bincount(group, xy[:, 1], m) / counts
    mean = np.bincount(group, values, m) / counts
    ss = np.bincount(group, (values - mean[group]) ** 2, m)
    spread = np.sqrt(np.where(counts > 1, ss / np.maximum(counts - 1, 1), 0.0))
    return MergedReadings(
        xy=np.column_stack([mx, my]), values=mean, counts=counts, spread_v_per_m=spread, group=group
    )
