"""Shared grid machinery: extending a field grid to its outline and turning it into polygons.

A :class:`~mapper.field.model.FieldGrid` holds values at cell centres, NaN where the centre lies
outside the site. Cells cut by the outline therefore have no value, and contours drawn on the raw
grid stop up to half a cell short of the outline. Every polygon this package makes is drawn on the
grid *extended* by nearest values: padded so that it covers the outline's bounding box plus one
cell on each side, with each missing node given the value of the nearest node inside the site. The
result is then clipped to the outline, so bands tile the site exactly and hotspots reach its edge.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import contourpy
import numpy as np
import shapely
from scipy import ndimage
from shapely.geometry import MultiLineString, MultiPolygon, Polygon
from shapely.geometry.base import BaseGeometry

from mapper.errors import MapperError
from mapper.field.model import FieldGrid


@dataclass(frozen=True)
class ExtendedGrid:
    """A field grid padded to cover an outline, NaNs filled with the nearest inside value.

    Attributes
    ----------
    x : ndarray, shape (mx,)
        Node x coordinates, metres, regular.
    y : ndarray, shape (my,)
        Node y coordinates, metres, regular.
    source : tuple of slice
        Where the original grid sits inside the extended one: ``extended[source] = original``.
    nearest : tuple of ndarray
        Row and column indices of the nearest original finite node for every extended node;
        ``values[nearest]`` extends any array shaped like the padded grid.
    inside : ndarray of bool, shape (my, mx)
        Nodes that held a finite value in the original grid.
    """

    x: np.ndarray
    y: np.ndarray
    source: tuple[slice, slice]
    nearest: tuple[np.ndarray, np.ndarray]
    inside: np.ndarray

    def pad(self, values: np.ndarray) -> np.ndarray:
        """Place an array shaped like the original grid into the padded shape, NaN elsewhere."""
        out = np.full(self.inside.shape, np.nan)
        out[self.source] = values
        return out

    def extend(self, values: np.ndarray) -> np.ndarray:
        """Extend an array shaped like the original grid by nearest inside values.

        Parameters
        ----------
        values : ndarray, shape (ny, nx)
            Values on the original grid; only nodes inside the site are used.
        """
        padded = self.pad(values)
        return padded[self.nearest]

    @property
    def xx(self) -> np.ndarray:
        """Node x coordinates as a (my, mx) array, metres."""
        return np.broadcast_to(self.x[None, :], self.inside.shape)

    @property
    def yy(self) -> np.ndarray:
        """Node y coordinates as a (my, mx) array, metres."""
        return np.broadcast_to(self.y[:, None], self.inside.shape)


def check_grid(grid: FieldGrid) -> tuple[float, float]:
    """Check that a field grid is regular and has values; return its spacings (dx, dy) in metres."""
    x = np.asarray(grid.x, dtype=float)
    y = np.asarray(grid.y, dtype=float)
    est = np.asarray(grid.estimate, dtype=float)
    if x.ndim != 1 or y.ndim != 1 or est.shape != (len(y), len(x)):
        raise MapperError(
            f"field grid shapes do not agree: x {x.shape}, y {y.shape}, estimate {est.shape}; "
            "expected estimate shaped (len(y), len(x))"
        )
    if len(x) < 2 or len(y) < 2:
        raise MapperError(f"field grid has {len(x)} x {len(y)} nodes; at least 2 x 2 are needed")
    dxs, dys = np.diff(x), np.diff(y)
    dx, dy = float(dxs.mean()), float(dys.mean())
    if (
        dx <= 0
        or dy <= 0
        or not np.allclose(dxs, dx, rtol=1e-6)
        or not np.allclose(dys, dy, rtol=1e-6)
    ):
        raise MapperError("field grid coordinates must be increasing and evenly spaced")
    if not np.isfinite(est).any():
        raise MapperError("field grid has no values inside the site; nothing to map")
    return dx, dy


def extend_grid(grid: FieldGrid, outline: BaseGeometry) -> ExtendedGrid:
    """Pad a field grid to cover ``outline`` and map every node to its nearest inside node.

    Parameters
    ----------
    grid : FieldGrid
        Field model; its NaN nodes are those outside the site.
    outline : shapely geometry
        Site outline, metres.

    Returns
    -------
    ExtendedGrid
    """
    dx, dy = check_grid(grid)
    x = np.asarray(grid.x, dtype=float)
    y = np.asarray(grid.y, dtype=float)
    minx, miny, maxx, maxy = outline.bounds
    left = max(0, math.ceil((x[0] - minx) / dx)) + 1
    right = max(0, math.ceil((maxx - x[-1]) / dx)) + 1
    below = max(0, math.ceil((y[0] - miny) / dy)) + 1
    above = max(0, math.ceil((maxy - y[-1]) / dy)) + 1
    xe = x[0] + dx * np.arange(-left, len(x) + right)
    ye = y[0] + dy * np.arange(-below, len(y) + above)
    xe[left : left + len(x)] = x
    ye[below : below + len(y)] = y
    source = (slice(below, below + len(y)), slice(left, left + len(x)))
    inside = np.zeros((len(ye), len(xe)), dtype=bool)
    inside[source] = np.isfinite(np.asarray(grid.estimate, dtype=float))
    _, idx = ndimage.distance_transform_edt(~inside, sampling=(dy, dx), return_indices=True)
    return ExtendedGrid(x=xe, y=ye, source=source, nearest=(idx[0], idx[1]), inside=inside)


def polygonal(geom: BaseGeometry) -> MultiPolygon:
    """Keep only the polygonal parts of a geometry, as a valid MultiPolygon (possibly empty)."""
    if geom.is_empty:
        return MultiPolygon()
    if not geom.is_valid:
        geom = shapely.make_valid(geom)
    multi = MultiPolygon([g for g in _flat(geom) if isinstance(g, Polygon) and g.area > 0])
    if not multi.is_valid:
        multi = MultiPolygon(
            [g for g in _flat(shapely.make_valid(multi)) if isinstance(g, Polygon)]
        )
    return multi


def _flat(geom: BaseGeometry) -> list[BaseGeometry]:
    """All simple parts of a geometry, descending into nested collections."""
    out = []
    for part in shapely.get_parts(geom):
        if part.geom_type.startswith("Multi") or part.geom_type == "GeometryCollection":
            out.extend(_flat(part))
        else:
            out.append(part)
    return out


def filled_region(
    x: np.ndarray, y: np.ndarray, z: np.ndarray, lower: float, upper: float
) -> MultiPolygon:
    """Polygons where ``lower < z <= upper`` by marching squares on a complete grid.

    Parameters
    ----------
    x, y : ndarray
        Node coordinates, metres.
    z : ndarray, shape (len(y), len(x))
        Values without NaN.
    lower, upper : float
        Band limits in the units of ``z``; use values beyond the data range for open bands.
    """
    gen = contourpy.contour_generator(x, y, z, name="serial", fill_type="OuterOffset")
    points, offsets = gen.filled(lower, upper)
    polys = []
    for pts, offs in zip(points, offsets, strict=True):
        rings = [pts[offs[i] : offs[i + 1]] for i in range(len(offs) - 1)]
        rings = [r for r in rings if len(r) >= 4]
        if not rings:
            continue
        polys.append(Polygon(rings[0], rings[1:]))
    if not polys:
        return MultiPolygon()
    merged = shapely.union_all(polys) if len(polys) > 1 else polys[0]
    return polygonal(merged)


def iso_line(x: np.ndarray, y: np.ndarray, z: np.ndarray, level: float) -> MultiLineString:
    """Lines where ``z == level`` on a complete grid (linear interpolation along cell edges)."""
    gen = contourpy.contour_generator(x, y, z, name="serial", line_type="Separate")
    lines = [ln for ln in gen.lines(level) if len(ln) >= 2]
    return MultiLineString(lines) if lines else MultiLineString()


def clip_lines(lines: MultiLineString, region: BaseGeometry) -> MultiLineString:
    """Clip lines to a region, keeping only line parts."""
    if lines.is_empty:
        return lines
    clipped = shapely.intersection(lines, region)
    parts = []
    for g in shapely.get_parts(clipped):
        if g.geom_type == "LineString" and g.length > 0:
            parts.append(g)
        elif g.geom_type == "MultiLineString":
            parts.extend(p for p in g.geoms if p.length > 0)
    return MultiLineString(parts) if parts else MultiLineString()


def nodes_in(geom: BaseGeometry, xx: np.ndarray, yy: np.ndarray) -> np.ndarray:
    """Boolean mask of nodes whose centre lies in or on ``geom`` (tested within its bounds only)."""
    out = np.zeros(np.shape(xx), dtype=bool)
    if geom.is_empty:
        return out
    minx, miny, maxx, maxy = geom.bounds
    box = (xx >= minx) & (xx <= maxx) & (yy >= miny) & (yy <= maxy)
    if box.any():
        shapely.prepare(geom)
        out[box] = shapely.intersects_xy(geom, xx[box], yy[box])
    return out


def regular_spacing(grid: FieldGrid) -> float:
    """The larger of the two grid spacings, metres."""
    dx, dy = check_grid(grid)
    return max(dx, dy)
