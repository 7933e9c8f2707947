"""Comparison of two surveys of one site."""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from mapper.errors import MapperError
from mapper.features import compare_fields
from tests.features.features_analytic import charge_for_peak, grid_over, point_charge_ez, site

T = 125 / 0.0254  # 125 V/in in V/m (1 in = 0.0254 m exactly)
OUTLINE = shapely.box(0.0, 0.0, 12.0, 10.0)
H = 1.0
Q = charge_for_peak(20e3, H)
# Three charged objects over a grounded floor (method of images, Griffiths sec. 3.2.1), 5 m or
# more apart so that each one's field at the others' threshold circles is under 2 % of t.
SOURCES = {
    "belt": (Q, 3.0, 3.0),
    "tote": (-0.8 * Q, 9.0, 3.0),
    "film": (0.9 * Q, 6.0, 8.0),
}


def _field(names, scale=None):
    scale = scale or {}

    def f(X, Y):
        return sum(
            scale.get(n, 1.0)
            * point_charge_ez(X, Y, SOURCES[n][0], SOURCES[n][1], SOURCES[n][2], H)
            for n in names
        )

    return f


def _status_by_source(cmp):
    """Map each change to the source whose foot lies in it."""
    out = {}
    for c in cmp.changes:
        geom = c.geometry_before if c.before_ids else c.geometry_after
        for name, (_, x0, y0) in SOURCES.items():
            if geom.buffer(1e-9).contains(shapely.Point(x0, y0)):
                out[name] = c.status
    return out


def test_removed_source_is_cleared_and_the_others_unchanged():
    s = site(OUTLINE)
    before = grid_over(OUTLINE, 0.1, _field(SOURCES))
    # The second survey used a coarser, shifted grid: the comparison resamples it.
    after = grid_over(OUTLINE, 0.125, _field(["belt", "tote"]), origin=(0.03, 0.04))
    cmp = compare_fields(before, after, s, s, T)
    assert _status_by_source(cmp) == {"belt": "unchanged", "tote": "unchanged", "film": "cleared"}
    assert cmp.summary.counts == {
        "appeared": 0,
        "cleared": 1,
        "grew": 0,
        "shrank": 0,
        "unchanged": 2,
    }
    cleared = next(c for c in cmp.changes if c.status == "cleared")
    assert cleared.after_ids == () and cleared.area_after_m2 == 0.0
    assert cleared.polarity == "negative"  # a positive charge: field points down into the floor
    for c in cmp.changes:
        if c.status == "unchanged":
            assert c.overlap_m2 == pytest.approx(c.area_before_m2, rel=0.05)
    # The difference grid is minus the removed source's field, up to the error of resampling the
    # "after" grid bilinearly: at most (cell^2 / 8) (|E_xx| + |E_yy|). Under a charge the
    # closed form gives E_xx = E_yy = 3 E0 / h^2, so with the 20 kV/m belt the bound is
    # 0.125^2 / 8 * 6 * 20 kV/m = 234 V/m (measured 198 V/m).
    xx, yy = np.meshgrid(cmp.x, cmp.y)
    expected = -point_charge_ez(xx, yy, *SOURCES["film"], H)
    ok = np.isfinite(cmp.difference)
    assert ok.mean() > 0.95
    assert np.max(np.abs(cmp.difference[ok] - expected[ok])) <= 0.125**2 / 8 * 6 * 20e3
    assert cmp.summary.max_increase_v_per_m == pytest.approx(np.max(expected[ok]), rel=0.01)
    assert cmp.summary.common_area_m2 == pytest.approx(OUTLINE.area)
    assert cmp.summary.area_above_after_m2 < cmp.summary.area_above_before_m2
    dg = cmp.difference_grid()
    assert dg.estimate.shape == (len(dg.y), len(dg.x)) and dg.method == "difference"


def test_appeared_grew_and_shrank():
    s = site(OUTLINE)
    base = grid_over(OUTLINE, 0.1, _field(["belt", "tote"]))
    changed = grid_over(
        OUTLINE, 0.1, _field(["belt", "tote", "film"], scale={"belt": 1.6, "tote": 0.7})
    )
    cmp = compare_fields(base, changed, s, s, T)
    assert _status_by_source(cmp) == {"belt": "grew", "tote": "shrank", "film": "appeared"}
    back = compare_fields(changed, base, s, s, T)
    assert _status_by_source(back) == {"belt": "shrank", "tote": "grew", "film": "cleared"}


def test_different_sites_are_refused():
    a = site(OUTLINE, name="Hall 3")
    b = site(shapely.box(0, 0, 30, 20), name="Yard")
    g = grid_over(OUTLINE, 0.5, _field(SOURCES))
    with pytest.raises(MapperError, match="different sites"):
        compare_fields(g, g, a, b, T)


def test_surveys_without_overlap_are_refused():
    left = shapely.box(0, 0, 5, 10)
    right = shapely.box(7, 0, 12, 10)
    ga = grid_over(left, 0.5, _field(SOURCES))
    gb = grid_over(right, 0.5, _field(SOURCES))
    with pytest.raises(MapperError, match="do not overlap"):
        compare_fields(ga, gb, site(left), site(right), T)


def test_partial_overlap_compares_the_common_part_only():
    wide = shapely.box(0, 0, 12, 10)
    part = shapely.box(0, 0, 7, 10)  # the second survey skipped the east end (tote at x = 9)
    before = grid_over(wide, 0.1, _field(SOURCES))
    after = grid_over(part, 0.1, _field(SOURCES))
    cmp = compare_fields(before, after, site(wide), site(part), T)
    assert cmp.summary.common_area_m2 == pytest.approx(part.area)
    # The tote's hotspot lies outside the common part: not reported as cleared.
    assert cmp.summary.counts["cleared"] == 0
    assert set(_status_by_source(cmp)) == {"belt", "film"}
