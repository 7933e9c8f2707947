"""Live map pieces: colours, pixel placement and the refit."""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import pytest
import shapely

from mapper import workflow as live
from mapper.app.palette import hex_rgb, sequential
from mapper.app.raster import make_frame
from mapper.nice import nice_ceiling
from mapper.readings.model import Reading
from mapper.site.model import Site


def test_sequential_palette_ends_are_viridis():
    s = sequential(np.array([0.0, 1.0]), 1.0)
    assert tuple(s[0]) == hex_rgb("#440154") and tuple(s[1]) == hex_rgb("#fde725")  # viridis ends


def test_nice_ceiling():
    assert [nice_ceiling(v) for v in (0.7, 1.0, 1.2, 2.2, 4921.3, 30000)] == [1, 1, 2, 2.5, 5000, 50000]


def test_frame_keeps_pixels_square_and_round_trips():
    frame = make_frame((0.0, 0.0, 10.0, 6.0), 60, 20)  # 60 x 40 pixels
    assert frame.m_per_px == pytest.approx(max(10 / 58, 6 / 38))
    for x, y in ((0.1, 0.1), (5, 3), (9.9, 5.9)):
        col, row = frame.to_pixel(x, y)
        cx, cy = frame.to_site(col, row)
        assert abs(cx - x) <= frame.m_per_px / 2 + 1e-9 and abs(cy - y) <= frame.m_per_px / 2 + 1e-9
    assert frame.to_pixel(5, 5.9)[1] < frame.to_pixel(5, 0.1)[1]  # y grows upward on screen


def _readings(xy, values):
    t = datetime(2025, 1, 1, tzinfo=UTC)
    return [Reading(i + 1, x, y, v, v, "V/m", t) for i, ((x, y), v) in enumerate(zip(xy, values, strict=True))]


def test_refit_needs_enough_positions_then_maps():
    site = Site("box", shapely.box(0, 0, 10, 6))
    few = _readings([(1, 1), (1, 1), (3, 1)], [10, 12, 20])
    assert live.live_products(few, site, 100.0, []).grid is None  # 2 distinct positions
    rng = np.random.default_rng(1)
    xy = rng.uniform((0, 0), (10, 6), (12, 2))
    values = 400 * np.exp(-((xy[:, 0] - 3) ** 2 + (xy[:, 1] - 3) ** 2) / 4)
    result = live.live_products(_readings(xy, values), site, 200.0, [])
    assert result.grid is not None and result.readings == 12
    assert np.nanmax(result.grid.estimate) <= values.max() + 1e-6  # IDW never overshoots
    assert live.live_products(_readings(xy, values), site, 200.0, [], cancelled=lambda: True) is None


def test_live_map_says_when_the_corrections_could_not_be_applied(monkeypatch):
    # The live map once fell back to the readings as entered without a word; now it says so.
    from mapper.errors import MapperError

    def refuse(*_args, **_kw):
        raise MapperError("meter 'm9' has a gain of zero")

    monkeypatch.setattr(live, "correct", refuse)
    site = Site("box", shapely.box(0, 0, 10, 6))
    rng = np.random.default_rng(2)
    xy = rng.uniform((0, 0), (10, 6), (12, 2))
    result = live.live_products(_readings(xy, np.full(12, 50.0)), site, 200.0, [])
    assert result.grid is not None
    assert any("corrections not applied" in n and "gain of zero" in n for n in result.notes)


def test_free_markers_grow_reading_by_reading(walk):
    from mapper.app.map_data import MarkerBook
    from mapper.features.colour_scale import colour_hex

    book = MarkerBook(walk)
    t = walk.threshold_v_per_m
    walk.free(3.3, 4.1)
    walk.record("55")
    first = book.free("readings")
    walk.free(5.0, 2.0)
    walk.record("-6000")
    second = book.free("readings")
    assert second.generation == first.generation and len(second.xy) == 2
    assert (second.xy[:1] == first.xy).all() and (second.rgb[:1] == first.rgb).all()
    assert tuple(int(c) for c in second.rgb[1]) == hex_rgb(colour_hex(-6000.0, t))
    fresh = MarkerBook(walk).markers("readings")
    mine = book.markers("readings")
    assert (mine.xy == fresh.xy).all() and (mine.rgb == fresh.rgb).all()
    walk.undo()                                    # a free reading stops counting: drawn anew
    third = book.free("readings")
    assert third.generation != second.generation and len(third.xy) == 1


def test_map_overlay_painted_in_steps_equals_painting_all_markers():
    from mapper.app.map_data import FreeMarkers
    from mapper.app.map_view import MapView
    from mapper.app.raster import Markers, SiteLayers, compose

    site = Site("box", shapely.box(0, 0, 10, 6))
    frame = make_frame(site.outline.bounds, 60, 20)
    rng = np.random.default_rng(3)
    xy = rng.uniform((0, 0), (10, 6), (400, 2))     # many share a pixel: the later one shows
    rgb = rng.integers(0, 256, (400, 3), dtype=np.uint8)
    view = MapView(site)
    view._free_overlay(frame, FreeMarkers(xy[:150], rgb[:150], 1))
    overlay = view._free_overlay(frame, FreeMarkers(xy, rgb, 1))
    inside = np.ones((frame.height, frame.width), bool)
    none = np.zeros_like(inside)
    layers = SiteLayers(inside=inside, outline=none, assets=none, zones=none)
    common = dict(layer="readings", field_values=None, scale=1.0, current=None)
    stepwise = compose(frame, layers, markers=Markers.empty(), overlay=overlay, **common)
    at_once = compose(frame, layers, markers=Markers(xy, rgb), **common)
    assert (stepwise == at_once).all()
