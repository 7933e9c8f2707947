"""Contour levels, iso-lines and filled bands of a field grid, clipped to the site outline.

Levels are chosen as "nice" numbers (1, 2, 2.5 or 5 times a power of ten) in the survey's display
unit, so a map in V/in gets lines at 100, 200, 300 V/in rather than at round V/m values; they are
stored in V/m. A signed field gets levels symmetric about zero.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from shapely.geometry import MultiLineString, MultiPolygon
from shapely.geometry.base import BaseGeometry

from mapper.errors import MapperError
from mapper.features._grid import clip_lines, extend_grid, filled_region, iso_line, polygonal
from mapper.field.model import FieldGrid
from mapper.nice import nice_ceiling
from mapper.units import canonical_unit, format_field, from_si, to_si

#: Mantissas of nice steps.



@dataclass(frozen=True)
class Levels:
    """Contour levels.

    Attributes
    ----------
    values_v_per_m : tuple of float
        Levels in V/m, strictly increasing.
    unit : str
        Display unit the levels are shown in.
    """

    values_v_per_m: tuple[float, ...]
    unit: str = "V/m"

    def __post_init__(self) -> None:
        values = np.asarray(self.values_v_per_m, dtype=float)
        if values.size == 0:
            raise MapperError("no contour levels given; give at least one level")
        if not np.isfinite(values).all():
            raise MapperError("contour levels must be finite numbers")
        if values.size > 1 and not (np.diff(values) > 0).all():
            raise MapperError(
                f"contour levels must be strictly increasing; got {', '.join(f'{v:g}' for v in values)}"
            )
        object.__setattr__(self, "values_v_per_m", tuple(float(v) for v in values))
        object.__setattr__(self, "unit", canonical_unit(self.unit))

    @classmethod
    def from_display(cls, values: Sequence[float], unit: str) -> Levels:
        """Levels given in a display unit, e.g. ``Levels.from_display([100, 200], "V/in")``."""
        return cls(tuple(to_si(float(v), unit) for v in values), unit)

    @property
    def display_values(self) -> tuple[float, ...]:
        """Levels in the display unit."""
        return tuple(from_si(v, self.unit) for v in self.values_v_per_m)

    def label(self, value_v_per_m: float) -> str:
        """A level formatted in the display unit, e.g. ``"4.921 kV/m"`` (4 significant digits)."""
        return format_field(value_v_per_m, self.unit, 4)


@dataclass(frozen=True)
class IsoLine:
    """The line(s) where the field estimate equals one level, clipped to the outline.

    Attributes
    ----------
    level_v_per_m : float
        Level, V/m.
    label : str
        Level in the display unit.
    geometry : shapely MultiLineString
        Lines in site metres (empty when the field never takes this value).
    """

    level_v_per_m: float
    label: str
    geometry: MultiLineString

    @property
    def length_m(self) -> float:
        """Total length, metres."""
        return float(self.geometry.length)


@dataclass(frozen=True)
class Band:
    """The part of the site whose estimate lies between two consecutive levels.

    Attributes
    ----------
    lower_v_per_m, upper_v_per_m : float
        Limits, V/m; ``-inf`` for the lowest band and ``+inf`` for the highest.
        A point belongs to the band when ``lower < E <= upper``.
    label : str
        Range in the display unit, e.g. ``"2-4 kV/m"``, ``"<= 2 kV/m"``, ``"> 10 kV/m"``.
    geometry : shapely MultiPolygon
        Valid polygons in site metres, clipped to the outline; may be empty.
    """

    lower_v_per_m: float
    upper_v_per_m: float
    label: str
    geometry: MultiPolygon

    @property
    def area_m2(self) -> float:
        """Area, square metres."""
        return float(self.geometry.area)


def nice_step(span: float, count: int) -> float:
    """The nice step (1, 2, 2.5 or 5 times a power of ten) nearest above ``span / count``.

    Parameters
    ----------
    span : float
        Range to divide, any unit, > 0.
    count : int
        Wanted number of intervals, >= 1.
    """
    return nice_ceiling(span / max(count, 1))


def nice_levels(
    vmin_v_per_m: float,
    vmax_v_per_m: float,
    *,
    unit: str = "V/m",
    count: int = 8,
    symmetric: bool | None = None,
) -> Levels:
    """Choose about ``count`` nice contour levels spanning a field range.

    Parameters
    ----------
    vmin_v_per_m, vmax_v_per_m : float
        Smallest and largest field values to cover, V/m.
    unit : str
        Display unit in which the levels are round numbers.
    count : int
        Wanted number of intervals (the result has roughly ``count - 1`` to ``count + 1`` levels).
    symmetric : bool, optional
        Levels symmetric about zero (including zero). Default: when the range crosses zero.

    Returns
    -------
    Levels
        Levels strictly inside the range (so every band is non-empty for a continuous field).
    """
    if not (math.isfinite(vmin_v_per_m) and math.isfinite(vmax_v_per_m)):
        raise MapperError("field range must be finite to choose contour levels")
    if count < 1:
        raise MapperError(f"level count must be at least 1; got {count}")
    unit = canonical_unit(unit)
    lo, hi = from_si(vmin_v_per_m, unit), from_si(vmax_v_per_m, unit)
    if hi < lo:
        lo, hi = hi, lo
    if hi - lo <= 1e-12 * max(abs(lo), abs(hi), 1e-300):
        # A constant field: one level at its value.
        return Levels((to_si(lo, unit),), unit)
    if symmetric is None:
        symmetric = lo < 0 < hi
    if symmetric:
        m = max(abs(lo), abs(hi))
        step = nice_step(2 * m, count)
        k = math.floor(m / step * (1 - 1e-12))
        ks = np.arange(-k, k + 1)
    else:
        step = nice_step(hi - lo, count)
        ks = np.arange(math.floor(lo / step), math.ceil(hi / step) + 1)
    display = [round(float(kk) * step, 12) for kk in ks]
    display = [v for v in display if lo < v < hi] or [round((lo + hi) / 2, 12)]
    return Levels(tuple(to_si(v, unit) for v in display), unit)


def field_range(grid: FieldGrid) -> tuple[float, float]:
    """Smallest and largest finite estimate of a grid, V/m."""
    est = np.asarray(grid.estimate, dtype=float)
    finite = est[np.isfinite(est)]
    if finite.size == 0:
        raise MapperError("field grid has no values inside the site; nothing to map")
    return float(finite.min()), float(finite.max())


def iso_lines(grid: FieldGrid, outline: BaseGeometry, levels: Levels) -> tuple[IsoLine, ...]:
    """Iso-lines of the field estimate at each level, clipped to the site outline.

    Parameters
    ----------
    grid : FieldGrid
        Field model (estimate in V/m).
    outline : shapely Polygon
        Site outline, metres.
    levels : Levels
        Levels to draw.

    Returns
    -------
    tuple of IsoLine
        One per level, in the order of ``levels``.
    """
    ext = extend_grid(grid, outline)
    z = ext.extend(np.asarray(grid.estimate, dtype=float))
    return tuple(
        IsoLine(v, levels.label(v), clip_lines(iso_line(ext.x, ext.y, z, v), outline))
        for v in levels.values_v_per_m
    )


def bands(grid: FieldGrid, outline: BaseGeometry, levels: Levels) -> tuple[Band, ...]:
    """Filled bands between consecutive levels that tile the site outline.

    The grid is first extended to the outline by nearest values (see :mod:`mapper.features._grid`),
    so cells cut by the outline are covered; the bands are then clipped to it. They are valid,
    do not overlap, and their areas sum to the outline's area.

    Parameters
    ----------
    grid : FieldGrid
        Field model (estimate in V/m).
    outline : shapely Polygon
        Site outline, metres.
    levels : Levels
        Band limits; ``len(levels) + 1`` bands result, the outer two open-ended.

    Returns
    -------
    tuple of Band
        From the lowest band to the highest.
    """
    ext = extend_grid(grid, outline)
    z = ext.extend(np.asarray(grid.estimate, dtype=float))
    zmin, zmax = float(z.min()), float(z.max())
    margin = 1.0 + abs(zmin) + abs(zmax)
    values = levels.values_v_per_m
    edges = [-math.inf, *values, math.inf]
    out = []
    for lower, upper in zip(edges[:-1], edges[1:], strict=True):
        lo = zmin - margin if math.isinf(lower) else lower
        hi = zmax + margin if math.isinf(upper) else upper
        if lo >= zmax or hi < zmin:
            geom = MultiPolygon()
        else:
            geom = polygonal(filled_region(ext.x, ext.y, z, lo, hi).intersection(outline))
        out.append(Band(lower, upper, _band_label(levels, lower, upper), geom))
    return tuple(out)


def _band_label(levels: Levels, lower: float, upper: float) -> str:
    if math.isinf(lower):
        return f"<= {levels.label(upper)}"
    if math.isinf(upper):
        return f"> {levels.label(lower)}"
    lo = f"{from_si(lower, levels.unit):.6g}"
    return f"{lo} to {levels.label(upper)}"


__all__ = [
    "Band",
    "IsoLine",
    "Levels",
    "bands",
    "field_range",
    "iso_lines",
    "nice_levels",
    "nice_step",
]
