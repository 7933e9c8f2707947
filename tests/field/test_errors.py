"""Bad input: each a MapperError naming the problem and what is accepted."""

import numpy as np
import pytest
import shapely

from mapper.errors import MapperError, NotFittedError
from mapper.field import RBF, OrdinaryKriging, UniversalKriging, Variogram, build_field

VG = Variogram("exponential", sill=1.0, range=10.0)


def test_unknown_model_lists_accepted():
    with pytest.raises(MapperError, match="accepted: spherical, exponential, gaussian, matern, linear"):
        Variogram("cubic-ish", sill=1.0, range=1.0)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"model": "exponential", "sill": 0.0, "range": 10.0}, "sill .* > 0"),
        ({"model": "exponential", "sill": 1.0, "range": -1.0}, "range .* > 0"),
        ({"model": "exponential", "sill": 1.0, "range": 10.0, "nugget": -0.1}, "nugget .* >= 0"),
        ({"model": "exponential", "sill": 1.0, "range": 10.0, "ratio": 0.5}, "ratio .* >= 1"),
        ({"model": "linear", "slope": 0.0}, "slope .* > 0"),
        ({"model": "gaussian", "sill": float("nan"), "range": 1.0}, "sill"),
    ],
)
def test_non_positive_parameters(kwargs, match):
    with pytest.raises(MapperError, match=match):
        Variogram(**kwargs)


def test_nan_readings_are_named():
    xy = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]])
    with pytest.raises(MapperError, match="NaN or infinite reading.*index 1"):
        OrdinaryKriging(VG).fit(xy, [1.0, np.nan, 2.0])
    with pytest.raises(MapperError, match="non-finite coordinate"):
        OrdinaryKriging(VG).fit([[0, 0], [np.nan, 1]], [1.0, 2.0])


def test_shapes_are_quoted():
    with pytest.raises(MapperError, match=r"shape \(3,\)"):
        OrdinaryKriging(VG).fit([1.0, 2.0, 3.0], [1.0, 2.0, 3.0])


def test_too_few_points():
    with pytest.raises(MapperError, match="at least 2 distinct positions, got 1"):
        OrdinaryKriging(VG).fit([[0, 0], [0, 0]], [1.0, 2.0])  # a repeat, merged to one
    with pytest.raises(MapperError, match="at least 3 distinct positions"):
        UniversalKriging(VG).fit([[0, 0], [1, 1]], [1.0, 2.0])


def test_collinear_points_for_plane_methods():
    xy = np.column_stack([np.arange(6.0), 2 * np.arange(6.0)])
    z = np.arange(6.0)
    with pytest.raises(MapperError, match="collinear"):
        UniversalKriging(VG).fit(xy, z)
    with pytest.raises(MapperError, match="collinear"):
        RBF().fit(xy, z)
    OrdinaryKriging(VG).fit(xy, z)  # ordinary kriging is fine on a line


def test_bad_options():
    with pytest.raises(MapperError, match="accepted: auto, kriging, universal, rbf, idw, physics"):
        build_field([[0, 0], [1, 1]], [1, 2], shapely.box(0, 0, 1, 1), method="spline")
    # settings are stored as given and checked by fit (the estimator contract)
    xy3, z3 = [[0, 0], [1, 0], [0, 1]], [1.0, 2.0, 3.0]
    with pytest.raises(MapperError, match="drift.*accepted: linear"):
        UniversalKriging(VG, drift="quadratic").fit(xy3, z3)
    with pytest.raises(MapperError, match="neighbors"):
        OrdinaryKriging(VG, neighbors=1).fit(xy3, z3)
    with pytest.raises(MapperError, match="outline"):
        build_field([[0, 0], [1, 1]], [1, 2], shapely.Point(0, 0))
    with pytest.raises(MapperError, match="grid nodes"):
        build_field([[0, 0], [1, 1], [0, 1]], [1, 2, 3], shapely.box(0, 0, 1000, 1000), cell_m=0.1)
    # calling predict before fit is a programming error, not a user's mistake
    with pytest.raises(NotFittedError, match="before predict"):
        OrdinaryKriging(VG).predict([[0, 0]])
