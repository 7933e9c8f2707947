"""Grid plans: counts computed by hand, serpentine order, clipping."""

import math

import numpy as np
import pytest

from mapper.errors import MapperError
from mapper.plan.grid import plan_grid, row_label
from mapper.site.site_file import site_from_toml_text


def site(wkt: str, extra: str = ""):
    return site_from_toml_text(f'[site]\nname = "t"\n[outline]\nwkt = "{wkt}"\n{extra}')


def test_rectangle_counts_by_hand():
    # 10 m x 6 m at 2 m: cells of 2 m -> 5 columns x 3 rows = 15 points at x = 1,3,..,9; y = 1,3,5.
    plan = plan_grid(site("POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))"), 2.0)
    assert len(plan.points) == 15
    assert sorted({p.x for p in plan.points}) == [1, 3, 5, 7, 9]
    assert sorted({p.y for p in plan.points}) == [1, 3, 5]
    # serpentine: 4 steps per row + 2 row changes, each 2 m -> 14 steps of 2 m = 28 m
    assert plan.walk_length_m == pytest.approx(28.0)
    assert plan.covered_area_m2() == pytest.approx(60.0)


def test_l_shape_counts_by_hand():
    # L-shape: 10x10 square minus the 6x6 upper-right square; 2 m cells -> 25 - 9 = 16 points.
    plan = plan_grid(site("POLYGON ((0 0, 10 0, 10 4, 4 4, 4 10, 0 10, 0 0))"), 2.0)
    assert len(plan.points) == 16


def test_serpentine_steps_only_to_neighbours():
    plan = plan_grid(site("POLYGON ((0 0, 21 0, 21 13, 0 13, 0 0))"), 1.5)
    xy = np.array([(p.x, p.y) for p in plan.points])
    steps = np.hypot(*np.diff(xy, axis=0).T)
    assert np.allclose(steps, 1.5)
    rows = [p.row for p in plan.points]
    assert rows == sorted(rows)
    first_row = [p.col for p in plan.points if p.row == 0]
    second_row = [p.col for p in plan.points if p.row == 1]
    assert first_row == sorted(first_row) and second_row == sorted(second_row, reverse=True)


def test_labels_row_letters_and_columns():
    plan = plan_grid(site("POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))"), 2.0)
    assert plan.points[0].label == "A1"
    assert plan.points[5].label == "B5"  # serpentine: row B starts at column 5
    assert row_label(25) == "Z" and row_label(26) == "AA"


def test_non_walkable_assets_drop_points():
    extra = '[[asset]]\nname = "rack"\nkind = "rack"\nwkt = "POLYGON ((2 0, 4 0, 4 6, 2 6, 2 0))"\n'
    plan = plan_grid(site("POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))", extra), 2.0)
    assert len(plan.points) == 12  # column x = 3 lies inside the rack
    assert all(p.x != 3 for p in plan.points)


def test_staggered_layout_is_triangular():
    plan = plan_grid(site("POLYGON ((0 0, 20 0, 20 20, 0 20, 0 0))"), 2.0, "staggered")
    xy = np.array([(p.x, p.y) for p in plan.points])
    from scipy.spatial import cKDTree

    d, _ = cKDTree(xy).query(xy, k=2)
    assert np.allclose(d[:, 1], 2.0)  # every point has a neighbour at exactly one spacing
    rows = sorted({round(p.y, 6) for p in plan.points})
    assert rows[1] - rows[0] == pytest.approx(2.0 * math.sqrt(3) / 2)


@pytest.mark.parametrize("spacing", [0.0, -1.0, float("nan"), 0.0001])
def test_bad_spacing(spacing):
    with pytest.raises(MapperError):
        plan_grid(site("POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))"), spacing)
