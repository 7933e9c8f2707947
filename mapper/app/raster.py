"""The site map as a pixel image for half-block terminal cells (two square-ish pixels per cell).

Pure numpy: :func:`make_frame` fits the site into the widget, :func:`site_layers` rasterises the
outline, assets and zones once per size, and :func:`compose` paints one frame of the map.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import shapely

from mapper.app.palette import FEATURE_COLOURS, hex_rgb, sequential
from mapper.features.colour_scale import colours_rgb
from mapper.site.model import Site

#: Map layers the surveyor switches between.
LAYERS = ("readings", "estimate", "std")
LAYER_TITLES = {"readings": "readings", "estimate": "field estimate", "std": "standard deviation"}


@dataclass(frozen=True)
class Frame:
    """Placement of the site in a pixel image.

    Attributes
    ----------
    width, height : int
        Image size, pixels (height = 2 x terminal rows).
    x0, y_top : float
        Site coordinates of the image's top-left corner, metres.
    m_per_px : float
        Pixel size, metres (pixels are taken as square: a terminal cell is about twice as tall
        as wide, and holds two pixels stacked).
    """

    width: int
    height: int
    x0: float
    y_top: float
    m_per_px: float

    def to_pixel(self, x: float, y: float) -> tuple[int, int]:
        """Pixel (column, row) holding a site position, metres."""
        return int(math.floor((x - self.x0) / self.m_per_px)), int(math.floor((self.y_top - y) / self.m_per_px))

    def to_site(self, col: float, row: float) -> tuple[float, float]:
        """Site position (metres) of a pixel's centre."""
        return self.x0 + (col + 0.5) * self.m_per_px, self.y_top - (row + 0.5) * self.m_per_px

    def centres(self) -> tuple[np.ndarray, np.ndarray]:
        """Site x and y (metres) of every pixel centre, shape (height, width)."""
        cols = self.x0 + (np.arange(self.width) + 0.5) * self.m_per_px
        rows = self.y_top - (np.arange(self.height) + 0.5) * self.m_per_px
        return np.meshgrid(cols, rows)


def make_frame(bounds: tuple[float, float, float, float], cells_wide: int, cells_high: int) -> Frame:
    """Fit site bounds (minx, miny, maxx, maxy; metres) into a widget, centred, one pixel margin."""
    width, height = max(1, cells_wide), max(2, 2 * cells_high)
    minx, miny, maxx, maxy = bounds
    span_x, span_y = max(maxx - minx, 1e-9), max(maxy - miny, 1e-9)
    m_per_px = max(span_x / max(width - 2, 1), span_y / max(height - 2, 1))
    x0 = (minx + maxx) / 2 - width * m_per_px / 2
    y_top = (miny + maxy) / 2 + height * m_per_px / 2
    return Frame(width, height, x0, y_top, m_per_px)


@dataclass(frozen=True)
class SiteLayers:
    """Boolean masks (height, width) of the site's drawn parts."""

    inside: np.ndarray
    outline: np.ndarray
    assets: np.ndarray
    zones: np.ndarray


def _edge_mask(geom, xx: np.ndarray, yy: np.ndarray, half: float) -> np.ndarray:
    """Pixels whose centre lies within ``half`` metres of a geometry's boundary (or of a line)."""
    line = geom.boundary if geom.geom_type.endswith("Polygon") else geom
    if geom.geom_type.endswith("Point"):  # a pillar or a marked spot: a dot of a few pixels
        half = 1.5 * half
    return shapely.dwithin(line, shapely.points(xx, yy), half)


def site_layers(frame: Frame, site: Site) -> SiteLayers:
    """Rasterise outline, assets and zones for a frame."""
    xx, yy = frame.centres()
    half = frame.m_per_px * 0.55
    inside = shapely.contains_xy(site.outline, xx, yy) | _edge_mask(site.outline, xx, yy, half)
    outline = _edge_mask(site.outline, xx, yy, half)
    assets = np.zeros_like(inside)
    for a in site.assets:
        assets |= _edge_mask(a.geometry, xx, yy, half)
    zones = np.zeros_like(inside)
    for z in site.zones:
        zones |= _edge_mask(z.geometry, xx, yy, half)
    return SiteLayers(inside, outline, assets, zones)


def sample_grid(frame: Frame, grid, values: np.ndarray) -> np.ndarray:
    """Nearest-cell values of a gridded field (cell centres ``grid.x``, ``grid.y``) at every pixel."""
    gx, gy = np.asarray(grid.x, float), np.asarray(grid.y, float)
    xx, yy = frame.centres()
    j = np.clip(np.searchsorted(gx, xx[0]) if len(gx) > 1 else np.zeros(frame.width, int), 0, len(gx) - 1)
    i = np.clip(np.searchsorted(gy, yy[:, 0]) if len(gy) > 1 else np.zeros(frame.height, int), 0, len(gy) - 1)
    # searchsorted gives the cell to the right; step back where the left neighbour is nearer.
    if len(gx) > 1:
        j = np.where((j > 0) & (np.abs(xx[0] - gx[np.maximum(j - 1, 0)]) < np.abs(xx[0] - gx[j])), j - 1, j)
    if len(gy) > 1:
        i = np.where((i > 0) & (np.abs(yy[:, 0] - gy[np.maximum(i - 1, 0)]) < np.abs(yy[:, 0] - gy[i])), i - 1, i)
    out = np.asarray(values, float)[np.ix_(i, j)]
    # Pixels outside the grid's extent (beyond half a cell) get no value.
    cell = abs(gx[1] - gx[0]) if len(gx) > 1 else (abs(gy[1] - gy[0]) if len(gy) > 1 else frame.m_per_px)
    far_x = (xx[0] < gx[0] - cell / 2) | (xx[0] > gx[-1] + cell / 2)
    far_y = (yy[:, 0] < gy[0] - cell / 2) | (yy[:, 0] > gy[-1] + cell / 2)
    out[:, far_x] = np.nan
    out[far_y, :] = np.nan
    return out


@dataclass(frozen=True, eq=False)
class Markers:
    """Points drawn on the map, one pixel each.

    Attributes
    ----------
    xy : ndarray, shape (n, 2)
        Positions, site metres.
    rgb : ndarray, shape (n, 3), uint8
        Colours.
    """

    xy: np.ndarray
    rgb: np.ndarray

    @classmethod
    def empty(cls) -> Markers:
        """No markers."""
        return cls(np.zeros((0, 2)), np.zeros((0, 3), np.uint8))


def marker_pixels(frame: Frame, xy: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pixel rows and columns of marker positions (n, 2; metres), and which fall in the frame."""
    cols = np.floor((xy[:, 0] - frame.x0) / frame.m_per_px).astype(int)
    rows = np.floor((frame.y_top - xy[:, 1]) / frame.m_per_px).astype(int)
    ok = (cols >= 0) & (cols < frame.width) & (rows >= 0) & (rows < frame.height)
    return rows, cols, ok


def _paint(img: np.ndarray, frame: Frame, x: float, y: float, colour, radius: int = 0, ring: bool = False) -> None:
    c, r = frame.to_pixel(x, y)
    for dr in range(-radius, radius + 1):
        for dc in range(-radius, radius + 1):
            if ring and max(abs(dr), abs(dc)) != radius:
                continue
            rr, cc = r + dr, c + dc
            if 0 <= rr < frame.height and 0 <= cc < frame.width:
                img[rr, cc] = colour


def compose(
    frame: Frame,
    layers: SiteLayers,
    *,
    layer: str,
    field_values: np.ndarray | None,
    scale: float,
    markers: Markers,
    current: tuple[float, float] | None,
    suggested: Sequence[tuple[float, float]] = (),
    overlay: tuple[np.ndarray, np.ndarray] | None = None,
) -> np.ndarray:
    """Paint one map image.

    Parameters
    ----------
    frame : Frame
        Placement.
    layers : SiteLayers
        Rasterised site features.
    layer : str
        ``readings`` (site grey, points coloured by their readings), ``estimate`` (the field on
        the action-level scale of :mod:`mapper.features.colour_scale`) or ``std`` (sequential
        colours of the standard deviation).
    field_values : ndarray or None
        Per-pixel estimate or std, V/m (from :func:`sample_grid`), for the field layers.
    scale : float
        ``estimate``: the action level the colour bands are tied to, V/m; ``std``: the
        full-colour magnitude, V/m.
    markers : Markers
        Planned points and free-position readings (later ones drawn on top).
    current : (x, y) or None
        Where the surveyor stands, metres (drawn as a ring).
    suggested : sequence of (x, y)
        Suggested places, metres.
    overlay : (ndarray, ndarray), optional
        Markers already placed on pixels: a mask (height, width) and colours (height, width, 3),
        drawn over ``markers`` (the map keeps thousands of free-position readings this way).

    Returns
    -------
    ndarray, shape (height, width, 3), uint8
    """
    img = np.empty((frame.height, frame.width, 3), dtype=np.uint8)
    img[:] = hex_rgb(FEATURE_COLOURS["outside"])
    img[layers.inside] = hex_rgb(FEATURE_COLOURS["inside"])
    if layer != "readings" and field_values is not None:
        ok = layers.inside & np.isfinite(field_values)
        colours = colours_rgb(field_values, scale) if layer == "estimate" else sequential(field_values, scale)
        img[ok] = colours[ok]
    img[layers.zones] = hex_rgb(FEATURE_COLOURS["zone"])
    img[layers.assets] = hex_rgb(FEATURE_COLOURS["asset"])
    img[layers.outline] = hex_rgb(FEATURE_COLOURS["outline"])
    if len(markers.xy):
        rows, cols, ok = marker_pixels(frame, markers.xy)
        img[rows[ok], cols[ok]] = markers.rgb[ok]
    if overlay is not None:  # markers painted beforehand (mask, colours), drawn over the others
        mask, rgb = overlay
        img[mask] = rgb[mask]
    for sx, sy in suggested:
        _paint(img, frame, sx, sy, hex_rgb(FEATURE_COLOURS["suggested"]), radius=1, ring=True)
    if current is not None:
        _paint(img, frame, current[0], current[1], hex_rgb(FEATURE_COLOURS["current"]), radius=1, ring=True)
        _paint(img, frame, current[0], current[1], hex_rgb(FEATURE_COLOURS["current"]))
    return img
