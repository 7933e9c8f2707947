"""What the survey app's map draws, prepared away from the widget.

:class:`LiveMap` is one refit made ready to draw (in the refit's worker thread: the field as the
meter reads it, the colour scale of each layer, the positions that bound how far the map
reaches). :class:`MarkerBook` keeps the planned points and the free-position readings as map
markers, and adds each new reading to them instead of going through the whole survey again.
Colours and signs come from :mod:`mapper.features.colour_scale`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from mapper.app.palette import FEATURE_COLOURS, hex_rgb
from mapper.app.raster import Markers
from mapper.features.colour_scale import colours_rgb, display_sign, uncertainty_scale
from mapper.readings.model import Reading

if TYPE_CHECKING:
    from scipy.spatial import cKDTree

    from mapper.workflow import LiveResult

#: The live map colours places within this many grid spacings of a reading; farther out it
#: would show extrapolation (common practice, no source).
REACH_SPACINGS = 2.0


@dataclass(frozen=True, eq=False)
class LiveMap:
    """One live refit, ready to draw (compared by identity: each refit is a new map).

    Attributes
    ----------
    result : LiveResult
        What the refit produced.
    estimate : ndarray or None
        The field estimate in the survey's sign convention (as the meter reads it), V/m.
    std : ndarray or None
        Its standard deviation, V/m.
    std_scale_v_per_m : float
        Full-colour magnitude of the uncertainty layer, V/m.
    reach : cKDTree or None
        Positions of the readings fitted, metres: the field is drawn only near them.
    reach_m : float
        How near, metres.
    """

    result: LiveResult
    estimate: np.ndarray | None = None
    std: np.ndarray | None = None
    std_scale_v_per_m: float = 1.0
    reach: cKDTree | None = None
    reach_m: float = np.inf

    @property
    def grid(self):
        """The field grid of the refit, or ``None``."""
        return self.result.grid

    def scale(self, layer: str, threshold_v_per_m: float) -> float:
        """What a layer's colours are scaled to, V/m.

        The signed layers use one fixed scale tied to the action level (the same colours as the
        report and the GeoPackage styles, whatever has been read so far); the uncertainty layer
        spans its values.
        """
        return self.std_scale_v_per_m if layer == "std" and self.grid is not None else threshold_v_per_m


def prepare_live_map(
    result: LiveResult, readings: list[Reading], sign_convention: str, spacing_m: float
) -> LiveMap:
    """Make a refit ready to draw (meant for the refit's worker thread).

    Parameters
    ----------
    result : LiveResult
        The refit.
    readings : list of Reading
        The readings it was made from (field readings bound the map's reach).
    sign_convention : str
        The survey's sign convention: the estimate is drawn as the meter reads it.
    spacing_m : float
        Planned grid spacing, metres; the map reaches :data:`REACH_SPACINGS` of it.
    """
    grid = result.grid
    if grid is None:
        return LiveMap(result)
    xy = np.array([(r.x, r.y) for r in readings if r.kind == "field"], float).reshape(-1, 2)
    std = np.asarray(grid.std, float)
    return LiveMap(
        result,
        estimate=display_sign(sign_convention) * np.asarray(grid.estimate, float),
        std=std,
        std_scale_v_per_m=uncertainty_scale(std),
        reach=_tree(np.unique(xy, axis=0)) if len(xy) else None,
        reach_m=REACH_SPACINGS * spacing_m,
    )


@dataclass(frozen=True, eq=False)
class FreeMarkers:
    """Free-position readings as map markers, oldest first (later ones drawn on top).

    Attributes
    ----------
    xy : ndarray, shape (n, 2)
        Positions, site metres.
    rgb : ndarray, shape (n, 3), uint8
        Colours.
    generation : int
        Same generation: the markers of an older :class:`FreeMarkers` are the first rows of
        these, unchanged (a drawing of them can be extended instead of redrawn).
    """

    xy: np.ndarray
    rgb: np.ndarray
    generation: int

    @classmethod
    def empty(cls) -> FreeMarkers:
        """No markers."""
        return cls(np.zeros((0, 2)), np.zeros((0, 3), np.uint8), -1)


class MarkerBook:
    """The map's markers of a walk: planned points (to do, done) and free-position readings.

    On the ``readings`` layer a done point takes the colour of its mean and a free-position
    reading the colour of its value, both as the meter reads them; on the field layers they
    take the plain colours of done points and free positions.

    Parameters
    ----------
    session : WalkSession
        The walk; its ``revision`` and ``free_epoch`` say when to look again.
    """

    def __init__(self, session) -> None:
        self.session = session
        self._planned_key: tuple | None = None
        self._planned = Markers.empty()
        self._free_key: tuple | None = None
        self._generation = 0
        self._count = 0
        self._xy = np.zeros((0, 2))
        self._rgb = np.zeros((0, 3), np.uint8)
        self._free = FreeMarkers.empty()

    def _sign(self, sign: float | None) -> float:
        return display_sign(self.session.sign_convention) if sign is None else sign

    def planned(self, layer: str, sign: float | None = None) -> Markers:
        """The planned points; ``sign`` turns physics-sign means into the convention shown
        (default the survey's own, :func:`~mapper.features.colour_scale.display_sign`)."""
        s = self.session
        sign = self._sign(sign)
        key = (s.revision, layer == "readings", sign, s.threshold_v_per_m)
        if key != self._planned_key:
            means = s.point_means()
            xy = np.array([(p.x, p.y) for p in s.points], float).reshape(-1, 2)
            rgb = np.empty((len(s.points), 3), np.uint8)
            rgb[:] = hex_rgb(FEATURE_COLOURS["unvisited"])
            done = np.array([p.label in means for p in s.points], bool)
            if done.any():
                if layer == "readings":
                    values = np.array([means[p.label] for p, d in zip(s.points, done, strict=True) if d])
                    rgb[done] = colours_rgb(sign * values, s.threshold_v_per_m)
                else:
                    rgb[done] = hex_rgb(FEATURE_COLOURS["visited"])
            self._planned_key, self._planned = key, Markers(xy, rgb)
        return self._planned

    def free(self, layer: str, sign: float | None = None) -> FreeMarkers:
        """The free-position readings; new readings are added to the previous markers."""
        s = self.session
        sign = self._sign(sign)
        key = (s.free_epoch, layer == "readings", sign, s.threshold_v_per_m)
        if key != self._free_key:
            self._free_key, self._generation, self._count = key, self._generation + 1, 0
            self._xy, self._rgb = np.zeros((0, 2)), np.zeros((0, 3), np.uint8)
        new = s.newest_free_field_readings(s.free_field_count - self._count)
        if new or self._free.generation != self._generation:
            self._append(new, layer == "readings", sign)
            n = self._count
            self._free = FreeMarkers(self._xy[:n], self._rgb[:n], self._generation)
        return self._free

    def markers(self, layer: str, sign: float | None = None) -> Markers:
        """Planned points and free-position readings as one set of markers (free ones last)."""
        planned, free = self.planned(layer, sign), self.free(layer, sign)
        return Markers(np.vstack([planned.xy, free.xy]), np.vstack([planned.rgb, free.rgb]))

    def _append(self, readings: list[Reading], by_value: bool, sign: float) -> None:
        n, k = self._count, len(readings)
        if n + k > len(self._xy):  # grow by doubling: each reading is copied a bounded number of times
            capacity = max(2 * len(self._xy), n + k, 64)
            xy, rgb = np.zeros((capacity, 2)), np.zeros((capacity, 3), np.uint8)
            xy[:n], rgb[:n] = self._xy[:n], self._rgb[:n]
            self._xy, self._rgb = xy, rgb
        if k:
            self._xy[n:n + k] = [(r.x, r.y) for r in readings]
            if by_value:
                values = np.array([r.value_v_per_m for r in readings], float)
                self._rgb[n:n + k] = colours_rgb(sign * values, self.session.threshold_v_per_m)
            else:
                self._rgb[n:n + k] = hex_rgb(FEATURE_COLOURS["free"])
        self._count = n + k


__all__ = ["REACH_SPACINGS", "FreeMarkers", "LiveMap", "MarkerBook", "prepare_live_map"]


def _tree(xy: np.ndarray) -> cKDTree:
    """A k-d tree of positions (metres); scipy's spatial module is loaded on first use."""
    from scipy.spatial import cKDTree

    return cKDTree(xy)
