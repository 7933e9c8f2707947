"""Variogram models, the empirical variogram and the weighted least-squares fit."""

import json
import math

import numpy as np
import pytest

from mapper.errors import MapperError
from mapper.field import Variogram, fit_variogram
from mapper.field.empirical import empirical_variogram
from mapper.field.fit import fit_model


def test_models_at_their_range():
    # Definitions: spherical reaches the sill at the range; exponential and gaussian reach 95 %
    # (1 - exp(-3)) at the practical range.
    h = np.array([0.0, 10.0, 20.0])
    assert np.allclose(Variogram("spherical", sill=2.0, range=10.0)(h), [0, 2, 2])
    for m in ("exponential", "gaussian", "matern"):
        g = Variogram(m, sill=2.0, range=10.0, nu=1.2)(np.array([10.0]))
        assert g[0] == pytest.approx(2.0 * (1 - math.exp(-3.0)), rel=1e-9), m
    # Spherical at half its range: c (1.5 * 0.5 - 0.5 * 0.125) = 0.6875 c (analytic).
    assert Variogram("spherical", sill=1.0, range=10.0)(np.array([5.0]))[0] == pytest.approx(0.6875)
    assert Variogram("linear", slope=0.5, nugget=1.0)(np.array([0.0, 4.0])).tolist() == [0.0, 3.0]


def test_matern_half_is_exponential():
    # The Matérn model with nu = 1/2 is the exponential model (analytic identity).
    h = np.linspace(0, 50, 101)
    a = Variogram("matern", sill=3.0, range=12.0, nugget=0.2, nu=0.5)(h)
    b = Variogram("exponential", sill=3.0, range=12.0, nugget=0.2)(h)
    np.testing.assert_allclose(a, b, rtol=1e-12)


def test_geometric_anisotropy_convention():
    # Major axis at 90 degrees (along +y), ratio 2: a lag of 10 m along y counts as 10 m, along x
    # as 20 m (the minor range is half the major range).
    vg = Variogram("exponential", sill=1.0, range=30.0, angle=90.0, ratio=2.0)
    iso = Variogram("exponential", sill=1.0, range=30.0)
    lag_y = vg.lags(np.array([[0.0, 0.0]]), np.array([[0.0, 10.0]]))[0, 0]
    lag_x = vg.lags(np.array([[0.0, 0.0]]), np.array([[10.0, 0.0]]))[0, 0]
    assert lag_y == pytest.approx(10.0)
    assert lag_x == pytest.approx(20.0)
    assert vg(np.array([lag_x]))[0] == pytest.approx(iso(np.array([20.0]))[0])


def test_to_dict_round_trip_is_json():
    for vg in (Variogram("matern", sill=2.0, range=5.0, nugget=0.1, angle=20, ratio=1.5, nu=2.5),
               Variogram("linear", slope=0.3, nugget=0.0)):
        d = json.loads(json.dumps(vg.to_dict()))
        assert Variogram.from_dict(d) == vg


def test_empirical_matches_direct_computation():
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 20, size=(60, 2))
    z = rng.normal(size=60)
    emp = empirical_variogram(xy, z, n_lags=5, max_lag_m=10.0)
    i, j = np.triu_indices(60, 1)
    d = np.hypot(*(xy[i] - xy[j]).T)
    dz = z[i] - z[j]
    b = np.floor(d / 2.0).astype(int)
    for k in range(5):
        sel = (b == k) & (d < 10.0)
        assert emp.pairs[k] == sel.sum()
        assert emp.gamma[k] == pytest.approx(np.sum(dz[sel] ** 2) / (2 * sel.sum()))
        assert emp.lags_m[k] == pytest.approx(d[sel].mean())
    # Cressie-Hawkins (Cressie 1993 eq. 2.4.12, constants from memory).
    ch = empirical_variogram(xy, z, n_lags=5, max_lag_m=10.0, estimator="cressie")
    sel = (b == 2) & (d < 10.0)
    nn = sel.sum()
    expect = np.mean(np.sqrt(np.abs(dz[sel]))) ** 4 / (2 * (0.457 + 0.494 / nn + 0.045 / nn**2))
    assert ch.gamma[2] == pytest.approx(expect)


def test_directional_variogram_keeps_pairs_in_the_window():
    # Readings on a line along x: every pair is at azimuth 0, none at 90 degrees.
    xy = np.column_stack([np.arange(30.0), np.zeros(30)])
    z = np.arange(30.0)
    along = empirical_variogram(xy, z, n_lags=5, max_lag_m=10.0, direction_deg=180.0)
    assert along.pairs.sum() == sum(30 - k for k in range(1, 10))
    across = empirical_variogram(xy, z, n_lags=5, max_lag_m=10.0, direction_deg=90.0)
    assert across.pairs.sum() == 0


def test_random_pair_sample_is_close_to_all_pairs():
    rng = np.random.default_rng(5)
    xy = rng.uniform(0, 100, size=(1500, 2))
    z = np.sin(xy[:, 0] / 15) + rng.normal(0, 0.2, 1500)
    full = empirical_variogram(xy, z, n_lags=8, max_lag_m=40.0)
    part = empirical_variogram(xy, z, n_lags=8, max_lag_m=40.0, max_pairs=300_000)
    assert part.sampled and not full.sampled
    # Each bin holds thousands of sampled pairs; 5 % covers the sampling error (measured ~1 %).
    np.testing.assert_allclose(part.gamma, full.gamma, rtol=0.05)


def test_fit_recovers_simulated_parameters():
    # Four fields simulated (Cholesky, fixed seeds) with an exponential covariance, sill 4,
    # practical range 30 m, nugget 0.5, on 1 500 points in 200 m x 200 m. Single-realisation fits
    # spread by about +-12 % (sill) and +-35 % (range) over 8 seeds, as expected for a domain of
    # ~7 ranges; the mean of four is held to half of that.
    truth = Variogram("exponential", sill=4.0, range=30.0, nugget=0.5)
    fits = []
    for seed in range(4):
        rng = np.random.default_rng(seed)
        xy = rng.uniform(0, 200, size=(1500, 2))
        c = truth.covariance(truth.lags(xy, xy))
        z = np.linalg.cholesky(c) @ rng.standard_normal(1500)
        f = fit_variogram(xy, z, "exponential", max_lag_m=60.0, n_lags=20)
        assert f.converged and f.r2 > 0.8
        fits.append(f.variogram)
    assert np.mean([v.sill for v in fits]) == pytest.approx(4.0, rel=0.12)
    assert np.mean([v.range for v in fits]) == pytest.approx(30.0, rel=0.2)
    assert np.mean([v.nugget for v in fits]) == pytest.approx(0.5, abs=0.3)


@pytest.mark.parametrize("model", ["spherical", "gaussian", "matern", "linear"])
def test_fit_converges_for_every_model(model):
    rng = np.random.default_rng(2)
    xy = rng.uniform(0, 100, size=(400, 2))
    z = np.sin(xy[:, 0] / 20) * 5 + rng.normal(0, 0.5, 400)
    f = fit_variogram(xy, z, model)
    assert f.converged
    assert f.variogram.model == model


def test_fit_refuses_with_too_few_pairs():
    xy = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [1.0, 1.0]])
    with pytest.raises(MapperError, match="too few pairs"):
        fit_variogram(xy, np.array([1.0, 2.0, 3.0, 4.0]))


def test_fit_with_fixed_nugget():
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 100, size=(300, 2))
    z = np.sin(xy[:, 1] / 15) * 3 + rng.normal(0, 0.3, 300)
    emp = empirical_variogram(xy, z)
    f = fit_model(emp, "spherical", nugget=0.25, weights="pairs")
    assert f.variogram.nugget == 0.25


@pytest.mark.parametrize(("n", "max_pairs", "estimator"), [(300, 5_000_000, "matheron"), (900, 50_000, "cressie")])
def test_several_columns_in_one_pass_equal_each_alone(n, max_pairs, estimator):
    # One pass over the pairs for several value columns must give, bit for bit, what each column
    # gives alone (same pairs, same sums in the same order); all pairs and a sampled subset.
    from mapper.field.empirical import empirical_variograms

    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 40, size=(n, 2))
    cols = [rng.normal(0, 1, n), np.sin(xy[:, 0] / 5) + rng.normal(0, 0.1, n)]
    both = empirical_variograms(xy, cols, n_lags=12, estimator=estimator, max_pairs=max_pairs)
    for col, emp in zip(cols, both, strict=True):
        alone = empirical_variogram(xy, col, n_lags=12, estimator=estimator, max_pairs=max_pairs)
        for field in ("lags_m", "gamma", "pairs", "edges_m"):
            assert np.array_equal(getattr(emp, field), getattr(alone, field))
        assert (emp.variance, emp.sampled) == (alone.variance, alone.sampled)


def test_build_fits_from_the_shared_empirical_variogram_as_from_the_readings():
    # build_field bins the pairs once for all models and both kriging kinds; the fits must be the
    # ones fit_variogram gives from the readings themselves.
    from mapper.field.build import _FIT_MODELS, _empirical, _fit, _plane_residuals
    from mapper.field.repeats import merge_repeats

    rng = np.random.default_rng(8)
    xy = rng.uniform(0, 50, size=(400, 2))
    z = 100 + 10 * np.sin(xy[:, 0] / 9) + 0.3 * xy[:, 1] + rng.normal(0, 1, 400)
    merged = merge_repeats(xy, z)
    emps = _empirical(merged, ["kriging", "universal", "rbf"])
    assert set(emps) == {"kriging", "universal"}
    for kind, zz in (("kriging", merged.values), ("universal", _plane_residuals(merged.xy, merged.values))):
        shared, choice = _fit(merged.xy, zz, merged.values, kind, False, emps[kind])
        own, own_choice = _fit(merged.xy, zz, merged.values, kind, False)
        assert shared.variogram == own.variogram and choice == own_choice
        assert choice["r2"] == {m: fit_variogram(merged.xy, zz, m).r2 for m in _FIT_MODELS}
