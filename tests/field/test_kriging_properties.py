"""Exact properties of kriging and agreement between its code paths."""

import numpy as np
import pytest
from scipy.spatial import cKDTree

from mapper.field import OrdinaryKriging, UniversalKriging, Variogram


@pytest.mark.parametrize("cls", [OrdinaryKriging, UniversalKriging])
@pytest.mark.parametrize("neighbors", [None, 10])
def test_exact_at_data_without_nugget(scattered, cls, neighbors):
    xy, z, _ = scattered
    vg = Variogram("spherical", sill=50.0, range=25.0)
    est, std = cls(variogram=vg, neighbors=neighbors).fit(xy, z).predict(xy)
    np.testing.assert_allclose(est, z, atol=1e-8 * np.ptp(z))
    np.testing.assert_allclose(std, 0.0, atol=1e-5 * np.sqrt(vg.total_sill))  # sqrt of ~1e-12 rounding


def test_nugget_is_a_discontinuity_by_default(scattered, aniso_vg):
    xy, z, _ = scattered
    est, std = OrdinaryKriging(variogram=aniso_vg).fit(xy, z).predict(xy[:5])
    np.testing.assert_allclose(est, z[:5], atol=1e-8 * np.ptp(z))
    # Just off a datum the variance jumps to at least the nugget (discontinuity at the origin).
    _, std_off = OrdinaryKriging(variogram=aniso_vg).fit(xy, z).predict(xy[:5] + 1e-4)
    assert np.all(std_off**2 >= aniso_vg.nugget)


def test_variance_far_away_is_total_sill_plus_mean_uncertainty(scattered, aniso_vg):
    # Far from all data the OK variance is C(0) + 1 / (1' C^-1 1) (analytic: weights 1/n-like,
    # the covariance with the target is 0, only the unknown mean's variance remains).
    xy, z, _ = scattered
    kr = OrdinaryKriging(variogram=aniso_vg).fit(xy, z)
    _, std = kr.predict([[1e5, 1e5]])
    c = aniso_vg.covariance(aniso_vg.lags(xy, xy))
    expected = aniso_vg.total_sill + 1.0 / np.sum(np.linalg.solve(c, np.ones(len(z))))
    assert std[0] ** 2 == pytest.approx(expected, rel=1e-10)
    assert aniso_vg.total_sill < std[0] ** 2 < 1.1 * aniso_vg.total_sill


def test_nugget_as_error_removes_the_nugget_from_the_variance(scattered, aniso_vg):
    xy, z, t = scattered
    e1, s1 = OrdinaryKriging(variogram=aniso_vg).fit(xy, z).predict(t)
    e2, s2 = OrdinaryKriging(variogram=aniso_vg, nugget_as_error=True).fit(xy, z).predict(t)
    np.testing.assert_allclose(e1, e2, rtol=1e-12)  # targets off the data: same estimate
    np.testing.assert_allclose(s1**2 - s2**2, aniso_vg.nugget, rtol=1e-9)


@pytest.mark.parametrize("cls", [OrdinaryKriging, UniversalKriging])
def test_moving_neighbourhood_equals_global_solve_on_the_k_nearest(scattered, aniso_vg, cls):
    # Two code paths (batched local solve vs global factorisation) must agree exactly.
    xy, z, t = scattered
    k = 15
    est, std = cls(variogram=aniso_vg, neighbors=k).fit(xy, z).predict(t)
    tree = cKDTree(aniso_vg.transform(xy))
    for i in range(0, len(t), 7):
        _, idx = tree.query(aniso_vg.transform(t[i:i + 1]), k=k)
        e, s = cls(variogram=aniso_vg).fit(xy[idx[0]], z[idx[0]]).predict(t[i:i + 1])
        assert est[i] == pytest.approx(e[0], rel=1e-10)
        assert std[i] == pytest.approx(s[0], rel=1e-8)


@pytest.mark.parametrize("cls", [OrdinaryKriging, UniversalKriging])
@pytest.mark.parametrize("nugget_as_error", [False, True])
def test_grouped_neighbourhoods_equal_one_solve_per_target(scattered, aniso_vg, cls, nugget_as_error):
    # On a dense grid most nodes share their 24 nearest readings with a neighbour, so the grouped
    # solve factors one system per distinct set; it must give every node exactly what refitting
    # on that node's own 24 nearest readings gives (the definition of the moving neighbourhood),
    # also at nodes on a reading (where the nugget belongs to lag 0).
    xy, z, _ = scattered
    gx, gy = np.meshgrid(np.arange(0.125, 50, 0.25), np.arange(0.125, 30, 0.25))
    t = np.vstack([np.column_stack([gx.ravel(), gy.ravel()]), xy[:6]])
    k = 24
    est, std = cls(variogram=aniso_vg, neighbors=k, nugget_as_error=nugget_as_error).fit(xy, z).predict(t)
    tree = cKDTree(aniso_vg.transform(xy))
    _, idx = tree.query(aniso_vg.transform(t), k=k)
    for i in [*range(0, len(t) - 6, 397), *range(len(t) - 6, len(t))]:
        e, s = cls(variogram=aniso_vg, nugget_as_error=nugget_as_error).fit(xy[idx[i]], z[idx[i]]).predict(t[i:i + 1])
        assert est[i] == pytest.approx(e[0], rel=1e-10)
        assert std[i] == pytest.approx(s[0], rel=1e-8)


def test_grouped_neighbourhoods_survive_a_singular_set():
    # Two readings 1e-7 m apart (kept apart: merge distance below that) under a nugget-free
    # gaussian model make some sets' covariance numerically singular; those sets fall back to the
    # bordered solve and every node still gets a finite answer within the data's range.
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 20, size=(60, 2))
    xy[1] = xy[0] + 1e-7
    z = np.sin(xy[:, 0] / 3) * 10
    vg = Variogram("gaussian", sill=20.0, range=15.0)
    gx, gy = np.meshgrid(np.arange(0.25, 20, 0.5), np.arange(0.25, 20, 0.5))
    t = np.column_stack([gx.ravel(), gy.ravel()])
    est, std = OrdinaryKriging(variogram=vg, neighbors=12, merge_tol_m=1e-9).fit(xy, z).predict(t)
    assert np.all(np.isfinite(est)) and np.all(np.isfinite(std))
    assert est.min() > z.min() - np.ptp(z) and est.max() < z.max() + np.ptp(z)


def test_cholesky_and_lu_paths_agree(scattered):
    # A bounded model normally takes the Cholesky path; the same model written as the variogram
    # system (LU path, forced by failing the factorisation) must give the same numbers.
    xy, z, t = scattered
    vg = Variogram("exponential", sill=10.0, range=20.0, nugget=0.5)
    kr = OrdinaryKriging(variogram=vg).fit(xy, z)
    assert kr.chol_ is not None
    e1, s1 = kr.predict(t)
    kr.chol_ = None
    import scipy.linalg as sla

    from mapper.field.kriging import _pairwise

    n = len(kr.values_)
    a = np.zeros((n + 1, n + 1))
    a[:n, :n] = vg(_pairwise(kr.xt_))
    a[:n, n] = a[n, :n] = 1.0
    kr.lu_ = sla.lu_factor(a)
    e2, s2 = kr.predict(t)
    np.testing.assert_allclose(e1, e2, rtol=1e-9)
    np.testing.assert_allclose(s1, s2, rtol=1e-8)


def test_repeat_readings_are_merged_not_singular(scattered, aniso_vg):
    xy, z, t = scattered
    vg = Variogram("gaussian", sill=10.0, range=15.0)  # no nugget: duplicates would be singular
    xy2 = np.vstack([xy, xy[:10], xy[:10] + 0.001])
    z2 = np.concatenate([z, z[:10] + 1.0, z[:10] - 1.0])
    kr = OrdinaryKriging(variogram=vg).fit(xy2, z2)
    assert kr.xy_.shape[0] == len(z)
    np.testing.assert_allclose(kr.values_[:10], z[:10])  # mean of z, z+1, z-1
    # Spread kept as repeatability: each repeated position has readings z-1, z, z+1 (std 1).
    assert kr.merged_.repeatability_v_per_m == pytest.approx(1.0)
    e, s = kr.predict(t)
    assert np.all(np.isfinite(e)) and np.all(np.isfinite(s))
    e_ref, _ = OrdinaryKriging(variogram=vg).fit(kr.xy_, kr.values_).predict(t)
    np.testing.assert_allclose(e, e_ref, rtol=1e-9)
