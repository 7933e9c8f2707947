"""Keep-away rules of ANSI/ESD S20.20 on constructed geometries."""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from mapper.features import (
    CAUTIONS,
    DEFAULT_RULES,
    DEFAULT_THRESHOLD_V_PER_M,
    LIMITS_ARE_DEFAULTS,
    RULE_S20_20_1999,
    RULE_S20_20_2014,
    check_keep_away,
)
from tests.features.features_analytic import asset, grid_over, site

INCH_M = 0.0254  # international inch, exact (international yard and pound agreement, 1959)
OUTLINE = shapely.box(0.0, 0.0, 3.0, 2.0)
CENTRE = (1.0, 1.0)
PEAK = 200e3  # V/m, a strongly charged insulator seen from close by
WIDTH = 0.1  # m


def _blob(X, Y):
    """A Gaussian field bump: |E| >= L exactly within r = w sqrt(2 ln(peak / L))."""
    return PEAK * np.exp(-((X - CENTRE[0]) ** 2 + (Y - CENTRE[1]) ** 2) / (2 * WIDTH**2))


def _radius(level):
    return WIDTH * np.sqrt(2 * np.log(PEAK / level))


def _bench(name, gap_m, level, kind="workstation", sensitive=False):
    """A 0.4 m x 0.3 m bench whose near edge is gap_m from the |E| = level circle, on +x."""
    x0 = CENTRE[0] + _radius(level) + gap_m
    wkt = f"POLYGON (({x0} 0.85, {x0 + 0.4} 0.85, {x0 + 0.4} 1.15, {x0} 1.15, {x0} 0.85))"
    return asset(name, kind, wkt, sensitive=sensitive)


def test_rule_values_are_the_standards_values():
    # ANSI/ESD S20.20 (1999 text): > 2000 V/in -> 12 in; S20.20-2014 cl. 8.3.1: > 125 V/in -> 1 in.
    assert RULE_S20_20_1999.field_above_v_per_m == pytest.approx(78740.157, rel=1e-7)
    assert RULE_S20_20_1999.min_distance_m == pytest.approx(0.3048, abs=1e-12)
    assert RULE_S20_20_2014.field_above_v_per_m == pytest.approx(4921.2598, rel=1e-7)
    assert RULE_S20_20_2014.min_distance_m == pytest.approx(0.0254, abs=1e-12)
    assert DEFAULT_THRESHOLD_V_PER_M == pytest.approx(125 / INCH_M)
    assert "1999" in RULE_S20_20_1999.standard and "8.3.1" in RULE_S20_20_2014.standard
    assert DEFAULT_RULES == (RULE_S20_20_1999, RULE_S20_20_2014)


def test_workstations_at_25_and_35_cm_from_a_region_above_2000_v_per_in():
    # ANSI/ESD S20.20 (1999 text, process-essential insulators): where the field exceeds
    # 2000 V/in, ESD-sensitive items at least 12 in (30 cm) away. 25 cm breaks it, 35 cm does not.
    level = RULE_S20_20_1999.field_above_v_per_m
    s = site(OUTLINE, assets=[_bench("bench 25", 0.25, level), _bench("bench 35", 0.35, level)])
    # Both benches sit beyond the 125 V/in circle (r = 0.27 m vs 0.14 m): only the 1999 rule.
    assert _radius(level) + 0.25 > _radius(RULE_S20_20_2014.field_above_v_per_m) + 0.0254
    grid = grid_over(OUTLINE, 0.01, _blob)
    violations = check_keep_away(grid, s, [RULE_S20_20_1999])
    assert [v.asset for v in violations] == ["bench 25"]
    (v,) = violations
    assert v.rule is RULE_S20_20_1999
    # 1 cm grid on a smooth bump: the drawn circle is within 1 mm of the exact one.
    assert v.distance_m == pytest.approx(0.25, abs=1e-3)
    assert v.region_peak_v_per_m == np.nanmax(grid.estimate)  # the node nearest the centre
    assert "ANSI/ESD S20.20 (1999 text" in v.message and "bench 25" in v.message
    assert v.to_dict()["rule"] == "S20.20-1999"
    # With both default rules, the 35 cm bench is still clean.
    assert [v.asset for v in check_keep_away(grid, s)] == ["bench 25"]


def test_sensitive_items_closer_than_one_inch_to_a_region_above_125_v_per_in():
    # ANSI/ESD S20.20-2014 cl. 8.3.1: where the field exceeds 125 V/in, at least 1 in (2.5 cm).
    level = RULE_S20_20_2014.field_above_v_per_m
    s = site(
        OUTLINE,
        assets=[
            _bench("tray 2 cm", 0.02, level, kind="rack", sensitive=True),  # marked sensitive
            _bench("bench 3 cm", 0.03, level),
            _bench("belt 1 cm", 0.01, level, kind="conveyor"),  # not sensitive: never reported
        ],
    )
    grid = grid_over(OUTLINE, 0.005, _blob)
    v2014 = check_keep_away(grid, s, [RULE_S20_20_2014])
    assert [(v.asset, v.asset_kind) for v in v2014] == [("tray 2 cm", "rack")]
    assert v2014[0].distance_m == pytest.approx(0.02, abs=1e-3)
    # Both are within 12 in of the 2000 V/in region too (0.27 + 0.03 - 0.14 = 0.16 m < 0.30 m).
    both = check_keep_away(grid, s)
    assert [(v.rule.key, v.asset) for v in both] == [
        ("S20.20-1999", "tray 2 cm"),
        ("S20.20-1999", "bench 3 cm"),
        ("S20.20-2014 8.3.1", "tray 2 cm"),
    ]


def test_asset_inside_a_high_field_region_is_at_distance_zero():
    wkt = "POLYGON ((0.95 0.95, 1.05 0.95, 1.05 1.05, 0.95 1.05, 0.95 0.95))"
    s = site(OUTLINE, assets=[asset("on the insulator", "workstation", wkt)])
    violations = check_keep_away(grid_over(OUTLINE, 0.02, _blob), s)
    assert [v.distance_m for v in violations] == [0.0, 0.0]


def test_no_sensitive_assets_no_violations():
    s = site(OUTLINE, assets=[asset("belt", "conveyor", "LINESTRING (0.9 1, 1.1 1)")])
    assert check_keep_away(grid_over(OUTLINE, 0.02, _blob), s) == ()


def test_limits_are_stated_as_defaults_in_the_cautions():
    assert "defaults" in LIMITS_ARE_DEFAULTS and "ESD control plan" in LIMITS_ARE_DEFAULTS
    assert LIMITS_ARE_DEFAULTS in CAUTIONS
    assert any("IEC TS 60079-32-1" in c and "NFPA 77" in c for c in CAUTIONS)
    assert any("not a surface potential" in c for c in CAUTIONS)
