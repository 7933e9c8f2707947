"""Contour levels, iso-lines and bands that tile the site."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import shapely

from mapper.errors import MapperError
from mapper.features import Levels, bands, iso_lines, nice_levels
from tests.features.features_analytic import charge_for_peak, grid_over, point_charge_ez

# An L-shaped hall with a diagonal wall: many cells are cut by the outline.
OUTLINE = shapely.from_wkt("POLYGON ((0 0, 12 0, 12 4, 7 9, 4 9, 4 6, 0 6, 0 0))")


def _two_charges(X, Y):
    # Method of images at the plane (Griffiths sec. 3.2.1), one charge of each sign.
    q = charge_for_peak(20e3, 1.0)
    return point_charge_ez(X, Y, q, 3.2, 2.9, 1.0) + point_charge_ez(X, Y, -0.6 * q, 8.7, 3.3, 0.8)


def test_nice_levels_are_round_in_the_display_unit():
    assert nice_levels(0.0, 10e3, unit="kV/m", count=5).display_values == pytest.approx(
        (2, 4, 6, 8)
    )
    # 0 .. 20 kV/m is 0 .. 508 V/in (1 in = 0.0254 m): steps of 100 V/in.
    lv = nice_levels(0.0, 20e3, unit="V/in")
    assert lv.display_values == pytest.approx((100, 200, 300, 400, 500), rel=1e-12)
    assert lv.values_v_per_m[0] == pytest.approx(3937.0078740157, rel=1e-12)
    assert lv.label(lv.values_v_per_m[1]) == "200 V/in"
    # A signed field gets levels symmetric about zero, zero included.
    assert nice_levels(-3000.0, 7000.0).display_values == pytest.approx(
        (-2000, 0, 2000, 4000, 6000)
    )
    assert nice_levels(1000.0, 1900.0, count=4).display_values == pytest.approx((1250, 1500, 1750))
    # A constant field: one level at its value.
    assert nice_levels(500.0, 500.0).values_v_per_m == (500.0,)


def test_given_levels_are_checked():
    assert Levels.from_display([1, 2], "kV/m").values_v_per_m == (1000.0, 2000.0)
    with pytest.raises(MapperError, match="strictly increasing"):
        Levels((2000.0, 1000.0))
    with pytest.raises(MapperError, match="unknown field unit"):
        Levels((1.0,), unit="V/ft")


@pytest.mark.parametrize("cell_m", [0.37, 1.1])
def test_bands_tile_the_site(cell_m):
    grid = grid_over(OUTLINE, cell_m, _two_charges)
    lv = nice_levels(np.nanmin(grid.estimate), np.nanmax(grid.estimate), unit="kV/m")
    bs = bands(grid, OUTLINE, lv)
    assert len(bs) == len(lv.values_v_per_m) + 1
    area = OUTLINE.area
    for b in bs:
        assert b.geometry.is_valid
        assert OUTLINE.buffer(1e-9).contains(b.geometry)
    # Non-overlapping (up to rounding) and covering the outline: areas sum to its area.
    for a, b in itertools.combinations(bs, 2):
        assert a.geometry.intersection(b.geometry).area <= 1e-9 * area
    assert sum(b.area_m2 for b in bs) == pytest.approx(area, rel=1e-9)
    assert shapely.union_all([b.geometry for b in bs]).area == pytest.approx(area, rel=1e-9)
    # Each grid node inside the site lies in the band its value belongs to (lower < E <= upper).
    xx, yy = np.meshgrid(grid.x, grid.y)
    ok = np.isfinite(grid.estimate)
    pts = shapely.points(xx[ok], yy[ok])
    values = grid.estimate[ok]
    for b in bs:
        mine = (values > b.lower_v_per_m) & (values <= b.upper_v_per_m)
        if mine.any():
            assert np.all(shapely.distance(b.geometry, pts[mine]) <= 1e-9)
    assert bs[0].label.startswith("<=") and bs[-1].label.startswith(">")


def test_iso_lines_of_a_linear_field_are_exact_away_from_the_outline():
    # Marching squares interpolates linearly along cell edges, so for E = a x + b the line at
    # level L is exactly x = (L - b) / a. Within a cell of the outline the grid is extended by
    # nearest values (cells cut by the outline have no value of their own), so there the line may
    # bend, by less than one cell.
    a, b, cell = 1500.0, -2000.0, 0.45
    grid = grid_over(OUTLINE, cell, lambda X, Y: a * X + b)
    lv = Levels((1000.0, 9500.0, 13000.0, 30000.0))
    lines = iso_lines(grid, OUTLINE, lv)
    assert [ln.level_v_per_m for ln in lines] == [1000.0, 9500.0, 13000.0, 30000.0]
    core = OUTLINE.buffer(-cell * np.sqrt(2))
    for ln in lines[:3]:
        x = (ln.level_v_per_m - b) / a
        exact = shapely.LineString([(x, -1), (x, 20)]).intersection(OUTLINE)
        assert ln.geometry.intersection(core).hausdorff_distance(exact.intersection(core)) <= 1e-9
        assert ln.geometry.hausdorff_distance(exact) <= cell
        assert OUTLINE.buffer(1e-9).contains(ln.geometry)
    # x = 2 spans the hall (6 m); x = 7.667 meets the diagonal wall y = 16 - x at 8.333 m;
    # x = 10 meets it at 6 m.
    for ln, length in zip(lines[:3], (6.0, 16 - 11500 / 1500, 6.0), strict=True):
        assert ln.length_m == pytest.approx(length, abs=cell)
    assert lines[3].geometry.is_empty  # the field never reaches 30 kV/m
