"""Each zone against its own limit: pass or exceeded, by how much, where.

The field is a point charge over a grounded plane by the method of images (Griffiths,
Introduction to Electrodynamics, sec. 3.2.1): directly below a charge q at height h the field at
height z is E = -k q [1/(h - z)^2 + 1/(h + z)^2] (k = 1 / (4 pi eps0)): the charge pulls
the field down toward it, and so does its image -q below the plane.
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import pytest
import shapely

from mapper.features.zone_results import zone_results, zone_sentence
from mapper.field import build_field
from mapper.physics.images import EPSILON_0, PointCharge, field_z
from mapper.readings.model import CorrectedReading, Reading
from mapper.site.model import Site, Zone

BOX = shapely.box(0, 0, 20, 12)
T0 = datetime(2026, 11, 17, 8, 0, tzinfo=UTC)
Q = PointCharge(5.0, 6.0, 2.0, 5e-7)
K = 1 / (4 * np.pi * EPSILON_0)


def _setup():
    xs, ys = np.meshgrid(np.arange(1, 20, 2.0), np.arange(0, 13, 2.0))
    xy = np.column_stack([xs.ravel(), ys.ravel()])
    v = field_z([Q], xy[:, 0], xy[:, 1], 1.0)
    rows = [CorrectedReading(Reading(i + 1, x, y, e, e, "V/m", T0, height_m=1.0), e)
            for i, ((x, y), e) in enumerate(zip(xy, v, strict=True))]
    return xy, v, rows


def test_zone_over_the_charge_is_exceeded_by_the_reading_below_it():
    xy, v, rows = _setup()
    below = -K * Q.q * (1 / (Q.h - 1.0) ** 2 + 1 / (Q.h + 1.0) ** 2)  # closed form, about -5.0 kV/m
    assert v[np.argmin(np.hypot(xy[:, 0] - 5, xy[:, 1] - 6))] == pytest.approx(below, rel=1e-9)
    near = Zone("bench EPA", shapely.box(3, 4, 7, 8), limit_v_per_m=2000.0)
    far = Zone("store", shapely.box(14, 0, 20, 12))  # no own limit: the survey's 4921.3 V/m
    site = Site("box", BOX, zones=(near, far))
    g = build_field(xy, v, BOX, method="kriging", cell_m=0.5)
    r_near, r_far = zone_results(g, site, rows, 4921.3)
    assert r_near.exceeded and r_near.limit_source == "zone"
    assert abs(r_near.worst_v_per_m) >= abs(below) - 1e-6
    assert r_near.excess_v_per_m == pytest.approx(abs(r_near.worst_v_per_m) - 2000.0)
    assert r_near.max_reading_v_per_m == pytest.approx(below, rel=1e-9)
    assert not r_far.exceeded and r_far.limit_source == "survey" and r_far.excess_v_per_m < 0
    text = zone_sentence(r_near, lambda x: f"{x:.0f} V/m")
    assert text.startswith("bench EPA (limit 2000 V/m, its own): EXCEEDED by")
    assert "passed" in zone_sentence(r_far, lambda x: f"{x:.0f} V/m")


def test_reading_alone_decides_without_a_map():
    xy, v, rows = _setup()
    site = Site("box", BOX, zones=(Zone("bench EPA", shapely.box(3, 4, 7, 8), limit_v_per_m=2000.0),))
    (r,) = zone_results(None, site, rows, 4921.3)
    assert r.exceeded and r.worst_from == "reading"
