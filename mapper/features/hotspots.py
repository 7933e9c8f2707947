"""Hotspots: connected regions where the field magnitude reaches an action level.

A hotspot is a connected region where the estimate ``E >= t`` (positive polarity) or ``E <= -t``
(negative polarity), drawn by marching squares on the grid extended to the outline and clipped to
it. The probability of exceedance uses the normal approximation of the estimate's error, with the
kriging standard deviation ``s``:

    P(|E| >= t) = 1 - Phi((t - mu) / s) + Phi((-t - mu) / s)

The "probable exceedance" outline is where that probability is at least 0.5. For a fixed ``s`` it
grows with ``|mu|``, so ``P >= 0.5`` exactly where ``|mu| >= m*(s)`` for a critical magnitude
``m* <= t``; the outline is drawn as the zero contour of the margin ``|mu| - m*``, which is never
below ``|mu| - t`` at any node, so the probable outline always contains the hotspots.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import shapely
from scipy.spatial import cKDTree
from scipy.special import ndtr
from shapely.geometry import Polygon
from shapely.geometry.base import BaseGeometry

from mapper.errors import MapperError
from mapper.features._grid import (
    ExtendedGrid,
    extend_grid,
    filled_region,
    nodes_in,
    polygonal,
    regular_spacing,
)
from mapper.field.inputs import usable
from mapper.field.model import FieldGrid
from mapper.readings.model import CorrectedReading
from mapper.site.model import Site

POLARITIES = ("positive", "negative")
STATUSES = ("confirmed", "suspected", "measured")
#: Smallest radius of a measured hotspot around its reading, metres (our own choice: about the
#: footprint of a person holding a meter).
MEASURED_MIN_RADIUS_M = 0.25
#: What the ``measured`` status means, for every output that lists hotspots.
MEASURED_NOTE = ("measured = a reading reaches the level here while the map between readings stays "
                 "below it; the hotspot is the reading's own neighbourhood (its cell of the reading "
                 "layout, within half the distance to the nearest other reading)")


@dataclass(frozen=True)
class Hotspot:
    """A connected region at or above an action level.

    Attributes
    ----------
    id : str
        ``H1``, ``H2`` ... by decreasing peak magnitude (zone hotspots carry the zone name).
    polarity : str
        ``positive`` (E >= t) or ``negative`` (E <= -t).
    geometry : shapely Polygon
        Outline in site metres.
    area_m2 : float
        Area, square metres.
    threshold_v_per_m : float
        Action level that defined it, V/m (> 0).
    peak_v_per_m : float
        Signed estimate at the grid node of largest magnitude inside, V/m; for a ``measured``
        hotspot the reading of largest magnitude inside (the map stays below the level there).
    peak_x, peak_y : float
        Position of that node (or reading), metres.
    mean_v_per_m : float
        Signed mean estimate over the grid nodes inside, V/m; for a ``measured`` hotspot the
        mean of its readings at or beyond the level.
    reading_ids : tuple of int
        Corrected readings inside (within half a grid cell of the outline).
    max_reading_v_per_m : float or None
        Reading of largest magnitude among them with this polarity's sign, V/m.
    status : str
        ``confirmed`` when at least one reading inside reaches the level with this polarity,
        ``suspected`` when only the interpolation says so, ``measured`` when a reading reaches
        the level but the map stays below it there (the hotspot is then the reading's own
        neighbourhood, see :data:`MEASURED_NOTE`).
    p_exceed_max : float or None
        Largest P(|E| >= t) at the nodes inside; ``None`` when the field model has no
        standard deviation.
    nearest_asset : str or None
        Name of the nearest asset, ``None`` when the site has none.
    nearest_asset_m : float or None
        Distance to it, metres (0 when it touches or overlaps the hotspot).
    zones : tuple of str
        Names of the zones it touches.
    zone : str or None
        Zone whose own limit defined this hotspot; ``None`` for the survey's threshold.
    """

    id: str
    polarity: str
    geometry: Polygon
    area_m2: float
    threshold_v_per_m: float
    peak_v_per_m: float
    peak_x: float
    peak_y: float
    mean_v_per_m: float
    reading_ids: tuple[int, ...]
    max_reading_v_per_m: float | None
    status: str
    p_exceed_max: float | None
    nearest_asset: str | None
    nearest_asset_m: float | None
    zones: tuple[str, ...]
    zone: str | None = None

    def to_dict(self) -> dict:
        """JSON-ready description (SI units, geometry as WKT)."""
        return {
            "id": self.id,
            "polarity": self.polarity,
            "status": self.status,
            "area_m2": self.area_m2,
            "threshold_v_per_m": self.threshold_v_per_m,
            "peak_v_per_m": self.peak_v_per_m,
            "peak_x": self.peak_x,
            "peak_y": self.peak_y,
            "mean_v_per_m": self.mean_v_per_m,
            "reading_ids": list(self.reading_ids),
            "max_reading_v_per_m": self.max_reading_v_per_m,
            "p_exceed_max": self.p_exceed_max,
            "nearest_asset": self.nearest_asset,
            "nearest_asset_m": self.nearest_asset_m,
            "zones": list(self.zones),
            "zone": self.zone,
            "wkt": self.geometry.wkt,
        }


@dataclass(frozen=True)
class ProbableRegion:
    """A connected region where P(|E| >= t) >= 0.5 under the normal approximation.

    Attributes
    ----------
    id : str
        ``P1``, ``P2`` ... by decreasing area.
    geometry : shapely Polygon
        Outline in site metres.
    area_m2 : float
        Area, square metres.
    threshold_v_per_m : float
        Action level, V/m.
    p_exceed_max : float
        Largest exceedance probability at the nodes inside.
    hotspot_ids : tuple of str
        Hotspots it contains (empty: only the uncertainty says the level may be exceeded).
    """

    id: str
    geometry: Polygon
    area_m2: float
    threshold_v_per_m: float
    p_exceed_max: float
    hotspot_ids: tuple[str, ...]

    def to_dict(self) -> dict:
        """JSON-ready description (geometry as WKT)."""
        return {
            "id": self.id,
            "area_m2": self.area_m2,
            "threshold_v_per_m": self.threshold_v_per_m,
            "p_exceed_max": self.p_exceed_max,
            "hotspot_ids": list(self.hotspot_ids),
            "wkt": self.geometry.wkt,
        }


def check_threshold(threshold_v_per_m: float) -> float:
    """Refuse a non-positive or non-finite action level; return it as float (V/m)."""
    t = float(threshold_v_per_m)
    if not np.isfinite(t) or t <= 0:
        raise MapperError(
            f"threshold must be a positive field value; got {threshold_v_per_m!r} V/m"
        )
    return t


def exceedance_probability(
    estimate: np.ndarray, std: np.ndarray, threshold_v_per_m: float
) -> np.ndarray:
    """P(|E| >= t) when E is normal with mean ``estimate`` and standard deviation ``std``.

    Parameters
    ----------
    estimate : array_like
        Field estimate, V/m.
    std : array_like
        Standard deviation of the estimate, V/m. Zero gives a certain answer (1 where
        ``|estimate| >= t``, else 0); NaN gives NaN.
    threshold_v_per_m : float
        Action level t, V/m, > 0.

    Returns
    -------
    ndarray
        Probability in [0, 1], shaped like the broadcast inputs.
    """
    t = check_threshold(threshold_v_per_m)
    mu = np.asarray(estimate, dtype=float)
    s = np.asarray(std, dtype=float)
    mu, s = np.broadcast_arrays(mu, s)
    out = np.full(mu.shape, np.nan)
    certain = np.isfinite(mu) & (s == 0)
    out[certain] = (np.abs(mu[certain]) >= t).astype(float)
    ok = np.isfinite(mu) & np.isfinite(s) & (s > 0)
    m, sd = mu[ok], s[ok]
    out[ok] = ndtr((m - t) / sd) + ndtr((-t - m) / sd)
    return out


def critical_magnitude(std: np.ndarray, threshold_v_per_m: float) -> np.ndarray:
    """The magnitude m* with P(|E| >= t) = 0.5 when E ~ N(+-m*, std).

    Parameters
    ----------
    std : array_like
        Standard deviation, V/m (>= 0; NaN is treated as 0, a certain estimate).
    threshold_v_per_m : float
        Action level t, V/m.

    Returns
    -------
    ndarray
        m* in V/m, between 0 and t; ``-t`` where even a zero estimate has P >= 0.5
        (the uncertainty alone makes exceedance probable).
    """
    t = check_threshold(threshold_v_per_m)
    s = np.nan_to_num(np.asarray(std, dtype=float), nan=0.0)
    out = np.full(s.shape, t)
    # Where Phi(-2 t / s) is below double precision the lower tail cannot move the root off t.
    pos = (s > 0) & (ndtr(-2.0 * t / np.where(s > 0, s, 1.0)) > 1e-17)
    sd = s[pos]
    everywhere = 2.0 * ndtr(-t / sd) >= 0.5
    lo = np.zeros(sd.shape)
    hi = np.full(sd.shape, t)
    for _ in range(55):  # bisection on a function increasing in m, to 2**-55 of t
        mid = 0.5 * (lo + hi)
        above = ndtr((mid - t) / sd) + ndtr((-t - mid) / sd) >= 0.5
        hi = np.where(above, mid, hi)
        lo = np.where(above, lo, mid)
    out[pos] = np.where(everywhere, -t, hi)
    return out


def reading_arrays(readings: Sequence[CorrectedReading]) -> tuple[np.ndarray, np.ndarray]:
    """Ids (n,) and ``x, y, value_v_per_m`` rows (n, 3) of the usable field readings.

    Readings flagged ``excluded`` and readings of another kind than ``field`` are left out.
    """
    kept = usable(readings)
    ids = np.array([r.reading.id for r in kept], dtype=int)
    xyv = np.array([(r.reading.x, r.reading.y, r.value_v_per_m) for r in kept], dtype=float)
    return ids, xyv.reshape(-1, 3)


def _nearest_asset(site: Site, geom: BaseGeometry) -> tuple[str | None, float | None]:
    best: tuple[str | None, float | None] = (None, None)
    for asset in site.assets:
        d = float(geom.distance(asset.geometry))
        if best[1] is None or d < best[1]:
            best = (asset.name, d)
    return best


def signed_regions(
    ext: ExtendedGrid, z: np.ndarray, threshold_v_per_m: float, region: BaseGeometry
) -> list[tuple[str, Polygon]]:
    """Connected regions of an extended field at or beyond +-t, clipped to ``region``.

    Parameters
    ----------
    ext : ExtendedGrid
        Grid the values live on.
    z : ndarray
        Extended signed field, V/m, no NaN.
    threshold_v_per_m : float
        Level t, V/m.
    region : shapely geometry
        Clip region (the outline, or a zone inside it).

    Returns
    -------
    list of (polarity, Polygon)
    """
    t = check_threshold(threshold_v_per_m)
    zmin, zmax = float(z.min()), float(z.max())
    margin = 1.0 + abs(zmin) + abs(zmax)
    out: list[tuple[str, Polygon]] = []
    if zmax >= t:
        # contourpy fills lower < z <= upper; nudge the lower limit so that z == t is included.
        lower = np.nextafter(t, -np.inf)
        geom = polygonal(filled_region(ext.x, ext.y, z, lower, zmax + margin).intersection(region))
        out.extend(("positive", p) for p in geom.geoms)
    if zmin <= -t:
        geom = polygonal(filled_region(ext.x, ext.y, z, zmin - margin, -t).intersection(region))
        out.extend(("negative", p) for p in geom.geoms)
    return out


def find_hotspots(
    grid: FieldGrid,
    site: Site,
    threshold_v_per_m: float,
    readings: Sequence[CorrectedReading] = (),
    *,
    region: BaseGeometry | None = None,
    zone: str | None = None,
) -> tuple[Hotspot, ...]:
    """Find connected regions where |E| >= ``threshold_v_per_m``, both polarities.

    Parameters
    ----------
    grid : FieldGrid
        Field model; estimate and std in V/m, NaN outside the site.
    site : Site
        The site (outline, assets, zones), metres.
    threshold_v_per_m : float
        Action level t, V/m, > 0.
    readings : sequence of CorrectedReading
        Corrected field readings used for the confirmed/suspected status; readings flagged
        ``excluded`` are ignored.
    region : shapely geometry, optional
        Look only inside this part of the site (e.g. a zone); default the whole outline.
    zone : str, optional
        Name recorded in :attr:`Hotspot.zone` and used as the id prefix.

    Returns
    -------
    tuple of Hotspot
        Sorted by decreasing peak magnitude, ids ``H1``, ``H2`` ... (``<zone> H1`` ... for a zone).
    """
    t = check_threshold(threshold_v_per_m)
    outline = site.outline
    clip = outline if region is None else polygonal(region.intersection(outline))
    ext = extend_grid(grid, outline)
    est = np.asarray(grid.estimate, dtype=float)
    z = ext.extend(est)
    std = np.asarray(grid.std, dtype=float)
    has_std = bool(np.isfinite(std[np.isfinite(est)]).any())
    p_ext = (
        ext.extend(exceedance_probability(est, np.nan_to_num(std, nan=0.0), t)) if has_std else None
    )
    xx, yy = ext.xx, ext.yy
    ids, xyv = reading_arrays(readings)
    half_cell = 0.5 * regular_spacing(grid)

    def describe(polarity: str, poly: Polygon) -> dict:
        sign = 1.0 if polarity == "positive" else -1.0
        mask = nodes_in(poly, xx, yy)
        if not mask.any():
            # A sliver narrower than a cell: use the node nearest to a point inside it.
            rp = poly.representative_point()
            j = int(np.argmin(np.abs(ext.x - rp.x)))
            i = int(np.argmin(np.abs(ext.y - rp.y)))
            mask = np.zeros(z.shape, dtype=bool)
            mask[i, j] = True
        values = np.where(mask, sign * z, -np.inf)
        k = np.unravel_index(int(np.argmax(values)), z.shape)
        return dict(
            _region_facts(polarity, poly, site, t, ids, xyv, half_cell, zone),
            peak_v_per_m=float(z[k]),
            peak_x=float(ext.x[k[1]]),
            peak_y=float(ext.y[k[0]]),
            mean_v_per_m=float(z[mask].mean()),
            p_exceed_max=float(np.max(p_ext[mask])) if p_ext is not None else None,
        )

    found = [describe(polarity, poly) for polarity, poly in signed_regions(ext, z, t, clip)]
    _add_measured(found, describe, ids, xyv, t, clip)
    found.sort(key=lambda h: (-abs(h["peak_v_per_m"]), h["peak_x"], h["peak_y"]))
    prefix = f"{zone} H" if zone else "H"
    return tuple(Hotspot(id=f"{prefix}{n}", **h) for n, h in enumerate(found, start=1))


def reading_cells(xy: np.ndarray, clip: BaseGeometry) -> list[BaseGeometry]:
    """Each position's neighbourhood: its Voronoi cell among all positions, within a square of
    half-side half the distance to the nearest other position (at least
    :data:`MEASURED_MIN_RADIUS_M`), clipped.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Reading positions, metres.
    clip : shapely geometry
        Region the cells are clipped to (the outline, or a zone), metres.

    Returns
    -------
    list of shapely geometry
        One (possibly empty) polygonal geometry per position.
    """
    cells = ReadingCells(xy, clip)
    return [cells[i] for i in range(xy.shape[0])]


class ReadingCells:
    """The neighbourhoods of :func:`reading_cells`, each clipped only when asked for.

    The Voronoi diagram of all positions is made once; a survey of many readings with a few at
    the level clips only those few cells.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Reading positions, metres.
    clip : shapely geometry
        Region the cells are clipped to, metres.
    """

    def __init__(self, xy: np.ndarray, clip: BaseGeometry) -> None:
        self.clip = clip
        uniq, inverse = np.unique(np.round(xy, 3), axis=0, return_inverse=True)
        self.uniq, self.inverse = uniq, inverse.ravel()
        if uniq.shape[0] >= 2:
            d, _ = cKDTree(uniq).query(uniq, k=2)
            self.radius = np.maximum(d[:, 1] / 2.0, MEASURED_MIN_RADIUS_M)
        else:
            self.radius = np.full(uniq.shape[0], max(MEASURED_MIN_RADIUS_M, 1.0))
        self._voronoi: list[BaseGeometry] | None = None
        self._done: dict[int, BaseGeometry] = {}

    def _cells(self) -> list[BaseGeometry]:
        if self._voronoi is None:
            uniq, radius, clip = self.uniq, self.radius, self.clip
            if uniq.shape[0] >= 2:
                pts = shapely.points(uniq)
                env = shapely.box(*clip.buffer(float(radius.max()) + 1.0).bounds)
                vor = shapely.voronoi_polygons(shapely.multipoints(pts), extend_to=env, ordered=True)
                cells = list(shapely.get_parts(vor))
                if len(cells) != uniq.shape[0]:  # collinear input: fall back to discs alone
                    cells = [env] * uniq.shape[0]
            else:
                cells = [clip]
            self._voronoi = cells
        return self._voronoi

    def __getitem__(self, i: int) -> BaseGeometry:
        """The neighbourhood of position ``i``."""
        k = int(self.inverse[i])
        cell = self._done.get(k)
        if cell is None:
            # Clipped to a square of half-side r: on a square layout that is exactly the
            # layout's cell, so neighbouring cells share an edge.
            u, r = self.uniq[k], self.radius[k]
            square = shapely.box(u[0] - r, u[1] - r, u[0] + r, u[1] + r)
            cell = self._done[k] = polygonal(self._cells()[k].intersection(square).intersection(self.clip))
        return cell


def _region_facts(
    polarity: str,
    poly: Polygon,
    site: Site,
    t: float,
    ids: np.ndarray,
    xyv: np.ndarray,
    half_cell: float,
    zone: str | None,
) -> dict:
    """What a hotspot's outline alone decides: readings near it, status, asset, zones."""
    sign = 1.0 if polarity == "positive" else -1.0
    near = poly.buffer(half_cell)
    shapely.prepare(near)
    inside = np.zeros(len(xyv), bool)
    if len(xyv):
        # Only readings within the outline's bounds can be near it (a survey may hold many).
        minx, miny, maxx, maxy = near.bounds
        box = np.flatnonzero((xyv[:, 0] >= minx) & (xyv[:, 0] <= maxx) & (xyv[:, 1] >= miny) & (xyv[:, 1] <= maxy))
        inside[box] = shapely.intersects_xy(near, xyv[box, 0], xyv[box, 1])
    r_vals = xyv[inside, 2]
    same = r_vals[sign * r_vals > 0]
    asset, dist = _nearest_asset(site, poly)
    return dict(
        polarity=polarity,
        geometry=poly,
        area_m2=float(poly.area),
        threshold_v_per_m=t,
        reading_ids=tuple(int(v) for v in ids[inside]),
        max_reading_v_per_m=float(same[np.argmax(np.abs(same))]) if same.size else None,
        status="confirmed" if bool((sign * r_vals >= t).any()) else "suspected",
        nearest_asset=asset,
        nearest_asset_m=dist,
        zones=tuple(zn.name for zn in site.zones if zn.geometry.intersects(poly)),
        zone=zone,
    )


#: A reading this close to a hotspot's outline is inside it, metres (rounding of the outline's
#: vertices; our own choice, no source).
INSIDE_TOLERANCE_M = 1e-6


def _holding(found: list[dict], polarity: str, x: float, y: float) -> bool:
    """Whether a hotspot of ``polarity`` in ``found`` contains the point (x, y), metres."""
    pt = shapely.Point(x, y)
    return any(h["polarity"] == polarity and shapely.dwithin(h["geometry"], pt, INSIDE_TOLERANCE_M)
               for h in found)


def _join_mapped(found: list[dict], describe, polarity: str, cell: BaseGeometry) -> bool:
    """Union a reading's neighbourhood into the mapped hotspots of ``polarity`` it meets.

    All mapped hotspots it meets become one when their union with it is one polygon; otherwise
    it joins the first one it makes one polygon with. The joined hotspot is described again
    from the map (peak, mean, readings, status, nearest asset, zones). Returns whether it joined.
    """
    mapped = [h for h in found if h["polarity"] == polarity and h["status"] != "measured"
              and h["geometry"].intersects(cell)]
    if not mapped:
        return False
    choices = [mapped] + [[h] for h in mapped] if len(mapped) > 1 else [mapped]
    for targets in choices:
        merged = shapely.union_all([*(h["geometry"] for h in targets), cell])
        if merged.geom_type == "Polygon":
            found[:] = [h for h in found if all(h is not x for x in targets)]
            found.append(describe(polarity, merged))
            return True
    return False


def _add_measured(found: list[dict], describe, ids: np.ndarray, xyv: np.ndarray, t: float,
                  clip: BaseGeometry) -> None:
    """Make every reading at or beyond +-t lie inside a hotspot of its polarity (in place).

    A reading a hotspot of its polarity already contains is left alone. Otherwise its
    neighbourhood (:func:`reading_cells`) joins the mapped hotspots of the same polarity that it
    meets (:func:`_join_mapped`), or, merged with touching neighbourhoods of other such readings,
    becomes a hotspot of status ``measured`` whose peak is its reading of largest magnitude and
    whose mean is that of its exceeding readings (the map stays below the level there).

    Parameters
    ----------
    found : list of dict
        Hotspot fields so far (without ids); extended and edited in place.
    describe : callable
        ``describe(polarity, polygon) -> dict`` of hotspot fields for an outline.
    ids, xyv : ndarray
        Usable readings (:func:`reading_arrays`): ids and ``x, y, value`` rows, metres and V/m.
    t : float
        Action level, V/m.
    clip : shapely geometry
        Where hotspots may lie (the outline, or a zone inside it); readings outside are skipped.
    """
    if not len(xyv):
        return
    inside_clip = shapely.intersects_xy(clip.buffer(INSIDE_TOLERANCE_M), xyv[:, 0], xyv[:, 1])
    cells = None
    for polarity, sign in (("positive", 1.0), ("negative", -1.0)):
        exceed = np.flatnonzero(inside_clip & (sign * xyv[:, 2] >= t))
        todo = [k for k in exceed if not _holding(found, polarity, xyv[k, 0], xyv[k, 1])]
        if not todo:
            continue
        if cells is None:
            cells = ReadingCells(xyv[:, :2], clip)
        groups: list[tuple[BaseGeometry, list[int]]] = []
        for k in todo:
            if _holding(found, polarity, xyv[k, 0], xyv[k, 1]):
                continue  # a neighbour's cell already joined a mapped hotspot around it
            cell = cells[k]
            if cell.is_empty:
                cell = polygonal(shapely.Point(xyv[k, :2]).buffer(MEASURED_MIN_RADIUS_M, 4).intersection(clip))
            if _join_mapped(found, describe, polarity, cell):
                continue
            touching = [g for g in groups if g[0].intersects(cell)]
            geom = shapely.union_all([cell, *[g[0] for g in touching]])
            members = [k, *[m for g in touching for m in g[1]]]
            groups = [g for g in groups if all(g is not x for x in touching)] + [(geom, members)]
        for geom, members in groups:
            for poly in polygonal(geom).geoms:
                mem = [m for m in members
                       if shapely.dwithin(poly, shapely.Point(xyv[m, :2]), INSIDE_TOLERANCE_M)]
                if not mem:
                    continue
                vals = xyv[mem, 2]
                top = mem[int(np.argmax(sign * vals))]
                h = describe(polarity, poly)
                h.update(
                    peak_v_per_m=float(xyv[top, 2]), peak_x=float(xyv[top, 0]), peak_y=float(xyv[top, 1]),
                    mean_v_per_m=float(np.mean(vals)), max_reading_v_per_m=float(xyv[top, 2]),
                    status="measured",
                )
                found.append(h)


def reading_hotspots(
    site: Site,
    threshold_v_per_m: float,
    readings: Sequence[CorrectedReading],
    *,
    region: BaseGeometry | None = None,
    zone: str | None = None,
) -> tuple[Hotspot, ...]:
    """Hotspots from the readings alone, for when there is no field model (yet).

    Every usable reading at or beyond +-t gets its neighbourhood (:func:`reading_cells`) as a
    hotspot of status ``measured``, touching neighbourhoods of one polarity merged, as
    :func:`find_hotspots` does where the map stays below the level.

    Parameters
    ----------
    site : Site
        The site, metres.
    threshold_v_per_m : float
        Action level t, V/m, > 0.
    readings : sequence of CorrectedReading
        Corrected readings; only usable field readings count.
    region : shapely geometry, optional
        Look only inside this part of the site; default the whole outline.
    zone : str, optional
        Name recorded in :attr:`Hotspot.zone` and used as the id prefix.

    Returns
    -------
    tuple of Hotspot
        Sorted by decreasing peak magnitude; ``p_exceed_max`` is ``None``.
    """
    t = check_threshold(threshold_v_per_m)
    clip = site.outline if region is None else polygonal(region.intersection(site.outline))
    ids, xyv = reading_arrays(readings)

    def describe(polarity: str, poly: Polygon) -> dict:
        facts = _region_facts(polarity, poly, site, t, ids, xyv, 0.0, zone)
        return dict(facts, peak_v_per_m=np.nan, peak_x=np.nan, peak_y=np.nan, mean_v_per_m=np.nan,
                    p_exceed_max=None)

    found: list[dict] = []
    _add_measured(found, describe, ids, xyv, t, clip)
    found.sort(key=lambda h: (-abs(h["peak_v_per_m"]), h["peak_x"], h["peak_y"]))
    prefix = f"{zone} H" if zone else "H"
    return tuple(Hotspot(id=f"{prefix}{n}", **h) for n, h in enumerate(found, start=1))


def zone_hotspots(
    grid: FieldGrid,
    site: Site,
    readings: Sequence[CorrectedReading] = (),
    *,
    skip_limit_v_per_m: float | None = None,
) -> tuple[Hotspot, ...]:
    """Hotspots inside each zone that has its own limit, at that limit.

    Parameters
    ----------
    grid : FieldGrid
        Field model, V/m.
    site : Site
        Site whose zones carry ``limit_v_per_m``; zones without one are skipped.
    readings : sequence of CorrectedReading
        For the confirmed/suspected status.
    skip_limit_v_per_m : float, optional
        Skip zones whose limit equals this one (relative 1e-9), V/m: usually the survey's
        threshold, whose hotspots already name the zones they touch.

    Returns
    -------
    tuple of Hotspot
        Zone by zone in site order, each with :attr:`Hotspot.zone` set.
    """
    out: list[Hotspot] = []
    for zn in site.zones:
        if zn.limit_v_per_m is None:
            continue
        if skip_limit_v_per_m is not None and np.isclose(
            zn.limit_v_per_m, skip_limit_v_per_m, rtol=1e-9, atol=0.0
        ):
            continue
        out.extend(
            find_hotspots(grid, site, zn.limit_v_per_m, readings, region=zn.geometry, zone=zn.name)
        )
    return tuple(out)


def probable_exceedance(
    grid: FieldGrid,
    site: Site,
    threshold_v_per_m: float,
    hotspots: Sequence[Hotspot] = (),
) -> tuple[ProbableRegion, ...]:
    """Regions where P(|E| >= t) >= 0.5, even where the estimate itself is below t.

    Parameters
    ----------
    grid : FieldGrid
        Field model with its standard deviation, V/m. Nodes inside the site without a standard
        deviation are taken as certain.
    site : Site
        The site, metres.
    threshold_v_per_m : float
        Action level t, V/m.
    hotspots : sequence of Hotspot
        Hotspots at the same level, to record which ones each region contains.

    Returns
    -------
    tuple of ProbableRegion
        Sorted by decreasing area; empty when the grid has no standard deviation at all.
    """
    t = check_threshold(threshold_v_per_m)
    est = np.asarray(grid.estimate, dtype=float)
    std = np.asarray(grid.std, dtype=float)
    inside = np.isfinite(est)
    if not np.isfinite(std[inside]).any():
        return ()
    std0 = np.where(inside, np.nan_to_num(std, nan=0.0), np.nan)
    margin = np.abs(est) - critical_magnitude(std0, t)
    ext = extend_grid(grid, site.outline)
    d = ext.extend(margin)
    p = ext.extend(exceedance_probability(est, std0, t))
    if float(d.max()) < 0:
        return ()
    # Same convention as the hotspots: include d == 0.
    lower = np.nextafter(0.0, -np.inf)
    geom = polygonal(
        filled_region(ext.x, ext.y, d, lower, float(d.max()) + 1.0).intersection(site.outline)
    )
    xx, yy = ext.xx, ext.yy
    polys = sorted(geom.geoms, key=lambda g: -g.area)
    out = []
    for n, poly in enumerate(polys, start=1):
        mask = nodes_in(poly, xx, yy)
        if mask.any():
            p_max = float(p[mask].max())
        else:
            rp = poly.representative_point()
            i = int(np.argmin(np.abs(ext.y - rp.y)))
            j = int(np.argmin(np.abs(ext.x - rp.x)))
            p_max = float(p[i, j])
        inner = tuple(h.id for h in hotspots if poly.intersects(h.geometry.representative_point()))
        out.append(ProbableRegion(f"P{n}", poly, float(poly.area), t, p_max, inner))
    return tuple(out)


def exceedances_outside(
    hotspots: Sequence[Hotspot], readings: Sequence[CorrectedReading], threshold_v_per_m: float
) -> tuple[int, ...]:
    """Ids of readings at or beyond +-t that lie in no hotspot of their polarity.

    :func:`find_hotspots` puts every such reading inside the site into a hotspot, so this is
    empty for its output; it stays as a check (and catches readings placed outside the site).

    Parameters
    ----------
    hotspots : sequence of Hotspot
        Hotspots at ``threshold_v_per_m``.
    readings : sequence of CorrectedReading
        Corrected readings; only usable field readings count.
    threshold_v_per_m : float
        Action level t, V/m.
    """
    t = check_threshold(threshold_v_per_m)
    ids, xyv = reading_arrays(readings)
    out = []
    for i, (x, y, v) in zip(ids, xyv, strict=True):
        if abs(v) < t:
            continue
        polarity = "positive" if v > 0 else "negative"
        pt = shapely.Point(x, y)
        if not any(h.polarity == polarity and shapely.dwithin(h.geometry, pt, INSIDE_TOLERANCE_M)
                   for h in hotspots):
            out.append(int(i))
    return tuple(out)


__all__ = [
    "MEASURED_NOTE",
    "POLARITIES",
    "STATUSES",
    "Hotspot",
    "ProbableRegion",
    "critical_magnitude",
    "exceedance_probability",
    "exceedances_outside",
    "find_hotspots",
    "probable_exceedance",
    "reading_cells",
    "reading_hotspots",
    "signed_regions",
    "zone_hotspots",
]
