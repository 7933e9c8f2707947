"""Robust local outlier check: planted spikes on a smooth field, and flags only."""

from __future__ import annotations

import numpy as np
import pytest

from mapper.corrections import outliers
from mapper.corrections.meter import MeterProfile
from mapper.corrections.outliers import OUTLIER_FLAG, local_outliers
from mapper.corrections.pipeline import correct
from tests.corrections.helpers import reading


def smooth_field(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Made-up smooth field, V/m: a 4 kV/m hotspot, a -2.5 kV/m hollow and a gentle slope.

    The hotspot (Gaussian width 3 m) is sampled at 1.5 m, so near its top neighbouring readings
    differ by up to about 1 kV/m: the check must take that variation as expected.
    """
    return (
        4000.0 * np.exp(-((x - 10) ** 2 + (y - 8) ** 2) / (2 * 3.0**2))
        - 2500.0 * np.exp(-((x - 25) ** 2 + (y - 15) ** 2) / (2 * 4.0**2))
        + 30.0 * x
    )


def _grid() -> tuple[np.ndarray, np.ndarray]:
    gx, gy = np.meshgrid(np.arange(0.0, 36.0, 1.5), np.arange(0.0, 24.0, 1.5))
    return gx.ravel(), gy.ravel()


def test_planted_spikes_found_and_nothing_else_flagged() -> None:
    x, y = _grid()
    rng = np.random.default_rng(11)
    values = smooth_field(x, y) + rng.normal(0.0, 50.0, x.size)  # 50 V/m reading noise
    # Bottom edge (7.5, 0), open floor (18, 3), flank of the hotspot (4.5, 10.5), inside the
    # hollow (25.5, 15), top edge (3, 22.5).
    spikes = np.array([5, 60, 171, 257, 370])
    values[spikes] += np.array([1500.0, -2000.0, 2500.0, -1800.0, 3000.0])
    check = local_outliers(x, y, values)
    assert sorted(np.flatnonzero(check.flagged).tolist()) == spikes.tolist()
    # Margins: the weakest spike (-1.8 kV/m inside the -2.5 kV/m hollow) still scores above
    # 1.5 times the cut-off; no other reading comes within 10 % of it.
    assert check.score[spikes].min() > 1.5 * check.threshold
    assert np.delete(check.score, spikes).max() < 0.9 * check.threshold
    # The same field without noise and without spikes: nothing flagged, even on the hotspot.
    clean = local_outliers(x, y, smooth_field(x, y))
    assert not clean.flagged.any()


def test_hotspot_peak_is_not_an_outlier_but_a_lone_spike_is() -> None:
    x, y = _grid()
    values = smooth_field(x, y)
    peak = int(np.argmax(values))
    assert not local_outliers(x, y, values).flagged[peak]
    values[peak] += 3000.0
    assert local_outliers(x, y, values).flagged[peak]


def test_collinear_transect_and_duplicates() -> None:
    # One walked line, with a repeat reading at the same spot: the plane across the line is
    # undetermined; the check must still work along it.
    x = np.concatenate([np.arange(0.0, 30.0, 1.0), [10.0]])
    y = np.zeros_like(x)
    values = 100.0 + 20.0 * x
    values[-1] = values[10] + 3.0
    values[20] += 900.0
    check = local_outliers(x, y, values)
    assert np.flatnonzero(check.flagged).tolist() == [20]


def test_too_few_readings_not_checked() -> None:
    check = local_outliers(np.arange(4.0), np.zeros(4), np.array([1.0, 2.0, 900.0, 4.0]))
    assert check.neighbours == 0 and not check.flagged.any()


def test_pipeline_flags_but_removes_nothing() -> None:
    x, y = _grid()
    values = smooth_field(x, y)
    values[171] += 2500.0
    readings = [
        reading(i + 1, float(v), i * 0.2, float(a), float(b))
        for i, (a, b, v) in enumerate(zip(x, y, values, strict=True))
    ]
    readings.append(reading(999, 50_000.0, 1.0, 3.0, 3.0, flags=("excluded",)))
    result = correct(readings, {"meter1": MeterProfile(id="meter1")})
    assert len(result.readings) == len(readings)  # nothing removed
    flagged = [r.reading.id for r in result.readings if OUTLIER_FLAG in r.flags]
    assert flagged == [172]  # the excluded 50 kV/m reading is neither checked nor a neighbour
    assert result.readings[171].value_v_per_m == values[171]  # value untouched
    assert [r.reading.id for r in result.flagged_outliers] == [172]


def test_neighbourhood_takes_every_reading_tied_with_the_kth():
    # On a unit square grid the nearest others of an interior point are 4 at distance 1, 4 at
    # sqrt(2) and 4 at 2 (elementary lattice geometry). Asking for 10 ends inside the ring at 2,
    # so all 4 readings at that distance join: 12 neighbours, whatever order a search meets them.
    gx, gy = np.meshgrid(np.arange(9.0), np.arange(9.0))
    xy = np.column_stack([gx.ravel(), gy.ravel()])
    centre = 4 * 9 + 4
    neigh = outliers._neighbour_indices(xy, 10)
    row = neigh[centre][neigh[centre] >= 0]
    d = np.sort(np.hypot(*(xy[row] - xy[centre]).T))
    np.testing.assert_allclose(d, [1] * 4 + [np.sqrt(2)] * 4 + [2] * 4)


@pytest.mark.parametrize("search", ["sweep", "tree"])
@pytest.mark.parametrize("n", [40, 2500])
def test_searches_find_what_an_exhaustive_search_finds(n, search, monkeypatch):
    # Reference: all pairwise distances (numpy, written out here), every reading at most as far as
    # the k-th nearest other one, nearest first, ties by index. Both searches must give it.
    if search == "tree":
        monkeypatch.setattr(outliers, "_SWEEP_MAX", 0)
    rng = np.random.default_rng(n)
    xy = np.round(rng.uniform(0, 2 * np.sqrt(n), size=(n, 2)) / 0.5) * 0.5  # a 0.5 m walk grid: ties
    k = 12
    got = outliers._neighbour_indices(xy, k)
    d2 = ((xy[:, None, :] - xy[None, :, :]) ** 2).sum(axis=2)
    np.fill_diagonal(d2, np.inf)
    kth = np.sort(d2, axis=1)[:, k - 1]
    for i in range(0, n, max(1, n // 200)):
        near = np.flatnonzero(d2[i] <= kth[i])
        want = near[np.lexsort((near, d2[i, near]))]
        np.testing.assert_array_equal(got[i][got[i] >= 0], want)
    assert got.shape[1] > k  # ties did occur


def test_scores_are_symmetric_on_a_symmetric_grid():
    # A field symmetric about x = 10 on a grid symmetric about x = 10: mirrored readings must get
    # the same score (tied neighbours on both sides are all taken, so nothing breaks the symmetry).
    gx, gy = np.meshgrid(np.arange(0.0, 21.0, 1.0), np.arange(0.0, 11.0, 1.0))
    x, y = gx.ravel(), gy.ravel()
    v = 100.0 * np.exp(-((x - 10.0) ** 2 + (y - 5.0) ** 2) / 8.0) + np.cos(y)
    v[(x == 3) & (y == 4)] += 80.0
    v[(x == 17) & (y == 4)] += 80.0
    check = outliers.local_outliers(x, y, v)
    mirror = np.lexsort((y, 20.0 - x))
    np.testing.assert_allclose(check.score[np.lexsort((y, x))], check.score[mirror], rtol=1e-9, atol=1e-12)
