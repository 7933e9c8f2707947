"""The bundled findings that the CLI, exports, report and terminal app read."""

from __future__ import annotations

import json

import numpy as np
import pytest
import shapely

from mapper.features import CAUTIONS, DEFAULT_THRESHOLD_V_PER_M, Findings, Levels, analyse
from tests.features.features_analytic import (
    asset,
    charge_for_peak,
    grid_over,
    point_charge_ez,
    reading,
    site,
    zone,
)

OUTLINE = shapely.from_wkt("POLYGON ((0 0, 16 0, 16 10, 0 10, 0 0))")
Q = charge_for_peak(30e3, 1.0)


def _field(X, Y):
    # Two charged objects over the floor (method of images, Griffiths sec. 3.2.1).
    return point_charge_ez(X, Y, Q, 4.0, 5.0, 1.0) + point_charge_ez(X, Y, -0.4 * Q, 12.0, 5.0, 1.0)


def _site():
    return site(
        OUTLINE,
        assets=[
            asset(
                "bench A", "workstation", "POLYGON ((5.2 4.5, 6.2 4.5, 6.2 5.5, 5.2 5.5, 5.2 4.5))"
            ),
            asset("belt 1", "conveyor", "LINESTRING (1 8, 15 8)"),
            asset("rack", "rack", "POLYGON ((7 1, 9 1, 9 2, 7 2, 7 1))", walkable=False),
        ],
        zones=[
            zone("packing EPA", "POLYGON ((10 2, 15 2, 15 8, 10 8, 10 2))", limit_v_per_m=2000.0)
        ],
    )


def _readings():
    pts = [(x, y) for x in np.arange(0.5, 16, 1.5) for y in np.arange(0.5, 10, 1.5)]
    rs = [reading(i, x, y, _field(x, y)) for i, (x, y) in enumerate(pts, start=1)]
    # A spike the map does not show (e.g. a charged glove passing by): a measured exceedance.
    rs.append(reading(999, 14.5, 9.5, 6000.0))
    return rs


def test_analyse_bundles_everything():
    grid = grid_over(OUTLINE, 0.1, _field, std=lambda X, Y: 400.0 + 0 * X)
    f = analyse(grid, _site(), _readings(), unit="kV/m")
    assert isinstance(f, Findings)
    assert f.threshold_v_per_m == pytest.approx(DEFAULT_THRESHOLD_V_PER_M)  # 125 V/in default
    assert f.threshold_label == "4.921 kV/m"
    assert len(f.bands) == len(f.levels.values_v_per_m) + 1
    assert sum(b.area_m2 for b in f.bands) == pytest.approx(OUTLINE.area, rel=1e-9)
    assert len(f.isolines) == len(f.levels.values_v_per_m)
    # The strong charge (30 kV/m) makes a negative hotspot; the weak one peaks at 12 kV/m.
    # The spike of 6 kV/m that the map does not show is a hotspot of its own, status measured.
    assert [h.polarity for h in f.hotspots] == ["negative", "positive", "positive"]
    assert f.hotspots[0].status == "confirmed"
    assert f.hotspots[2].status == "measured" and 999 in f.hotspots[2].reading_ids
    assert f.hotspots[1].zones == ("packing EPA",)
    # The EPA's own limit (2 kV/m) gives a larger region inside the zone only.
    (zh,) = f.zone_hotspots
    assert zh.zone == "packing EPA" and zh.area_m2 > f.hotspots[1].area_m2
    assert f.probability_available and f.probable
    # bench A starts 1.2 m from the strong charge's foot, inside its 125 V/in disc (radius
    # 1.53 m from the closed form); no field reaches 2000 V/in, so only the 2014 rule applies.
    assert [(v.rule.key, v.asset, v.distance_m) for v in f.violations] == [
        ("S20.20-2014 8.3.1", "bench A", 0.0)
    ]
    assert f.unmapped_exceedances == ()  # every reading at or beyond the level is in a hotspot
    assert f.advice and all(1 <= s.rank <= 10 for s in f.advice)
    assert f.cautions == CAUTIONS and "ESD control plan" in f.limits_note
    data = json.loads(json.dumps(f.to_dict()))
    assert data["hotspots"][0]["id"] == "H1"
    assert shapely.from_wkt(data["hotspots"][0]["wkt"]).equals(f.hotspots[0].geometry)
    assert len(data["cautions"]) == len(CAUTIONS)


def test_given_levels_and_threshold_are_used():
    grid = grid_over(OUTLINE, 0.2, _field)  # no std (e.g. IDW)
    levels = Levels.from_display([-10, 0, 10], "kV/m")
    f = analyse(grid, _site(), (), threshold_v_per_m=10e3, levels=levels, unit="V/in")
    assert f.levels is levels
    assert [h.threshold_v_per_m for h in f.hotspots] == [10e3, 10e3]
    assert not f.probability_available and f.probable == ()
    assert all(h.p_exceed_max is None for h in f.hotspots)
    assert f.unit == "V/in"
