"""Hotspots on analytic fields, exceedance probability and the probable-exceedance outline."""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from scipy.optimize import brentq
from scipy.stats import norm

from mapper.errors import MapperError
from mapper.features import (
    critical_magnitude,
    exceedance_probability,
    find_hotspots,
    probable_exceedance,
    zone_hotspots,
)
from mapper.field.model import FieldGrid
from tests.features.features_analytic import (
    asset,
    charge_for_peak,
    grid_over,
    plane_field_closed_form,
    point_charge_ez,
    reading,
    site,
    zone,
)

#: 125 V/in in V/m, 1 in = 0.0254 m exactly (international yard and pound agreement, 1959).
T_125_V_PER_IN = 125 / 0.0254
OUTLINE = shapely.box(0.0, 0.0, 10.0, 8.0)
FOOT = (4.03, 3.97)  # deliberately off the grid nodes
HEIGHT_M = 1.0


def _disc_radius(q_c, h_m, z_m, t):
    """Radius where |E_z| = t, by a root-finder on the closed-form image field."""
    return brentq(
        lambda r: abs(point_charge_ez(FOOT[0] + r, FOOT[1], q_c, *FOOT, h_m, z_m)) - t, 0.0, 20.0
    )


def test_image_field_matches_griffiths_closed_form_at_the_plane():
    # Griffiths, Introduction to Electrodynamics, sec. 3.2.1: sigma = -q h / (2 pi (r^2+h^2)^1.5),
    # E = sigma / eps0 just above the grounded plane. Our superposition must reduce to it.
    q = charge_for_peak(20e3, HEIGHT_M)
    r = np.linspace(0, 5, 11)
    assert np.allclose(
        point_charge_ez(FOOT[0] + r, FOOT[1], q, *FOOT, HEIGHT_M),
        plane_field_closed_form(r, q, HEIGHT_M),
        rtol=1e-12,
    )


@pytest.mark.parametrize("cell_m", [0.1, 0.25])
@pytest.mark.parametrize("sign", [1.0, -1.0])
@pytest.mark.parametrize("meter_height_m", [0.0, 0.3])
def test_point_charge_hotspot_is_the_disc_of_the_closed_form(cell_m, sign, meter_height_m):
    # Method of images (Griffiths sec. 3.2.1): |E_z| decreases with r, so |E| >= t is a disc
    # whose radius we get with brentq from the closed-form field.
    q = sign * charge_for_peak(20e3, HEIGHT_M)
    grid = grid_over(
        OUTLINE, cell_m, lambda X, Y: point_charge_ez(X, Y, q, *FOOT, HEIGHT_M, meter_height_m)
    )
    hs = find_hotspots(grid, site(OUTLINE), T_125_V_PER_IN)
    assert len(hs) == 1
    (h,) = hs
    # A positive charge pulls field lines down into the floor: negative E_z, negative polarity.
    assert h.polarity == ("negative" if sign > 0 else "positive")
    radius = _disc_radius(q, HEIGHT_M, meter_height_m, T_125_V_PER_IN)
    disc = shapely.Point(FOOT).buffer(radius, quad_segs=512)
    # Marching squares interpolates linearly along cell edges; for this smooth field the
    # boundary error is second order in the spacing (measured: cell/50 at 0.1 m, cell/20 at
    # 0.25 m). A tenth of a cell is the tolerance.
    assert h.geometry.hausdorff_distance(disc) <= 0.1 * cell_m
    assert h.area_m2 == pytest.approx(disc.area, abs=2 * np.pi * radius * 0.1 * cell_m)
    # Peak: the node nearest the charge's foot (the field magnitude falls off radially).
    nearest_x = grid.x[np.argmin(np.abs(grid.x - FOOT[0]))]
    nearest_y = grid.y[np.argmin(np.abs(grid.y - FOOT[1]))]
    assert (h.peak_x, h.peak_y) == (nearest_x, nearest_y)
    assert np.hypot(h.peak_x - FOOT[0], h.peak_y - FOOT[1]) <= cell_m / np.sqrt(2)
    expected_peak = point_charge_ez(nearest_x, nearest_y, q, *FOOT, HEIGHT_M, meter_height_m)
    assert h.peak_v_per_m == pytest.approx(expected_peak, rel=1e-12)
    assert np.sign(h.peak_v_per_m) == np.sign(h.mean_v_per_m) == (-sign)
    assert T_125_V_PER_IN <= abs(h.mean_v_per_m) <= abs(h.peak_v_per_m)
    assert h.status == "suspected"  # no readings given
    assert h.p_exceed_max is None  # the grid has no standard deviation


def test_both_polarities_are_separate_hotspots_ranked_by_peak():
    q = charge_for_peak(20e3, HEIGHT_M)

    def field(X, Y):
        return point_charge_ez(X, Y, q, 2.5, 4.0, HEIGHT_M) + point_charge_ez(
            X, Y, -0.5 * q, 7.5, 4.0, HEIGHT_M
        )

    hs = find_hotspots(grid_over(OUTLINE, 0.1, field), site(OUTLINE), T_125_V_PER_IN)
    assert [h.id for h in hs] == ["H1", "H2"]
    assert [h.polarity for h in hs] == ["negative", "positive"]
    assert abs(hs[0].peak_v_per_m) > abs(hs[1].peak_v_per_m)
    assert hs[0].peak_x < 5 < hs[1].peak_x


def test_status_nearest_asset_and_zones():
    q = charge_for_peak(20e3, HEIGHT_M)
    s = site(
        OUTLINE,
        assets=[
            asset("bench 1", "workstation", "POLYGON ((7 3, 8 3, 8 4, 7 4, 7 3))"),
            asset("belt", "conveyor", "LINESTRING (1 1.5, 9 1.5)"),
        ],
        zones=[
            zone("EPA", "POLYGON ((4 3, 9 3, 9 7, 4 7, 4 3))"),
            zone("far", "POLYGON ((8 7, 9 7, 9 8, 8 8, 8 7))"),
        ],
    )
    grid = grid_over(OUTLINE, 0.1, lambda X, Y: point_charge_ez(X, Y, q, *FOOT, HEIGHT_M))
    radius = _disc_radius(q, HEIGHT_M, 0.0, T_125_V_PER_IN)
    readings = [
        reading(1, *FOOT, point_charge_ez(*FOOT, q, *FOOT, HEIGHT_M)),  # -20 kV/m at the foot
        reading(2, 9.5, 7.5, -100.0),  # far away
        reading(3, FOOT[0] + 0.5, FOOT[1], 5000.0, flags=("excluded",)),  # ignored
    ]
    (h,) = find_hotspots(grid, s, T_125_V_PER_IN, readings)
    assert h.status == "confirmed"
    assert h.reading_ids == (1,)
    assert h.max_reading_v_per_m == pytest.approx(-20e3, rel=1e-12)
    # The belt (y = 1.5) is nearer than the bench (x = 7): distance FOOT_y - radius - 1.5
    # (within the disc tolerance of the hotspot test, a tenth of the 0.1 m cell).
    assert h.nearest_asset == "belt"
    assert h.nearest_asset_m == pytest.approx(FOOT[1] - radius - 1.5, abs=0.01)
    assert h.zones == ("EPA",)
    # A reading below the level inside keeps it suspected.
    (h2,) = find_hotspots(grid, s, T_125_V_PER_IN, [reading(7, *FOOT, -3000.0)])
    assert h2.status == "suspected" and h2.reading_ids == (7,)


def test_zone_limits_give_zone_hotspots_clipped_to_the_zone():
    q = charge_for_peak(20e3, HEIGHT_M)
    epa = "POLYGON ((4.5 0, 10 0, 10 8, 4.5 8, 4.5 0))"
    s = site(OUTLINE, zones=[zone("EPA", epa, limit_v_per_m=1000.0), zone("no limit", epa)])
    grid = grid_over(OUTLINE, 0.1, lambda X, Y: point_charge_ez(X, Y, q, *FOOT, HEIGHT_M))
    zh = zone_hotspots(grid, s)
    assert [h.id for h in zh] == ["EPA H1"]
    assert zone_hotspots(grid, s, skip_limit_v_per_m=1000.0) == ()
    (h,) = zh
    assert h.zone == "EPA" and h.threshold_v_per_m == 1000.0
    assert shapely.from_wkt(epa).buffer(1e-9).contains(h.geometry)
    full = find_hotspots(grid, s, 1000.0)[0].geometry
    assert h.area_m2 == pytest.approx(full.intersection(shapely.from_wkt(epa)).area, rel=1e-9)


def test_exceedance_probability_equals_the_normal_formula_on_a_hand_made_grid():
    t = 1000.0
    mu = np.array([[0.0, 900.0, 1000.0], [-1200.0, 2500.0, -400.0], [1100.0, -1000.0, 50.0]])
    sd = np.array([[500.0, 100.0, 300.0], [200.0, 0.0, 800.0], [0.0, 250.0, 1e4]])
    p = exceedance_probability(mu, sd, t)
    # Normal approximation, E ~ N(mu, sd): P(|E| >= t) = P(E >= t) + P(E <= -t), by scipy.stats.
    ref = norm.sf(t, loc=mu, scale=np.where(sd > 0, sd, 1)) + norm.cdf(
        -t, loc=mu, scale=np.where(sd > 0, sd, 1)
    )
    ref = np.where(sd > 0, ref, (np.abs(mu) >= t).astype(float))  # a certain estimate
    assert np.allclose(p, ref, rtol=1e-12, atol=1e-15)
    # Worked by hand: mu = 900, sd = 100 -> 1 - Phi(1) + Phi(-19) = 0.158655...
    assert p[0, 1] == pytest.approx(0.15865525393145707, rel=1e-12)
    assert p[0, 2] > 0.5  # at the level itself slightly more than one half
    assert np.isnan(exceedance_probability(np.nan, 1.0, t))

    # The same numbers as a field grid: the hotspot's P is the largest P at its nodes.
    x = np.array([0.5, 1.5, 2.5])
    grid = FieldGrid(x=x, y=x.copy(), estimate=mu, std=sd, method="kriging")
    s = site(shapely.box(0, 0, 3, 3))
    hs = find_hotspots(grid, s, t)
    for h in hs:
        inside = shapely.intersects_xy(h.geometry, *np.meshgrid(x, x))
        assert h.p_exceed_max == pytest.approx(float(ref[inside].max()), rel=1e-12)
    assert {h.polarity for h in hs} == {"positive", "negative"}


def test_critical_magnitude_gives_probability_one_half():
    t = 4921.26
    sd = np.array([0.0, 10.0, 1000.0, 3000.0, 7000.0, 1e5])
    m = critical_magnitude(sd, t)
    p = exceedance_probability(m, sd, t)
    has_root = 2 * norm.cdf(-t / np.maximum(sd, 1e-300)) < 0.5
    assert np.allclose(p[has_root & (sd > 0)], 0.5, atol=1e-12)
    assert m[0] == t
    assert np.all(m[~has_root] == -t)  # so uncertain that even a zero estimate is probable
    assert np.all(m[has_root] <= t)


@pytest.mark.parametrize("uncertainty", ["patch", "constant"])
def test_probable_outline_contains_the_hotspot_and_marks_nodes_with_p_at_least_one_half(
    uncertainty,
):
    q = charge_for_peak(20e3, HEIGHT_M)

    def field(X, Y):
        return point_charge_ez(X, Y, q, *FOOT, HEIGHT_M) + point_charge_ez(
            X, Y, -0.2 * q, 8.0, 6.0, HEIGHT_M
        )

    def std(X, Y):
        if uncertainty == "constant":
            return np.full(X.shape, 6000.0)
        # Small everywhere except an unsampled patch around the weak second source.
        return 200.0 + 8000.0 * np.exp(-((X - 8.0) ** 2 + (Y - 6.0) ** 2) / 2.0)

    s = site(OUTLINE)
    grid = grid_over(OUTLINE, 0.2, field, std=std)
    hs = find_hotspots(grid, s, T_125_V_PER_IN)
    probable = probable_exceedance(grid, s, T_125_V_PER_IN, hs)
    union = shapely.union_all([p.geometry for p in probable])
    assert len(hs) == 1
    for h in hs:
        assert h.geometry.difference(union).area <= 1e-9 * h.area_m2
    assert any(p.hotspot_ids == ("H1",) for p in probable)
    if uncertainty == "patch":
        # The weak source (peak 4 kV/m < t) under 8.2 kV/m of uncertainty: P = 0.59 there, a
        # probable region without a hotspot.
        assert any(p.hotspot_ids == () for p in probable)
    else:
        # 6 kV/m everywhere: P >= 0.5 where |E| >= 3.83 kV/m (critical magnitude), a disc 1.3
        # times the area of the |E| >= 4.92 kV/m disc (closed form above: r^2 = (p/m)^(2/3) - h^2).
        r_hot = np.sqrt((20e3 / T_125_V_PER_IN) ** (2 / 3) - 1)
        r_probable = np.sqrt(
            (20e3 / critical_magnitude(np.array([6000.0]), T_125_V_PER_IN)[0]) ** (2 / 3) - 1
        )
        main = next(p for p in probable if p.hotspot_ids == ("H1",))
        # 2 %: the weak source adds a little field, and both outlines are drawn on a 0.2 m grid.
        assert main.area_m2 / hs[0].area_m2 == pytest.approx((r_probable / r_hot) ** 2, rel=0.02)
    # Nodes with P >= 0.5 lie in the probable outline, nodes with P < 0.5 outside it.
    xx, yy = np.meshgrid(grid.x, grid.y)
    p = exceedance_probability(grid.estimate, grid.std, T_125_V_PER_IN)
    ok = np.isfinite(p)
    dist = shapely.distance(union, shapely.points(xx[ok], yy[ok]))
    assert np.all(dist[p[ok] >= 0.5] <= 1e-9)
    assert np.all(dist[p[ok] < 0.5 - 1e-9] > 0)
    for region in probable:
        assert 0.5 <= region.p_exceed_max <= 1.0


def test_no_std_means_no_probable_outline():
    q = charge_for_peak(20e3, HEIGHT_M)
    grid = grid_over(OUTLINE, 0.2, lambda X, Y: point_charge_ez(X, Y, q, *FOOT, HEIGHT_M))
    assert probable_exceedance(grid, site(OUTLINE), T_125_V_PER_IN) == ()


@pytest.mark.parametrize("bad", [0.0, -5.0, float("nan")])
def test_bad_threshold_is_refused(bad):
    grid = grid_over(OUTLINE, 1.0, lambda X, Y: X)
    with pytest.raises(MapperError, match="threshold must be a positive"):
        find_hotspots(grid, site(OUTLINE), bad)


def test_empty_grid_is_refused():
    grid = grid_over(OUTLINE, 1.0, lambda X, Y: X * np.nan)
    with pytest.raises(MapperError, match="no values inside the site"):
        find_hotspots(grid, site(OUTLINE), 100.0)
