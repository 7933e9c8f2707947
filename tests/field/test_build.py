"""build_field: the grid over the outline, method choice and the stored model."""

import json

import numpy as np
import pytest
import shapely

from mapper.errors import MapperError
from mapper.field import FieldGrid, Variogram, build_field, field_from_bytes, field_to_bytes

L_SHAPE = shapely.Polygon([(0, 0), (50, 0), (50, 15), (25, 15), (25, 30), (0, 30)])


def test_auto_grid_inside_outline_only(scattered):
    xy, z, _ = scattered
    inside = shapely.contains_xy(L_SHAPE, xy[:, 0], xy[:, 1])
    g = build_field(xy[inside], z[inside], L_SHAPE)
    assert isinstance(g, FieldGrid)
    assert g.estimate.shape == (len(g.y), len(g.x)) == g.std.shape
    mx, my = np.meshgrid(g.x, g.y)
    expect_in = shapely.contains_xy(L_SHAPE, mx, my)
    np.testing.assert_array_equal(g.inside, expect_in)
    assert np.isnan(g.estimate[~expect_in]).all()
    assert {c.method for c in g.cv_table} == {"kriging", "universal", "rbf", "idw", "physics"}
    assert g.method in g.reason and "RMSE" in g.reason
    assert g.cv is not None and g.cv.method == g.method
    json.dumps(g.settings.to_dict())  # JSON-ready
    # Cell centres span the outline bounds.
    assert g.x[0] == pytest.approx(g.cell_m / 2) and g.x[-1] < 50


def test_given_variogram_is_used_as_is(scattered):
    xy, z, _ = scattered
    vg = Variogram("spherical", sill=30.0, range=12.0, nugget=2.0)
    box = shapely.box(0, 0, 50, 30)
    g = build_field(xy, z, box, method="kriging", variogram=vg, cell_m=2.5)
    assert g.method == "kriging"
    assert g.settings.kriging.variogram == vg
    assert g.settings.kriging.variogram_fit is None
    assert g.cell_m == 2.5 and len(g.x) == 20 and len(g.y) == 12
    assert np.isfinite(g.std).all()


@pytest.mark.parametrize("method", ["universal", "rbf", "idw"])
def test_each_method(scattered, method):
    xy, z, _ = scattered
    g = build_field(xy, z, shapely.box(0, 0, 50, 30), method=method, cell_m=5.0)
    assert g.method == method
    assert np.isfinite(g.estimate).all()
    # rbf and idw carry the calibrated kriging std (tests/field/test_uncertainty.py).
    assert np.isfinite(g.std).all()


def test_fast_path_grid_size():
    rng = np.random.default_rng(9)
    xy = rng.uniform([0, 0], [100, 60], size=(2000, 2))
    z = 200 + 50 * np.sin(xy[:, 0] / 10) + rng.normal(0, 5, 2000)
    g = build_field(xy, z, shapely.box(0, 0, 100, 60), fast=True)
    assert g.method == "kriging" and g.settings.fast
    assert g.estimate.size <= 6000 * 1.05
    assert "fast path" in g.reason


def test_storage_round_trip(scattered):
    xy, z, _ = scattered
    g = build_field(xy, z, L_SHAPE, cell_m=2.0)
    back = field_from_bytes(field_to_bytes(g))
    np.testing.assert_array_equal(back.estimate, g.estimate)
    np.testing.assert_array_equal(back.std, g.std)
    np.testing.assert_array_equal(back.x, g.x)
    assert back.settings == g.settings
    assert back.settings.to_dict() == json.loads(json.dumps(g.settings.to_dict()))
    assert back.cv == g.cv and back.cv_table == g.cv_table and back.reason == g.reason
    with pytest.raises(MapperError, match="unreadable"):
        field_from_bytes(b"not a field")


def test_collinear_survey_skips_plane_methods_in_auto():
    x = np.linspace(0, 40, 25)
    xy = np.column_stack([x, np.full(25, 10.0)])
    z = np.sin(x / 5) * 10 + 50
    g = build_field(xy, z, shapely.box(0, 0, 40, 20), method="auto", variogram=Variogram(
        "exponential", sill=50.0, range=20.0))
    assert g.method in ("kriging", "idw")
    assert "collinear" in g.reason


def test_fast_path_with_few_readings_falls_back_to_idw():
    # Six readings give too few pairs for a variogram; the terminal app still needs a map.
    xy = np.array([[1, 1], [9, 1], [1, 9], [9, 9], [5, 5], [3, 7]], float)
    g = build_field(xy, np.arange(6.0), shapely.box(0, 0, 10, 10), fast=True)
    assert g.method == "idw"
    assert "kriging skipped" in g.reason and "too few pairs" in g.reason
