"""The map widget: the site drawn with half-block cells, clicked to pick a point."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from rich.color import Color
from rich.segment import Segment
from rich.style import Style
from scipy.spatial import cKDTree
from textual import events
from textual.geometry import Region
from textual.message import Message
from textual.strip import Strip
from textual.widget import Widget

from mapper.app.raster import (
    Frame,
    Markers,
    SiteLayers,
    compose,
    make_frame,
    sample_grid,
    site_layers,
)
from mapper.site.model import Site

UPPER_HALF = "▀"


class MapView(Widget):
    """A site map of coloured half-block cells: the upper pixel in the foreground colour, the
    lower pixel in the background colour.

    Parameters
    ----------
    site : Site
        The site drawn.
    """

    class Clicked(Message):
        """The map was clicked at a site position (metres)."""

        def __init__(self, x: float, y: float) -> None:
            self.x = x
            self.y = y
            super().__init__()

    def __init__(self, site: Site, *, id: str | None = None) -> None:  # noqa: A002 - Textual's name
        super().__init__(id=id)
        self.site = site
        self.map_layer = "readings"
        self.grid = None
        self.scale = 1.0
        self.sign = 1.0
        self.reach_xy = np.zeros((0, 2))
        self.reach_m = np.inf
        self.markers = Markers.empty()
        self.current: tuple[float, float] | None = None
        self.suggested: Sequence[tuple[float, float]] = ()
        self._frame: Frame | None = None
        self._layers: SiteLayers | None = None
        self._field_px: np.ndarray | None = None
        self._field_key: tuple | None = None
        self._strips: list[Strip] = []
        self._pairs: np.ndarray | None = None
        self._styles: dict[int, Style] = {}

    # -------------------------------------------------------------- drawing
    def show(
        self,
        *,
        layer: str,
        grid,
        scale: float,
        markers: Markers,
        current: tuple[float, float] | None,
        suggested: Sequence[tuple[float, float]] = (),
        sign: float = 1.0,
        reach_xy: np.ndarray | None = None,
        reach_m: float = np.inf,
    ) -> None:
        """Set what the map shows and redraw.

        ``sign`` is -1 for a survey in the atmospheric convention: the estimate is coloured as
        the meter reads it. ``scale`` is the full-colour magnitude, V/m. Field colours are left
        out farther than ``reach_m`` metres from every position in ``reach_xy`` (n, 2), so the
        map grows with the walk instead of showing extrapolation.
        """
        self.map_layer, self.grid, self.scale, self.sign = layer, grid, scale, sign
        if reach_xy is not None:
            self.reach_xy, self.reach_m = reach_xy, reach_m
        self.markers, self.current, self.suggested = markers, current, suggested
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

    def _field_pixels(self, frame: Frame) -> np.ndarray | None:
        if self.grid is None or self.map_layer == "readings":
            return None
        key = (id(self.grid), self.map_layer, frame, self.sign, id(self.reach_xy), self.reach_m)
        if key != self._field_key:
            values = self.sign * self.grid.estimate if self.map_layer == "estimate" else self.grid.std
            px = sample_grid(frame, self.grid, values)
            if len(self.reach_xy) and np.isfinite(self.reach_m):
                xx, yy = frame.centres()
                dist, _ = cKDTree(self.reach_xy).query(np.column_stack([xx.ravel(), yy.ravel()]),
                                                       distance_upper_bound=self.reach_m)
                px[~np.isfinite(dist).reshape(px.shape)] = np.nan
            self._field_px = px
            self._field_key = key
        return self._field_px

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
        frame = self._ensure_frame()
        if frame is None or self._layers is None:
            return
        img = compose(
            frame, self._layers, layer=self.map_layer, field_values=self._field_pixels(frame),
            scale=self.scale, markers=self.markers, current=self.current, suggested=self.suggested,
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
