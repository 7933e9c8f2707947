"""Analytic fields and small builders shared by the map-feature tests.

The point-charge field is the method of images for a charge q at height h over a grounded
plane (Griffiths, Introduction to Electrodynamics, sec. 3.2.1): image -q at -h. Just above the
plane the field is vertical, E_z = sigma / eps0 = -q h / (2 pi eps0 (r^2 + h^2)^(3/2)), with the
physics sign convention (positive upward), so a positive charge gives a negative reading.
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import shapely
from scipy.constants import epsilon_0

from mapper.field.model import FieldGrid
from mapper.readings.model import CorrectedReading, Reading
from mapper.site.model import Asset, Site, Zone


def point_charge_ez(x, y, q_c, x0, y0, h_m, z_m=0.0):
    """Vertical field (V/m) at height z_m over a grounded plane from charge q_c (C) at height h_m.

    Superposes the charge and its image (Griffiths sec. 3.2.1). At z_m = 0 this equals
    -q h / (2 pi eps0 (r^2 + h^2)^1.5).
    """
    r2 = (np.asarray(x) - x0) ** 2 + (np.asarray(y) - y0) ** 2
    k = q_c / (4 * np.pi * epsilon_0)
    return k * (
        (z_m - h_m) / (r2 + (z_m - h_m) ** 2) ** 1.5 - (z_m + h_m) / (r2 + (z_m + h_m) ** 2) ** 1.5
    )


def plane_field_closed_form(r, q_c, h_m):
    """Griffiths sec. 3.2.1 closed form at the plane: E = -q h / (2 pi eps0 (r^2 + h^2)^1.5), V/m."""
    return -q_c * h_m / (2 * np.pi * epsilon_0 * (np.asarray(r) ** 2 + h_m**2) ** 1.5)


def charge_for_peak(peak_v_per_m, h_m):
    """Charge (C) whose field at the plane right below it has magnitude peak_v_per_m."""
    return peak_v_per_m * 2 * np.pi * epsilon_0 * h_m**2


def grid_over(outline, cell_m, func, std=None, origin=None):
    """A FieldGrid of cell centres covering ``outline``'s bounds, NaN outside the outline.

    ``func(xx, yy)`` gives the estimate; ``std`` is a number, a function or None (NaN).
    ``origin`` shifts the first cell centre (default: half a cell inside the bounds).
    """
    minx, miny, maxx, maxy = outline.bounds
    x0, y0 = origin if origin is not None else (minx + cell_m / 2, miny + cell_m / 2)
    x = np.arange(x0, maxx, cell_m)
    y = np.arange(y0, maxy, cell_m)
    xx, yy = np.meshgrid(x, y)
    inside = shapely.contains_xy(outline, xx, yy)
    est = np.where(inside, func(xx, yy), np.nan)
    if std is None:
        sd = np.full(est.shape, np.nan)
    elif callable(std):
        sd = np.where(inside, std(xx, yy), np.nan)
    else:
        sd = np.where(inside, float(std), np.nan)
    return FieldGrid(x=x, y=y, estimate=est, std=sd, method="kriging")


def site(outline, assets=(), zones=(), name="Test hall"):
    """A Site from an outline (WKT or geometry) and assets / zones."""
    if isinstance(outline, str):
        outline = shapely.from_wkt(outline)
    return Site(name=name, outline=outline, assets=tuple(assets), zones=tuple(zones))


def asset(name, kind, wkt, sensitive=False, walkable=True):
    return Asset(name, kind, shapely.from_wkt(wkt), sensitive, walkable)


def zone(name, wkt, limit_v_per_m=None):
    return Zone(name, shapely.from_wkt(wkt), limit_v_per_m)


def reading(rid, x, y, value_v_per_m, flags=()):
    """A corrected field reading at (x, y) metres with value in V/m."""
    raw = Reading(
        id=rid,
        x=float(x),
        y=float(y),
        value_v_per_m=float(value_v_per_m),
        entered_value=float(value_v_per_m),
        entered_unit="V/m",
        time=datetime(2024, 5, 1, 8, 0, tzinfo=UTC),
        flags=tuple(flags),
    )
    return CorrectedReading(reading=raw, value_v_per_m=float(value_v_per_m))
