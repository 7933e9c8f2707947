"""Moving-neighbourhood RBF prediction against scipy's RBFInterpolator (reference library).

Our prediction solves one system per distinct set of k nearest readings, with the readings all
sets of a square share eliminated once; scipy solves each neighbourhood on its own. Both are the
same interpolant, so they must agree to rounding.
"""

import numpy as np
import pytest
from scipy.interpolate import RBFInterpolator

from mapper.field import RBF
from mapper.field.rbf import _cv_subset, kernel
from mapper.field.rbf_local import kernel_of_squared, predict_sets


def _survey(n, seed=3):
    rng = np.random.default_rng(seed)
    xy = rng.uniform([0, 0], [60, 40], size=(n, 2))
    z = 200 + 30 * np.sin(xy[:, 0] / 7) * np.cos(xy[:, 1] / 9) + rng.normal(0, 3, size=n)
    return xy, z


def _dense_grid(nx, ny):
    gx, gy = np.meshgrid(np.linspace(-2, 62, nx), np.linspace(-2, 42, ny))
    return np.column_stack([gx.ravel(), gy.ravel()])


@pytest.mark.parametrize(("kern", "degree", "k", "smoothing"), [
    ("thin_plate_spline", 1, 64, 0.0),
    ("thin_plate_spline", 1, 20, 5.0),
    ("cubic", 1, 24, 0.5),
    ("quintic", 2, 30, 0.0),
    ("linear", 0, 12, 0.1),
])
def test_sets_match_scipy_per_neighbourhood_solves(kern, degree, k, smoothing):
    xy, z = _survey(600)
    t = _dense_grid(150, 100)  # 15 000 targets, many sharing a set, some outside the readings
    ours = predict_sets(xy, z, t, k, kern, degree, smoothing)
    ref = RBFInterpolator(xy, z, neighbors=k, kernel=kern, degree=degree, smoothing=smoothing)(t)
    # Same solution, other rounding path: agreement far below any meter's resolution.
    assert np.max(np.abs(ours - ref)) <= 1e-9 * np.ptp(z)


def test_rbf_estimator_local_predict_matches_scipy():
    xy, z = _survey(1500, seed=5)
    t = _dense_grid(120, 80)
    rbf = RBF(neighbors=64).fit(xy, z)
    est, std = rbf.predict(t)
    ref = RBFInterpolator(rbf.xy_, rbf.values_, neighbors=64, smoothing=rbf.smoothing_)(t)
    assert np.max(np.abs(est - ref)) <= 1e-9 * np.ptp(z)
    assert np.isnan(std).all()


def test_targets_on_readings_reproduce_them_without_smoothing():
    xy, z = _survey(300)
    ours = predict_sets(xy, z, xy, 16, "thin_plate_spline", 1, 0.0)
    assert np.max(np.abs(ours - z)) <= 1e-9 * np.ptp(z)


@pytest.mark.parametrize("name", ["thin_plate_spline", "cubic", "quintic", "linear"])
def test_kernel_from_squared_distances_is_scipys_kernel(name):
    r = np.array([0.0, 1e-3, 0.5, 1.0, 2.0, 37.5])
    assert np.allclose(kernel_of_squared(name, r * r), kernel(name, r), rtol=1e-13, atol=1e-300)


def test_local_loo_reused_from_the_smoothing_choice_equals_a_fresh_solve():
    xy, z = _survey(2500, seed=9)
    rbf = RBF(neighbors=20).fit(xy, z)
    at = _cv_subset(rbf.xy_.shape[0])  # the positions the smoothing was chosen on
    reused, _ = rbf.loo(at)
    assert np.sqrt(np.mean(reused**2)) == pytest.approx(dict(rbf.smoothing_table_)[rbf.smoothing_], rel=1e-12)
    fresh, _ = RBF(smoothing=rbf.smoothing_, neighbors=20).fit(xy, z).loo(at)
    assert np.max(np.abs(reused - fresh)) <= 1e-9 * np.ptp(z)
