"""Closed-form leave-one-out (Dubrule 1983) against brute-force refits."""

import numpy as np
import pytest
from scipy.interpolate import RBFInterpolator

from mapper.field import IDW, RBF, OrdinaryKriging, UniversalKriging, Variogram
from mapper.field.crossval import cv_stats


def _brute(make, xy, z):
    err, std = [], []
    for i in range(len(z)):
        keep = np.arange(len(z)) != i
        e, s = make().fit(xy[keep], z[keep]).predict(xy[i:i + 1])
        err.append(e[0] - z[i])
        std.append(s[0])
    return np.array(err), np.array(std)


@pytest.mark.parametrize(
    ("cls", "vg", "neighbors"),
    [
        (OrdinaryKriging, Variogram("exponential", sill=10.0, range=20.0, nugget=0.5, angle=135, ratio=2), None),
        (UniversalKriging, Variogram("spherical", sill=40.0, range=30.0, nugget=1.0), None),
        (OrdinaryKriging, Variogram("linear", slope=1.5, nugget=0.2), None),
        (OrdinaryKriging, Variogram("exponential", sill=10.0, range=20.0, nugget=0.5), 12),
        (UniversalKriging, Variogram("exponential", sill=10.0, range=20.0, nugget=0.5), 12),
    ],
    ids=["ok-global", "uk-global", "ok-linear", "ok-local", "uk-local"],
)
def test_kriging_loo_equals_refits(scattered, cls, vg, neighbors):
    xy, z, _ = scattered
    xy, z = xy[:40], z[:40]
    err, std = cls(variogram=vg, neighbors=neighbors).fit(xy, z).loo()
    b_err, b_std = _brute(lambda: cls(variogram=vg, neighbors=neighbors), xy, z)
    np.testing.assert_allclose(err, b_err, atol=1e-8 * np.ptp(z))
    np.testing.assert_allclose(std, b_std, rtol=1e-7)


def test_kriging_loo_subset_matches_full(scattered, aniso_vg):
    xy, z, _ = scattered
    kr = OrdinaryKriging(variogram=aniso_vg).fit(xy, z)
    err, std = kr.loo()
    e2, s2 = kr.loo(np.array([3, 9, 20]))
    np.testing.assert_allclose(e2, err[[3, 9, 20]])


@pytest.mark.parametrize("smoothing", [0.0, 5.0])
def test_rbf_global_loo_equals_scipy_refits(scattered, smoothing):
    xy, z, _ = scattered
    err, _ = RBF(smoothing=smoothing).fit(xy, z).loo()
    brute = []
    for i in range(len(z)):
        keep = np.arange(len(z)) != i
        f = RBFInterpolator(xy[keep], z[keep], kernel="thin_plate_spline", smoothing=smoothing)
        brute.append(f(xy[i:i + 1])[0] - z[i])
    np.testing.assert_allclose(err, brute, atol=1e-7 * np.ptp(z))


def test_rbf_local_loo_equals_scipy_neighbour_refits(scattered):
    xy, z, _ = scattered
    err, _ = RBF(smoothing=1.0, neighbors=15).fit(xy, z).loo()
    brute = []
    for i in range(0, len(z), 4):
        keep = np.arange(len(z)) != i
        f = RBFInterpolator(xy[keep], z[keep], kernel="thin_plate_spline", smoothing=1.0, neighbors=15)
        brute.append(f(xy[i:i + 1])[0] - z[i])
    np.testing.assert_allclose(err[::4], brute, atol=1e-7 * np.ptp(z))


def test_rbf_smoothing_chosen_by_loo(scattered):
    xy, z, _ = scattered
    rbf = RBF().fit(xy, z)
    rmse = dict(rbf.smoothing_table_)
    assert rmse[rbf.smoothing_] == min(rmse.values())
    err, _ = rbf.loo()
    assert np.sqrt(np.mean(err**2)) == pytest.approx(rmse[rbf.smoothing_])


def test_idw_loo_equals_refits(scattered):
    xy, z, _ = scattered
    err, _ = IDW(neighbors=8).fit(xy, z).loo()
    b_err, _ = _brute(lambda: IDW(neighbors=8), xy, z)
    np.testing.assert_allclose(err, b_err, atol=1e-10 * np.ptp(z))


def test_cv_stats_definitions():
    s = cv_stats("kriging", np.array([1.0, -1.0, 2.0, 0.0]), np.array([1.0, 1.0, 2.0, 1.0]))
    assert s.rmse_v_per_m == pytest.approx(np.sqrt(6 / 4))
    assert s.mae_v_per_m == pytest.approx(1.0)
    assert s.mean_error_v_per_m == pytest.approx(0.5)
    assert s.mean_standardized == pytest.approx(0.25)
    assert s.rms_standardized == pytest.approx(np.sqrt(3 / 4))


def test_standardized_errors_are_honest_for_a_simulated_field():
    # A field simulated with the very covariance used for kriging: standardized LOO errors have
    # mean ~0 and RMS ~1 (exact in expectation). With 300 points the RMS sampling error is about
    # 1/sqrt(2*300) = 0.04, so 0.85..1.15 is a ~3.5 sigma band.
    rng = np.random.default_rng(11)
    xy = rng.uniform(0, 100, size=(300, 2))
    vg = Variogram("exponential", sill=4.0, range=30.0, nugget=0.2)
    c = vg.covariance(vg.lags(xy, xy))
    z = 50 + np.linalg.cholesky(c) @ rng.standard_normal(300)
    err, std = OrdinaryKriging(variogram=vg).fit(xy, z).loo()
    s = cv_stats("kriging", err, std)
    assert abs(s.mean_standardized) < 0.2
    assert 0.85 < s.rms_standardized < 1.15
