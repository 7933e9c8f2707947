"""Grid plans: points clipped to the outline, labelled by row and column, in serpentine order."""

from __future__ import annotations

import math
import string
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import Point
from shapely.ops import unary_union

from mapper.errors import MapperError
from mapper.site.model import Site

#: Default spacing, metres. IEC 61340-5-1 (as cited by a test laboratory) asks for at least
#: 5 points per 500 m^2 in area walking checks, i.e. one per 100 m^2 (10 m spacing); a field map
#: needs several points across each source, so we plan denser: 2 m (common practice, no source).
DEFAULT_SPACING_M = 2.0
LAYOUTS = ("square", "staggered")
#: Largest plan we create; beyond this the spacing is surely a typo (metres vs feet, etc.).
MAX_POINTS = 200_000


@dataclass(frozen=True)
class PlanPoint:
    """A planned measuring position.

    Attributes
    ----------
    label : str
        Row letter(s) and column number, e.g. ``"C12"``; row A is the lowest y.
    row, col : int
        Grid indices (0-based).
    x, y : float
        Position, site metres.
    order : int
        Position in the walking order (0-based).
    """

    label: str
    row: int
    col: int
    x: float
    y: float
    order: int


@dataclass(frozen=True)
class Plan:
    """A walking plan.

    Attributes
    ----------
    spacing_m : float
        Distance between neighbouring points, metres.
    layout : str
        ``square`` or ``staggered`` (odd rows shifted by half a spacing).
    points : tuple of PlanPoint
        Points in walking order.
    """

    spacing_m: float
    layout: str
    points: tuple[PlanPoint, ...]

    @property
    def walk_length_m(self) -> float:
        """Length of the walk through all points in order, metres."""
        if len(self.points) < 2:
            return 0.0
        xy = np.array([(p.x, p.y) for p in self.points])
        return float(np.hypot(*np.diff(xy, axis=0).T).sum())

    def covered_area_m2(self) -> float:
        """Area represented by the points (one cell each), square metres."""
        row_step = self.spacing_m * (math.sqrt(3) / 2 if self.layout == "staggered" else 1.0)
        return len(self.points) * self.spacing_m * row_step


def row_label(row: int) -> str:
    """Spreadsheet-style row letters: 0 -> A, 25 -> Z, 26 -> AA."""
    letters = ""
    row += 1
    while row:
        row, rem = divmod(row - 1, 26)
        letters = string.ascii_uppercase[rem] + letters
    return letters


def plan_grid(site: Site, spacing_m: float = DEFAULT_SPACING_M, layout: str = "square") -> Plan:
    """Plan grid points over a site.

    Points sit at the centres of spacing-sized cells tiling the outline's bounding box (so the
    first row and column are about half a spacing in from the walls), are kept when they fall
    inside the outline (boundary included) and outside non-walkable assets, labelled by row
    (letters, from low y) and column (numbers from 1, from low x), and ordered as a serpentine:
    row A left to right, row B right to left, and so on.

    Parameters
    ----------
    site : Site
        The site.
    spacing_m : float
        Distance between neighbouring points, metres.
    layout : str
        ``square``, or ``staggered`` (rows sqrt(3)/2 spacing apart, odd rows shifted by half a
        spacing: a triangular lattice, every point equidistant from its six neighbours).
    """
    if not (spacing_m > 0 and math.isfinite(spacing_m)):
        raise MapperError(f"spacing must be a positive number of metres, got {spacing_m}")
    if layout not in LAYOUTS:
        raise MapperError(f"unknown layout {layout!r}; accepted: {', '.join(LAYOUTS)}")
    minx, miny, maxx, maxy = site.outline.bounds
    row_step = spacing_m * (math.sqrt(3) / 2 if layout == "staggered" else 1.0)
    ncols = max(1, int(math.floor((maxx - minx) / spacing_m + 1e-9)))
    nrows = max(1, int(math.floor((maxy - miny) / row_step + 1e-9)))
    if ncols * nrows > MAX_POINTS:
        raise MapperError(
            f"spacing {spacing_m} m gives {ncols * nrows} points (over {MAX_POINTS}); use a larger spacing"
        )
    # Centre the lattice in the bounding box so margins are equal on both sides.
    x0 = minx + ((maxx - minx) - (ncols - 1) * spacing_m) / 2
    y0 = miny + ((maxy - miny) - (nrows - 1) * row_step) / 2
    blocked = [a.geometry for a in site.assets if not a.walkable and a.geometry.area > 0]
    blocking = unary_union(blocked) if blocked else None
    outline = site.outline
    shapely.prepare(outline)
    points: list[PlanPoint] = []
    for row in range(nrows):
        shift = spacing_m / 2 if (layout == "staggered" and row % 2) else 0.0
        y = y0 + row * row_step
        cols = range(ncols) if row % 2 == 0 else range(ncols - 1, -1, -1)
        for col in cols:
            x = x0 + col * spacing_m + shift
            if not outline.covers(Point(x, y)):
                continue
            if blocking is not None and blocking.contains(Point(x, y)):
                continue
            points.append(PlanPoint(f"{row_label(row)}{col + 1}", row, col, float(x), float(y), len(points)))
    if not points:
        raise MapperError(f"spacing {spacing_m} m leaves no planned point inside the outline")
    return Plan(spacing_m=float(spacing_m), layout=layout, points=tuple(points))
