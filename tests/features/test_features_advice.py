"""Sampling advice: where one more reading would most change a decision."""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from scipy.spatial import cKDTree

from mapper.errors import MapperError
from mapper.features import advise_sampling, exceedance_probability, walkable_area
from tests.features.features_analytic import (
    asset,
    charge_for_peak,
    grid_over,
    point_charge_ez,
    reading,
    site,
)

T = 125 / 0.0254  # 125 V/in in V/m
OUTLINE = shapely.box(0.0, 0.0, 12.0, 8.0)
RACK = "POLYGON ((4.2 5.2, 5.8 5.2, 5.8 6.8, 4.2 6.8, 4.2 5.2))"
Q = charge_for_peak(20e3, 1.0)


def _field(X, Y):
    # A charge over the floor near the west end (method of images, Griffiths sec. 3.2.1).
    return point_charge_ez(X, Y, Q, 3.0, 4.0, 1.0)


def _readings():
    # Readings on a 1 m grid over the west half only (x <= 6); the east half is a large gap.
    pts = [(x, y) for x in np.arange(0.5, 6.0, 1.0) for y in np.arange(0.5, 8.0, 1.0)]
    pts = [(x, y) for x, y in pts if not shapely.from_wkt(RACK).contains(shapely.Point(x, y))]
    return [reading(i, x, y, _field(x, y)) for i, (x, y) in enumerate(pts, start=1)]


def _std_from(readings):
    # A stand-in for the kriging std: zero at a reading, rising to a sill of 1.5 kV/m with the
    # distance to the nearest reading (exponential model, practical range 3 m).
    tree = cKDTree([(r.reading.x, r.reading.y) for r in readings])

    def std(X, Y):
        d = tree.query(np.column_stack([X.ravel(), Y.ravel()]))[0].reshape(X.shape)
        return 1500.0 * (1.0 - np.exp(-d))

    return std


def test_suggestions_are_ranked_walkable_and_spread():
    rs = _readings()
    s = site(OUTLINE, assets=[asset("rack", "rack", RACK, walkable=False)])
    grid = grid_over(OUTLINE, 0.1, _field, std=_std_from(rs))
    sug = advise_sampling(grid, s, rs, T, count=12)
    assert [g.rank for g in sug] == list(range(1, len(sug) + 1))
    walk = walkable_area(s)
    assert walk.area == pytest.approx(OUTLINE.area - 1.6 * 1.6)
    for g in sug:
        assert walk.contains(shapely.Point(g.x, g.y))
    decision = [g for g in sug if g.reason == "decision"]
    gaps = [g for g in sug if g.reason == "gap"]
    assert decision and gaps
    # Decisions come first, each with 0.2 <= P <= 0.8.
    assert sug[: len(decision)] == tuple(decision)
    for g in decision:
        assert 0.2 <= g.p_exceed <= 0.8
        p = exceedance_probability(g.estimate_v_per_m, g.std_v_per_m, T)
        assert float(p) == pytest.approx(g.p_exceed, rel=1e-12)
    # Ranked by std * 4 P (1 - P): uncertainty weighted by how undecided the place is.
    scores = [g.std_v_per_m * 4 * g.p_exceed * (1 - g.p_exceed) for g in decision]
    assert scores == sorted(scores, reverse=True)
    # The undecided places ring the hotspot (|E| near t at 1.24 m from the foot at (3, 4)).
    for g in decision:
        assert 0.8 < np.hypot(g.x - 3.0, g.y - 4.0) < 1.8
    # Gap places fill the unsampled east half, farthest first.
    for g in gaps:
        assert g.x > 6.0 and g.gap_m > 1.5 * 1.0  # usual spacing is 1 m
    # No two suggestions closer than the separation (default: the 1 m reading spacing).
    xy = np.array([(g.x, g.y) for g in sug])
    d = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    assert d[np.triu_indices(len(sug), 1)].min() >= 1.0 - 1e-9


def test_suggestions_snap_to_free_walkable_planned_points():
    rs = _readings()
    s = site(OUTLINE, assets=[asset("rack", "rack", RACK, walkable=False)])
    grid = grid_over(OUTLINE, 0.1, _field, std=_std_from(rs))
    planned = [
        (f"R{j}C{i}", x, y)
        for i, x in enumerate(np.arange(0.25, 12, 0.5))
        for j, y in enumerate(np.arange(0.25, 8, 0.5))
    ]
    sug = advise_sampling(grid, s, rs, T, count=8, planned=planned)
    by_label = {p[0]: (p[1], p[2]) for p in planned}
    labels = [g.point for g in sug]
    assert all(lbl is not None for lbl in labels)
    assert len(set(labels)) == len(labels)
    for g in sug:
        assert (g.x, g.y) == by_label[g.point]
        assert not shapely.from_wkt(RACK).contains(shapely.Point(g.x, g.y))


def test_without_std_only_gaps_are_suggested():
    rs = _readings()
    grid = grid_over(OUTLINE, 0.2, _field)
    sug = advise_sampling(grid, site(OUTLINE), rs, T, count=5)
    assert sug and all(g.reason == "gap" and g.p_exceed is None for g in sug)
    # Farthest-point order: each proposal is the node farthest from the readings and the
    # earlier proposals, among nodes at least half a spacing (0.5 m) from the walls.
    xx, yy = np.meshgrid(grid.x, grid.y)
    ok = np.isfinite(grid.estimate) & (np.minimum.reduce([xx, yy, 12 - xx, 8 - yy]) >= 0.5)
    known = [(r.reading.x, r.reading.y) for r in rs]
    for g in sug:
        far = cKDTree(known).query(np.column_stack([xx[ok], yy[ok]]))[0]
        assert cKDTree(known).query((g.x, g.y))[0] == pytest.approx(far.max(), abs=1e-9)
        known.append((g.x, g.y))


def test_a_well_sampled_decided_site_needs_nothing_more():
    rs = [
        reading(i, x, y, 10.0)
        for i, (x, y) in enumerate(
            [(x, y) for x in np.arange(0.5, 12, 1.0) for y in np.arange(0.5, 8, 1.0)], start=1
        )
    ]
    grid = grid_over(OUTLINE, 0.25, lambda X, Y: 10.0 + 0 * X, std=50.0)
    assert advise_sampling(grid, site(OUTLINE), rs, T) == ()


def test_bad_window_is_refused():
    grid = grid_over(OUTLINE, 0.5, _field, std=100.0)
    with pytest.raises(MapperError, match="probability window"):
        advise_sampling(grid, site(OUTLINE), [], T, p_window=(0.8, 0.2))


def test_a_poorly_determined_source_gets_a_reading_beside_it_first():
    # A flat quiet field with one physical-model source whose charge is known only to +-80 %
    # (invented inventory row): the first suggestion is the walkable node nearest to it.
    import shapely as _shapely

    from mapper.features.advice import advise_sampling as _advise
    from mapper.field import FieldSettings, PhysicsSettings, SourceSummary
    from mapper.field.model import FieldGrid as _Grid
    from mapper.site.model import Site as _Site

    x = np.arange(0.25, 20, 0.5)
    y = np.arange(0.25, 10, 0.5)
    est = np.full((y.size, x.size), 50.0)
    src = {"kind": "point", "asset": None, "status": "unlisted", "charge_c": 1e-8, "charge_std_c": 8e-9,
           "height_m": 0.3, "height_std_m": 0.2, "peak_v_per_m": 900.0, "position_std_m": 0.5,
           "wkt": "POINT (13.1 7.2)"}
    physics = PhysicsSettings(sources=(SourceSummary(**src),), background_v_per_m=50.0,
                              background_gradient_v_per_m2=(0.0, 0.0), noise_floor_v_per_m=5.0, noise_share=0.0,
                              meter_height_m=1.0, residual="none")
    settings = FieldSettings(estimator=physics, cell_m=0.5, n_readings=0, n_positions=0, repeatability_v_per_m=None,
                             data_spacing_m=0.0)
    grid = _Grid(x, y, est, np.full(est.shape, 5.0), "physics", settings)
    site = _Site("flat", _shapely.box(0, 0, 20, 10))
    out = _advise(grid, site, [], 4921.3)
    assert out and out[0].reason == "source" and "S1" in out[0].why
    assert np.hypot(out[0].x - 13.1, out[0].y - 7.2) <= 0.5
