"""Quiet areas stay quiet: no probable exceedance where every nearby reading is far below the level.

Fields are charges over a grounded plane by the method of images (Griffiths, Introduction to
Electrodynamics, sec. 3.2.1), sampled at 2.5 m as a walked survey is, plus invented meter noise.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from mapper.features.hotspots import exceedance_probability, probable_exceedance
from mapper.field import build_field
from mapper.physics.images import LineCharge, PointCharge, field_z
from mapper.site.model import Site

BOX = shapely.box(0, 0, 40, 25)
LEVEL = 4921.3  # 125 V/in in V/m (1 in = 0.0254 m exactly)


def _survey(sources, seed=0, noise=30.0, extent=(40, 25)):
    xs, ys = np.meshgrid(np.arange(1.25, extent[0], 2.5), np.arange(1.25, extent[1], 2.5))
    xy = np.column_stack([xs.ravel(), ys.ravel()])
    rng = np.random.default_rng(seed)
    v = field_z(sources, xy[:, 0], xy[:, 1], 1.0)
    return xy, v * (1 + 0.02 * rng.standard_normal(v.shape)) + noise * rng.standard_normal(v.shape)


@pytest.mark.parametrize("method", ["auto", "rbf", "idw", "kriging"])
def test_survey_far_below_the_level_has_no_probable_exceedance(method):
    xy, v = _survey([PointCharge(20, 12, 2.5, 2e-7)])
    assert np.max(np.abs(v)) < 0.3 * LEVEL  # every reading far below the level
    g = build_field(xy, v, BOX, method=method)
    assert probable_exceedance(g, Site("quiet", BOX), LEVEL) == ()


@pytest.mark.parametrize("method", ["rbf", "idw"])
def test_borrowed_std_does_not_invent_exceedance_in_quiet_corners(method):
    # A strongly charged overhead belt across the middle: the data-only method smooths it, so its
    # leave-one-out errors are large there; the corners' readings are a few per cent of the level.
    belt = LineCharge(14, 20, 26, 20, 2.4, -2.5e-6)
    square = shapely.box(0, 0, 40, 40)
    xy, v = _survey([belt], seed=4, extent=(40, 40))
    g = build_field(xy, v, square, method=method)
    mx, my = np.meshgrid(g.x, g.y)
    far = shapely.distance(shapely.LineString([(14, 20), (26, 20)]), shapely.points(mx, my))
    quiet = g.inside & (far > 14.0)
    far_reads = shapely.distance(shapely.LineString([(14, 20), (26, 20)]), shapely.points(xy)) > 12.0
    assert np.max(np.abs(v[far_reads])) < 0.1 * LEVEL
    p = exceedance_probability(g.estimate, g.std, LEVEL)
    assert np.nanmax(p[quiet]) < 0.05
    # ... while the belt itself stays uncertain or exceeding (the map does not become overconfident).
    assert np.nanmax(p[g.inside & (far < 1.5)]) > 0.5
