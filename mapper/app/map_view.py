"""The map widget: the site drawn with half-block cells, clicked to pick a point."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from rich.color import Color
from rich.segment import Segment
from rich.style import Style
from textual import events
from textual.geometry import Region
from textual.message import Message
from textual.reactive import reactive, var
from textual.strip import Strip
from textual.widget import Widget

from mapper.app.map_data import FreeMarkers, LiveMap
from mapper.app.raster import (
    Frame,
    Markers,
    SiteLayers,
    compose,
    make_frame,
    marker_pixels,
    sample_grid,
    site_layers,
)
from mapper.site.model import Site

UPPER_HALF = "▀"


@dataclass(frozen=True)
class MapScene:
    """Everything the map shows at one moment (big parts compared by identity).

    Attributes
    ----------
    layer : str
        Layer drawn: ``readings``, ``estimate`` or ``std``.
    live : LiveMap or None
        The latest live refit, ready to draw.
    scale : float
        The drawn layer's colour scale, V/m (:meth:`LiveMap.scale`).
    planned : Markers
        Planned points.
    free : FreeMarkers
        Free-position readings (drawn over the planned points).
    current : (x, y) or None
        Where the surveyor stands, metres.
    suggested : tuple of (x, y)
        Suggested places, metres.
    """

    layer: str
    live: LiveMap | None
    scale: float
    planned: Markers
    free: FreeMarkers
    current: tuple[float, float] | None
    suggested: tuple[tuple[float, float], ...] = ()


class MapView(Widget):
    """A site map of coloured half-block cells: the upper pixel in the foreground colour, the
    lower pixel in the background colour. Set :attr:`scene` and it redraws itself.

    Parameters
    ----------
    site : Site
        The site drawn.
    """

    #: What the map shows; each new scene is drawn, and only the rows that changed are refreshed
    #: (a ``var``: a plain reactive would repaint the whole map on every change).
    scene: reactive[MapScene | None] = var(None, init=False)

    class Clicked(Message):
        """The map was clicked at a site position (metres)."""

        def __init__(self, x: float, y: float) -> None:
            self.x = x
            self.y = y
            super().__init__()

    def __init__(self, site: Site, *, id: str | None = None) -> None:  # noqa: A002 - Textual's name
        super().__init__(id=id)
        self.site = site
        self._frame: Frame | None = None
        self._layers: SiteLayers | None = None
        self._field_px: np.ndarray | None = None
        self._field_key: tuple | None = None
        self._free_key: tuple | None = None
        self._free_count = 0
        self._free_mask: np.ndarray | None = None
        self._free_rgb: np.ndarray | None = None
        self._strips: list[Strip] = []
        self._pairs: np.ndarray | None = None
        self._styles: dict[int, Style] = {}

    # -------------------------------------------------------------- drawing
    def watch_scene(self) -> None:
        self._rebuild()

    def on_resize(self, event: events.Resize) -> None:
        self._frame = None
        self._rebuild()

    def _ensure_frame(self) -> Frame | None:
        w, h = self.size.width, self.size.height
        if w < 2 or h < 1:
            return None
        if self._frame is None or (self._frame.width, self._frame.height) != (w, 2 * h):
            self._frame = make_frame(self.site.outline.bounds, w, h)
            self._layers = site_layers(self._frame, self.site)
            self._field_key = None
        return self._frame

    def _field_pixels(self, frame: Frame, scene: MapScene) -> np.ndarray | None:
        live = scene.live
        if live is None or live.grid is None or scene.layer == "readings":
            return None
        key = (id(live), scene.layer, frame)
        if key != self._field_key:
            values = live.estimate if scene.layer == "estimate" else live.std
            px = sample_grid(frame, live.grid, values)
            if live.reach is not None and np.isfinite(live.reach_m):
                xx, yy = frame.centres()
                dist, _ = live.reach.query(np.column_stack([xx.ravel(), yy.ravel()]),
                                           distance_upper_bound=live.reach_m)
                px[~np.isfinite(dist).reshape(px.shape)] = np.nan
            self._field_px = px
            self._field_key = key
        return self._field_px

    def _free_overlay(self, frame: Frame, free: FreeMarkers) -> tuple[np.ndarray, np.ndarray]:
        """The free-position markers on pixels; readings added since the last time are painted
        onto the previous overlay (later ones on top)."""
        key = (free.generation, frame)
        if key != self._free_key or len(free.xy) < self._free_count:
            self._free_key, self._free_count = key, 0
            self._free_mask = np.zeros((frame.height, frame.width), bool)
            self._free_rgb = np.zeros((frame.height, frame.width, 3), np.uint8)
        if len(free.xy) > self._free_count:
            rows, cols, ok = marker_pixels(frame, free.xy[self._free_count:])
            self._free_mask[rows[ok], cols[ok]] = True
            self._free_rgb[rows[ok], cols[ok]] = free.rgb[self._free_count:][ok]
            self._free_count = len(free.xy)
        return self._free_mask, self._free_rgb

    def _style(self, pair: int) -> Style:
        """Style of a cell whose packed colours are ``top << 24 | bottom`` (24-bit RGB each)."""
        style = self._styles.get(pair)
        if style is None:
            t, b = pair >> 24, pair & 0xFFFFFF
            style = Style(
                color=Color.from_rgb(t >> 16, (t >> 8) & 255, t & 255),
                bgcolor=Color.from_rgb(b >> 16, (b >> 8) & 255, b & 255),
            )
            self._styles[pair] = style
        return style

    def _rebuild(self) -> None:
        scene = self.scene
        frame = self._ensure_frame()
        if frame is None or self._layers is None or scene is None:
            return
        img = compose(
            frame, self._layers, layer=scene.layer, field_values=self._field_pixels(frame, scene),
            scale=scene.scale, markers=scene.planned, current=scene.current, suggested=scene.suggested,
            overlay=self._free_overlay(frame, scene.free),
        )
        old = self._strips
        self._strips = self.image_strips(img)
        changed = [y for y, strip in enumerate(self._strips) if y >= len(old) or strip is not old[y]]
        if len(changed) == len(self._strips):
            self.refresh()
        elif changed:
            self.refresh(*(Region(0, y, self.size.width, 1) for y in changed))

    def image_strips(self, img: np.ndarray) -> list[Strip]:
        """Turn an RGB image (2h, w, 3) into h strips of half-block cells, runs merged.

        Rows whose pixels did not change since the last image keep their strips.
        """
        rgb = img.astype(np.int64)
        packed = (rgb[..., 0] << 16) | (rgb[..., 1] << 8) | rgb[..., 2]
        pairs = (packed[0::2][: img.shape[0] // 2] << 24) | packed[1::2][: img.shape[0] // 2]
        previous = self._pairs if self._pairs is not None and self._pairs.shape == pairs.shape else None
        strips = []
        for r in range(pairs.shape[0]):
            row = pairs[r]
            if previous is not None and r < len(self._strips) and np.array_equal(row, previous[r]):
                strips.append(self._strips[r])
                continue
            change = np.flatnonzero(row[1:] != row[:-1]) + 1
            starts = [0, *change.tolist()]
            ends = [*change.tolist(), len(row)]
            values = row[starts].tolist()
            segments = [
                Segment(UPPER_HALF * (e - b), self._style(v)) for b, e, v in zip(starts, ends, values, strict=True)
            ]
            strips.append(Strip(segments, img.shape[1]))
        self._pairs = pairs
        return strips

    def render_line(self, y: int) -> Strip:
        if y < len(self._strips):
            return self._strips[y]
        return Strip.blank(self.size.width)

    # -------------------------------------------------------------- clicks
    def on_click(self, event: events.Click) -> None:
        frame = self._ensure_frame()
        if frame is None:
            return
        # The click names a cell; take the middle between its two pixels.
        x, y = frame.to_site(event.x, 2 * event.y + 0.5)
        self.post_message(self.Clicked(x, y))

    @property
    def frame(self) -> Frame | None:
        """The current placement of the site (``None`` before the first layout)."""
        return self._frame
