"""A measured exceedance is a fact: every reading at or beyond the level lies in a hotspot.

The quiet background is the field of a weak point charge over a grounded plane (method of
images, Griffiths, Introduction to Electrodynamics, sec. 3.2.1) sampled at 2.5 m, as people walk
a survey; single readings above the level are what a small charged object between grid points
gives, which any interpolation of the grid smooths away.
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import pytest
import shapely

from mapper.features.hotspots import (
    exceedances_outside,
    find_hotspots,
    reading_cells,
    zone_hotspots,
)
from mapper.field import Variogram, build_field
from mapper.physics.images import PointCharge, field_z
from mapper.readings.model import CorrectedReading, Reading
from mapper.site.model import Site, Zone

BOX = shapely.box(0, 0, 30, 20)
LEVEL = 4921.3  # 125 V/in in V/m (1 in = 0.0254 m exactly)
T0 = datetime(2026, 11, 17, 8, 0, tzinfo=UTC)


def _readings(spikes: dict[int, float]):
    xs, ys = np.meshgrid(np.arange(1.25, 30, 2.5), np.arange(1.25, 20, 2.5))
    xy = np.column_stack([xs.ravel(), ys.ravel()])
    v = field_z([PointCharge(15, 10, 3.0, 2e-8)], xy[:, 0], xy[:, 1], 1.0)
    for k, value in spikes.items():
        v[k] = value
    rows = [CorrectedReading(Reading(i + 1, x, y, e, e, "V/m", T0), e)
            for i, ((x, y), e) in enumerate(zip(xy, v, strict=True))]
    return xy, v, rows


def _grid(xy, v):
    # A variogram with a large nugget, as a noisy survey's fit has: kriging then treats a single
    # high reading mostly as noise between grid nodes (0.4 m cells: no node on a reading).
    vg = Variogram("exponential", sill=1e4, range=6.0, nugget=4e6)
    return build_field(xy, v, BOX, method="kriging", cell_m=0.4, variogram=vg)


def test_single_smoothed_reading_is_a_measured_hotspot():
    xy, v, rows = _readings({37: 1.3 * LEVEL})
    g = _grid(xy, v)
    assert np.nanmax(g.estimate) < LEVEL  # the map alone would say "no hotspot"
    hs = find_hotspots(g, Site("box", BOX), LEVEL, rows)
    (h,) = hs
    assert h.status == "measured" and h.polarity == "positive"
    assert 38 in h.reading_ids and h.max_reading_v_per_m == pytest.approx(1.3 * LEVEL)
    assert h.geometry.contains(shapely.Point(xy[37]))
    # its cell of the 2.5 m layout: the 2.5 m square around it
    assert h.area_m2 == pytest.approx(2.5**2)
    assert exceedances_outside(hs, rows, LEVEL) == ()


def test_reading_exactly_at_the_level_counts_and_negative_polarity_too():
    xy, v, rows = _readings({10: LEVEL, 50: -2.0 * LEVEL})
    g = _grid(xy, v)
    hs = find_hotspots(g, Site("box", BOX), LEVEL, rows)
    assert {(h.polarity, h.status) for h in hs} >= {("positive", "measured"), ("negative", "measured")}
    assert exceedances_outside(hs, rows, LEVEL) == ()
    assert hs[0].polarity == "negative"  # ids by decreasing peak magnitude


def test_adjacent_exceeding_readings_make_one_measured_hotspot():
    # readings 37 and 38 are neighbours on one row (2.5 m apart): their cells touch.
    xy, v, rows = _readings({37: 1.2 * LEVEL, 38: 1.1 * LEVEL})
    g = _grid(xy, v)
    hs = [h for h in find_hotspots(g, Site("box", BOX), LEVEL, rows) if h.status == "measured"]
    assert len(hs) == 1 and {38, 39} <= set(hs[0].reading_ids)


def test_reading_inside_a_mapped_hotspot_adds_none():
    xs, ys = np.meshgrid(np.arange(1.25, 30, 2.5), np.arange(1.25, 20, 2.5))
    xy = np.column_stack([xs.ravel(), ys.ravel()])
    v = field_z([PointCharge(15, 10, 2.0, 6e-6)], xy[:, 0], xy[:, 1], 1.0)  # about -9.6 kV/m nearby
    rows = [CorrectedReading(Reading(i + 1, x, y, e, e, "V/m", T0), e)
            for i, ((x, y), e) in enumerate(zip(xy, v, strict=True))]
    g = build_field(xy, v, BOX, method="kriging", cell_m=0.4)
    hs = find_hotspots(g, Site("box", BOX), LEVEL, rows)
    assert all(h.status != "measured" for h in hs) and hs
    assert exceedances_outside(hs, rows, LEVEL) == ()


def test_zone_limit_measured_hotspot_stays_in_the_zone():
    xy, v, rows = _readings({37: 0.5 * LEVEL})
    zone = Zone("EPA", shapely.box(0, 0, 15, 20), limit_v_per_m=0.4 * LEVEL)
    site = Site("box", BOX, zones=(zone,))
    g = _grid(xy, v)
    hs = zone_hotspots(g, site, rows)
    assert xy[37][0] < 15
    assert any(h.status == "measured" and 38 in h.reading_ids for h in hs)
    assert all(zone.geometry.buffer(1e-6).contains(h.geometry) for h in hs)


def test_measured_hotspot_in_hotspots_json_and_the_geopackage(tmp_path, capsys):
    import json

    import geopandas as gpd

    from mapper.cli.main import main
    from mapper.survey.create import create_survey
    from mapper.survey.store import NewReading, Survey

    site = tmp_path / "box.toml"
    site.write_text('[site]\nname = "Box"\nunits = "m"\n[outline]\nwkt = "POLYGON ((0 0, 30 0, 30 20, 0 20, 0 0))"\n',
                    encoding="utf-8")
    path = tmp_path / "box.survey"
    create_survey(path, site, spacing_m=2.5).close()
    xy, v, _ = _readings({37: 1.3 * LEVEL})
    with Survey.open(path, write=True) as s:
        s.add_readings([NewReading(float(x), float(y), float(e), "V/m", float(e))
                        for (x, y), e in zip(xy, v, strict=True)])
    assert main(["grid", str(path), "--method", "kriging", "--variogram", "exponential", "--sill", "1e4",
                 "--range", "6", "--nugget", "4e6", "--cell", "0.4"]) == 0
    capsys.readouterr()
    assert main(["hotspots", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    (h,) = data["hotspots"]
    assert h["status"] == "measured" and h["max_reading_v_per_m"] == pytest.approx(1.3 * LEVEL)
    assert main(["hotspots", str(path)]) == 0
    text = capsys.readouterr().out
    assert "measured" in text and "No hotspots" not in text
    assert main(["export", str(path), str(tmp_path / "box.gpkg")]) == 0
    layer = gpd.read_file(tmp_path / "box.gpkg", layer="hotspots")
    assert list(layer["status"]) == ["measured"]


def test_survey_app_live_count_obeys_the_rule():
    # The app's fast path (mapper.workflow.live_products) counts a smoothed single exceedance too.
    from mapper.workflow import live_products as refit

    xy, v, rows = _readings({37: 1.3 * LEVEL})
    result = refit([r.reading for r in rows], Site("box", BOX), LEVEL, planned=())
    assert result is not None and result.hotspot_count >= 1
    assert any(38 in h.reading_ids for h in result.hotspots)


async def test_hotspot_screen_says_which_map_it_shows():
    from textual.app import App

    from mapper.app.hotspot_screen import HotspotScreen

    class _Host(App):
        def on_mount(self) -> None:
            self.push_screen(HotspotScreen((), "4921 V/m", "fast ordinary kriging", "V/m"))

    app = _Host()
    async with app.run_test(size=(120, 30)) as pilot:
        await pilot.pause()
        title = str(app.screen.query_one("#hotspot-title").render())
        assert "live map" in title and "fast ordinary kriging" in title and "stored field model" in title


def _inside_own_polarity(hs, xy, v, level):
    """Every reading at or beyond +-level lies inside a hotspot of its sign (to 1e-6 m)."""
    for (x, y), e in zip(xy, v, strict=True):
        if abs(e) >= level:
            pol = "positive" if e > 0 else "negative"
            assert any(h.polarity == pol and h.geometry.distance(shapely.Point(x, y)) <= 1e-6 for h in hs), (x, y, e)


def test_reading_beside_a_mapped_hotspot_joins_it():
    # A strong charge (Griffiths sec. 3.2.1, images) gives a mapped hotspot; a spike two readings
    # away whose own cell overlaps it joins that hotspot instead of making a second one.
    xs, ys = np.meshgrid(np.arange(1.25, 30, 2.5), np.arange(1.25, 20, 2.5))
    xy = np.column_stack([xs.ravel(), ys.ravel()])
    v = field_z([PointCharge(15, 10, 2.0, 6e-6)], xy[:, 0], xy[:, 1], 1.0)
    g = build_field(xy, v, BOX, method="kriging", cell_m=0.4)
    site = Site("box", BOX)
    mapped = find_hotspots(g, site, LEVEL, [CorrectedReading(Reading(i + 1, x, y, e, e, "V/m", T0), e)
                                            for i, ((x, y), e) in enumerate(zip(xy, v, strict=True))])
    (m,) = [h for h in mapped if h.polarity == "negative"]
    # the first reading outside the mapped hotspot whose cell overlaps it
    cells = reading_cells(xy, BOX)
    k = next(i for i in range(len(xy)) if not m.geometry.contains(shapely.Point(xy[i]))
             and cells[i].intersection(m.geometry).area > 0)
    v = v.copy()
    v[k] = -1.5 * LEVEL
    rows = [CorrectedReading(Reading(i + 1, x, y, e, e, "V/m", T0), e)
            for i, ((x, y), e) in enumerate(zip(xy, v, strict=True))]
    hs = find_hotspots(g, site, LEVEL, rows)
    neg = [h for h in hs if h.polarity == "negative"]
    assert len(neg) == 1 and neg[0].status == "confirmed" and k + 1 in neg[0].reading_ids
    assert neg[0].geometry.area == pytest.approx(m.geometry.union(cells[k]).area)
    _inside_own_polarity(hs, xy, v, LEVEL)
    assert exceedances_outside(hs, rows, LEVEL) == ()


def test_exceedances_outside_checks_the_outline_not_the_id_list():
    # A hotspot listing a reading's id but not containing its position does not count.
    from mapper.features.hotspots import Hotspot

    r = CorrectedReading(Reading(1, 5.0, 5.0, 2 * LEVEL, 2 * LEVEL, "V/m", T0), 2 * LEVEL)
    far = Hotspot("H1", "positive", shapely.box(20, 10, 22, 12), 4.0, LEVEL, LEVEL, 21, 11, LEVEL, (1,),
                  2 * LEVEL, "confirmed", None, None, None, ())
    assert exceedances_outside([far], [r], LEVEL) == (1,)
    near = Hotspot("H1", "positive", shapely.box(4, 4, 5, 5), 1.0, LEVEL, LEVEL, 4.5, 4.5, LEVEL, (1,),
                   2 * LEVEL, "confirmed", None, None, None, ())
    assert exceedances_outside([near], [r], LEVEL) == ()  # on the outline counts as inside
    neg = Hotspot("H1", "negative", shapely.box(4, 4, 6, 6), 4.0, LEVEL, -LEVEL, 5, 5, -LEVEL, (1,),
                  None, "confirmed", None, None, None, ())
    assert exceedances_outside([neg], [r], LEVEL) == (1,)  # the other polarity does not hold it


def test_readings_alone_make_measured_hotspots_before_there_is_a_map():
    # Three readings, too few for a map (MIN_FIELD_POSITIONS is 5): the one at
    # the level is still a hotspot, in the library and in the app's live count.
    from mapper.features.hotspots import reading_hotspots
    from mapper.workflow import live_products as refit

    pts = [(5.0, 5.0, 100.0), (7.5, 5.0, -LEVEL), (10.0, 5.0, 200.0)]
    rows = [CorrectedReading(Reading(i + 1, x, y, e, e, "V/m", T0), e) for i, (x, y, e) in enumerate(pts)]
    (h,) = reading_hotspots(Site("box", BOX), LEVEL, rows)
    assert (h.id, h.polarity, h.status, h.peak_v_per_m) == ("H1", "negative", "measured", -LEVEL)
    assert h.geometry.contains(shapely.Point(7.5, 5.0)) and h.reading_ids == (2,)
    # half the 2.5 m spacing on each side (our own choice of neighbourhood, no source)
    assert h.geometry.bounds == pytest.approx((6.25, 3.75, 8.75, 6.25))
    result = refit([r.reading for r in rows], Site("box", BOX), LEVEL, planned=())
    assert result is not None and result.grid is None and result.hotspot_count == 1


def test_every_exceeding_reading_is_inside_over_many_spikes():
    # Spikes of both signs scattered over the quiet layout, alone, in pairs and on the edge.
    spikes = {0: 1.1 * LEVEL, 12: -LEVEL, 37: 1.3 * LEVEL, 38: 1.05 * LEVEL, 50: -2 * LEVEL, 51: 2 * LEVEL,
              95: LEVEL}
    xy, v, rows = _readings(spikes)
    g = _grid(xy, v)
    hs = find_hotspots(g, Site("box", BOX), LEVEL, rows)
    _inside_own_polarity(hs, xy, v, LEVEL)
    assert exceedances_outside(hs, rows, LEVEL) == ()
    assert [h.id for h in hs] == [f"H{n}" for n in range(1, len(hs) + 1)]
    assert [abs(h.peak_v_per_m) for h in hs] == sorted((abs(h.peak_v_per_m) for h in hs), reverse=True)
