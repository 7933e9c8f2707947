"""The physical field model against analytic fields of charges over a grounded plane.

Every field here is the closed form of the method of images (Griffiths, Introduction to
Electrodynamics, 4th ed., sec. 3.2.1: a charge q at height h over a grounded plane and its image
-q at depth h), evaluated by :func:`mapper.physics.images.field_z`, which the foundation tests
check against that closed form. Surveys are sampled as sparsely as people walk them (2-3 m).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import shapely

from mapper.corrections.pipeline import correct_survey
from mapper.errors import MapperError
from mapper.field import build_field
from mapper.field.inputs import field_heights, field_inputs
from mapper.field.physical import PhysicalModel, SourceSeed, seeds_from_site
from mapper.physics.images import LineCharge, PointCharge, field_z
from mapper.survey.store import Survey
from tests.export.helpers import north_hall_survey

BELT = shapely.LineString([(5, 6), (25, 6)])
TRUE_POINT = PointCharge(28.3, 16.7, 2.2, 3e-7)
TRUE_LINE = LineCharge(5, 6, 25, 6, 2.4, -1e-7)  # -2 µC in all over 20 m


def _layout(spacing: float = 2.5):
    xs, ys = np.meshgrid(np.arange(1, 40, spacing), np.arange(1, 25, spacing))
    return np.column_stack([xs.ravel(), ys.ravel()])


def _by_kind(model, kind):
    return [s for s in model.sources_ if s.kind == kind]


def test_noise_free_point_and_line_are_recovered():
    # Issue's tolerance: within 0.1 m and 2 % from noise-free readings at 1 m meter height.
    xy = _layout()
    v = field_z([TRUE_POINT, TRUE_LINE], xy[:, 0], xy[:, 1], 1.0)
    m = PhysicalModel([SourceSeed("belt", BELT)], bounds=(0, 0, 40, 25)).fit(xy, v)
    (point,) = _by_kind(m, "point")
    (line,) = _by_kind(m, "line")
    assert point.geometry.distance(shapely.Point(TRUE_POINT.x, TRUE_POINT.y)) < 0.1
    assert point.height_m == pytest.approx(TRUE_POINT.h, abs=0.1)
    assert point.charge_c == pytest.approx(TRUE_POINT.q, rel=0.02)
    assert line.asset == "belt"
    assert line.height_m == pytest.approx(TRUE_LINE.h, abs=0.1)
    assert line.charge_c == pytest.approx(TRUE_LINE.density_c_per_m * 20.0, rel=0.02)
    assert len(m.sources_) == 2  # nothing invented in a noise-free fit


def test_given_asset_height_is_used():
    xy = _layout()
    v = field_z([TRUE_LINE], xy[:, 0], xy[:, 1], 1.0)
    m = PhysicalModel([SourceSeed("belt", BELT, height_m=2.4)], search=False).fit(xy, v)
    (line,) = m.sources_
    assert line.height_m == 2.4 and line.height_std_m == 0.0
    assert line.charge_c == pytest.approx(-2e-6, rel=1e-3)


def test_three_percent_noise_charge_within_its_standard_error_about_95_percent():
    # 3 % of each reading plus a 20 V/m floor (invented meter); the charge's reported standard
    # error must cover the truth about 95 % of the time (normal theory: 1.96 sigma).
    xy = _layout()
    clean = field_z([TRUE_POINT, TRUE_LINE], xy[:, 0], xy[:, 1], 1.0)
    hits, trials = 0, 0
    for seed in range(24):
        rng = np.random.default_rng(seed)
        v = clean * (1 + 0.03 * rng.standard_normal(clean.shape)) + 20 * rng.standard_normal(clean.shape)
        m = PhysicalModel([SourceSeed("belt", BELT)], bounds=(0, 0, 40, 25)).fit(xy, v)
        for s, truth in ((_by_kind(m, "line"), -2e-6), ([p for p in _by_kind(m, "point")
                                                         if p.geometry.distance(shapely.Point(28.3, 16.7)) < 1], 3e-7)):
            if s:
                trials += 1
                hits += abs(s[0].charge_c - truth) <= 1.96 * s[0].charge_std_c
    assert trials >= 44  # both sources found in nearly every trial
    # 48 Bernoulli(0.95) trials: 2.5 % quantile about 0.85; a loose band both ways.
    assert 0.80 <= hits / trials <= 1.0


def test_standardised_loo_errors_honest_near_sources_and_elsewhere():
    # Simulated surveys with known sources at 2.5 m spacing; the standardised leave-one-out
    # errors' RMS must lie in 0.8-1.25 both near sources and in quiet areas (issue's band).
    xy = _layout()
    clean = field_z([TRUE_POINT, TRUE_LINE], xy[:, 0], xy[:, 1], 1.0)
    near_z, quiet_z = [], []
    for seed in range(6):
        rng = np.random.default_rng(100 + seed)
        v = clean * (1 + 0.03 * rng.standard_normal(clean.shape)) + 20 * rng.standard_normal(clean.shape)
        m = PhysicalModel([SourceSeed("belt", BELT)], bounds=(0, 0, 40, 25)).fit(xy, v)
        err, std = m.loo()
        near = m.near_sources()
        near_z.append(err[near] / std[near])
        quiet_z.append(err[~near] / std[~near])
    rms_near = float(np.sqrt(np.mean(np.concatenate(near_z) ** 2)))
    rms_quiet = float(np.sqrt(np.mean(np.concatenate(quiet_z) ** 2)))
    assert 0.8 <= rms_near <= 1.25, rms_near
    assert 0.8 <= rms_quiet <= 1.25, rms_quiet


def test_field_at_another_height_matches_the_closed_form():
    xy = _layout()
    v = field_z([TRUE_POINT, TRUE_LINE], xy[:, 0], xy[:, 1], 1.0)
    box = shapely.box(0, 0, 40, 25)
    g = build_field(xy, v, box, method="physics", seeds=(SourceSeed("belt", BELT),), height_m=0.7, cell_m=1.0)
    mx, my = np.meshgrid(g.x, g.y)
    truth = field_z([TRUE_POINT, TRUE_LINE], mx, my, 0.7)
    inside = g.inside
    # Tolerance: 1 % of the largest field (the fitted parameters are exact to ~1e-9; the margin
    # covers the quadrature of a 20 m line evaluated at grid nodes; our own choice).
    assert np.max(np.abs(g.estimate[inside] - truth[inside])) < 0.01 * np.max(np.abs(truth))
    assert g.settings.physics.prediction_height_m == 0.7 == g.settings.prediction_height_m
    json.dumps(g.settings.to_dict())


def test_height_needs_the_physical_model_and_a_positive_height():
    xy = _layout()
    v = field_z([TRUE_POINT], xy[:, 0], xy[:, 1], 1.0)
    box = shapely.box(0, 0, 40, 25)
    with pytest.raises(MapperError, match="physical model"):
        build_field(xy, v, box, method="kriging", height_m=0.7)
    with pytest.raises(MapperError, match="height"):
        build_field(xy, v, box, method="physics", height_m=-0.5)


def test_too_few_readings_for_a_source_search_is_one_clear_error():
    xy = _layout()[:6]
    with pytest.raises(MapperError, match="8 or more distinct positions"):
        PhysicalModel().fit(xy, np.arange(6.0))


@pytest.fixture(scope="module")
def hall_inputs(tmp_path_factory):
    path = north_hall_survey(tmp_path_factory.mktemp("phys_hall"))
    with Survey.open(path) as survey:
        corrected = correct_survey(survey)
        site = survey.site
    xy, v = field_inputs(corrected.readings)
    return site, xy, v, field_heights(corrected.readings)


@pytest.mark.parametrize("sparse", [False, True])
def test_sample_hall_physics_beats_data_only_methods_and_finds_every_source(hall_inputs, sparse):
    site, xy, v, hz = hall_inputs
    if sparse:  # every other row of readings: 4 m between rows, as a hurried walk would leave
        rows = np.unique(np.round(xy[:, 1], 1))
        keep = np.isin(np.round(xy[:, 1], 1), rows[::2])
        xy, v, hz = xy[keep], v[keep], hz[keep]
    g = build_field(xy, v, site.outline, heights_m=hz, seeds=seeds_from_site(site))
    rmse = {c.method: c.rmse_v_per_m for c in g.cv_table}
    best_data_only = min(r for k, r in rmse.items() if k != "physics")
    assert g.method == "physics"
    assert rmse["physics"] < best_data_only
    sources = g.settings.physics.sources
    # The sample's sources (sample_sites/generate.py): belt 1 overhead at 2.4 m, the
    # stretch-wrap film carriage near (42.8, 11.2), the tote stack's charged top layer.
    assert any(s.asset == "belt 1" for s in sources)
    assert any(shapely.from_wkt(s.wkt).distance(shapely.Point(42.8, 11.2)) < 1.0 for s in sources)
    totes = shapely.box(17, 21, 21, 23)
    assert any(shapely.from_wkt(s.wkt).distance(totes) < 1.0 for s in sources)


def _rss(a, b):
    coef, *_ = np.linalg.lstsq(a, b, rcond=None)
    return float(np.sum((b - a @ coef) ** 2))


def test_candidate_gains_are_the_least_squares_drop_of_each_candidate():
    # Reference: numpy.linalg.lstsq, each candidate appended to the design and the residual sum
    # of squares recomputed; the gain is the drop (the textbook definition of greedy forward
    # selection, e.g. Miller, Subset Selection in Regression, 2nd ed., sec. 3.2).
    from mapper.field.physical import SPAN_TOL, _gains, _weighted_norms2

    rng = np.random.default_rng(4)
    n = 400
    sigma = rng.uniform(0.5, 2.0, n)
    design = np.column_stack([np.ones(n), rng.standard_normal((n, 3))])
    gc = rng.standard_normal((n, 6)) * 1e6
    gc[:, 1] = design[:, 1] * 3e6 - design[:, 2] * 1e6  # in the design's span
    gc[:, 2] = gc[:, 1] + 10.0 * rng.standard_normal(n)  # almost in it: the explicit projection
    gc[:, 3] = gc[:, 1] + 1e5 * rng.standard_normal(n)  # near it, above the tolerance
    # readings with a share of candidates 0, 2 and 3 outside the design's span
    values = (design @ [1.0, 2.0, -1.0, 0.5] + 1e-6 * gc[:, 0] + 0.2 * (gc[:, 2] - gc[:, 1])
              + 2e-5 * (gc[:, 3] - gc[:, 1]) + rng.standard_normal(n))
    a = design / sigma[:, None]
    q, _ = np.linalg.qr(a / np.linalg.norm(a, axis=0))
    r = values / sigma
    r = r - q @ (q.T @ r)
    full2 = _weighted_norms2(gc, sigma)
    np.testing.assert_allclose(full2, np.sum((gc / sigma[:, None]) ** 2, axis=0), rtol=1e-13)
    gain = _gains(gc, sigma, q, r, full2)
    base = _rss(a, values / sigma)
    for k in range(gc.shape[1]):
        want = base - _rss(np.column_stack([a, gc[:, k] / sigma]), values / sigma)
        if k == 1:
            assert gain[k] == 0.0
        else:
            assert gain[k] == pytest.approx(want, rel=1e-6, abs=1e-9 * base)
            assert k > 3 or want > 1e-2 * base  # these explain a share of the residual
    # the near-span candidates: one on each side of the switch to the explicit projection
    g = gc / sigma[:, None]
    share = np.sum((g - q @ (q.T @ g)) ** 2, axis=0) / full2
    assert 1e-12 < share[2] < SPAN_TOL < share[3]
    # and the same numbers as projecting every candidate explicitly
    proj = g - q @ (q.T @ g)
    norm2 = np.sum(proj * proj, axis=0)
    explicit = np.where(norm2 > 1e-12 * norm2.max(), (proj.T @ r) ** 2 / np.maximum(norm2, 1e-300), 0.0)
    np.testing.assert_allclose(gain, explicit, rtol=1e-9, atol=0)
