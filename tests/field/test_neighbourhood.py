"""Targets grouped by their set of k nearest readings (mapper.field.neighbourhood)."""

import numpy as np
import pytest
from scipy.spatial import cKDTree

import mapper.field.neighbourhood as nb


def _sets(data, targets, k, squares: bool):
    """Each target's set as a sorted row, by the square search or by one tree query per target."""
    original = nb._worth_squares
    nb._worth_squares = (lambda flat: True) if squares else (lambda flat: False)
    try:
        members, set_of = nb.nearest_sets(data, targets, k)
    finally:
        nb._worth_squares = original
    return np.sort(members[set_of], axis=1)


def test_sets_are_the_k_nearest_of_scipys_tree():
    # scipy's cKDTree is the reference k-nearest search (random positions: no ties).
    rng = np.random.default_rng(11)
    data = rng.uniform([0, 0], [60, 40], size=(700, 2))
    gx, gy = np.meshgrid(np.arange(0.1, 60, 0.2), np.arange(0.1, 40, 0.2))
    targets = np.column_stack([gx.ravel(), gy.ravel()])
    _, idx = cKDTree(data).query(targets, k=20)
    want = np.sort(idx, axis=1)
    np.testing.assert_array_equal(_sets(data, targets, 20, squares=True), want)
    np.testing.assert_array_equal(_sets(data, targets, 20, squares=False), want)
    members, set_of = nb.nearest_sets(data, targets, 20)
    assert members.shape[0] < targets.shape[0] / 2  # dense targets share their sets (20 483 here)


def test_ties_at_the_kth_distance_go_to_the_lower_index_on_both_searches():
    # Readings on a 2 m grid and nodes on a 0.25 m grid: many nodes have several readings at
    # exactly the k-th distance. Any of them makes a valid set of k nearest; both searches must
    # pick the same (the lower data index), so the map does not depend on which search ran.
    gx, gy = np.meshgrid(np.arange(0, 40, 2.0), np.arange(0, 30, 2.0))
    data = np.column_stack([gx.ravel(), gy.ravel()])
    tx, ty = np.meshgrid(np.arange(0, 40, 0.25), np.arange(0, 30, 0.25))
    targets = np.column_stack([tx.ravel(), ty.ravel()])
    k = 12
    a, b = _sets(data, targets, k, squares=True), _sets(data, targets, k, squares=False)
    np.testing.assert_array_equal(a, b)
    d, idx = cKDTree(data).query(targets, k=k + 1)
    tied = d[:, k - 1] == d[:, k]
    assert tied.sum() > 1000
    dist = np.linalg.norm(data[a] - targets[:, None, :], axis=2)
    np.testing.assert_allclose(dist.max(axis=1), d[:, k - 1], rtol=1e-12)  # a valid k-nearest set
    # among the readings at the k-th distance, the chosen ones are those of lowest index
    for i in np.flatnonzero(tied)[::97]:
        ring = np.flatnonzero(np.isclose(np.linalg.norm(data - targets[i], axis=1), d[i, k - 1], rtol=1e-12))
        inside = np.sum(np.linalg.norm(data - targets[i], axis=1) < d[i, k - 1] * (1 - 1e-12))
        np.testing.assert_array_equal(np.intersect1d(a[i], ring), np.sort(ring)[: k - inside])


def test_blocks_cover_every_target_once_with_consistent_structure():
    rng = np.random.default_rng(5)
    data = rng.uniform(0, 30, size=(300, 2))
    gx, gy = np.meshgrid(np.arange(0, 30, 0.1), np.arange(0, 30, 0.1))
    targets = np.column_stack([gx.ravel(), gy.ravel()])
    k = 16
    blocks = nb.map_nearest_sets(data, targets, k, lambda b: b)
    seen = np.concatenate([b.target for b in blocks])
    np.testing.assert_array_equal(np.sort(seen), np.arange(targets.shape[0]))
    for b in blocks[:3]:
        # members are the square's candidates at the set's positions; the core leads every set
        assert np.array_equal(b.members, b.cand[b.square[:, None], b.colpos])
        assert np.all(b.colpos[:, : b.core.min()] == np.arange(b.core.min()))
        np.testing.assert_allclose(
            b.dist(), np.linalg.norm(data[b.members[b.set_of_rows()]] - targets[b.target][:, None, :], axis=2),
            rtol=1e-12, atol=1e-12,
        )


@pytest.mark.parametrize("k", [1, 5])
def test_nearest_others_leave_the_datum_itself_out(k):
    rng = np.random.default_rng(2)
    data = rng.uniform(0, 10, size=(50, 2))
    tree = cKDTree(data)
    ids = np.arange(0, 50, 3)
    d, idx = nb.nearest_others(tree, ids, k)
    assert not np.any(idx == ids[:, None])
    full_d, full_i = tree.query(data[ids], k=k + 1)
    np.testing.assert_array_equal(idx, full_i.reshape(len(ids), -1)[:, 1:])
    np.testing.assert_allclose(d, full_d.reshape(len(ids), -1)[:, 1:])
