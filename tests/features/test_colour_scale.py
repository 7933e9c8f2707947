"""One colour scale tied to the action level, shared by the app, the report and the styles."""

from __future__ import annotations

import math

import numpy as np
import pytest

from mapper.app.legend import legend_text
from mapper.app.palette import hex_rgb
from mapper.app.raster import Markers, SiteLayers, compose, make_frame
from mapper.export import styles as st
from mapper.features import colour_scale as cs

#: 125 V/in, the action level of the ANSI/ESD S20.20 process-essential insulator check
#: (see ../shared/REFERENCE-VALUES.md); 1 in = 0.0254 m exactly (NIST SP 811).
T = 125 / 0.0254


def test_edges_are_fixed_multiples_of_the_action_level():
    edges = cs.edges_v_per_m(T)
    assert len(edges) == 14 and list(edges) == sorted(edges)
    assert [round(e * 0.0254, 9) for e in edges[7:]] == [12.5, 31.25, 62.5, 125, 250, 500, 1000]
    assert edges[:7] == tuple(-e for e in reversed(edges[7:]))


def test_colour_changes_exactly_at_the_action_level_and_noise_stays_neutral():
    just_below = math.nextafter(T, 0.0)
    k = cs.band_index(np.array([just_below, T, -T, 0.05 * T, -0.05 * T, 0.0]), T)
    assert k[1] == cs.ACTION_BAND and k[0] == cs.ACTION_BAND - 1 and k[2] == -cs.ACTION_BAND
    assert (k[3:] == 0).all()  # |E| < 0.1 T: the neutral band, whatever the sign
    assert cs.colour_hex(0.05 * T, T) == cs.colour_hex(-0.05 * T, T) == cs.NEUTRAL


def test_colours_grow_darker_outwards_and_read_sign():
    def lightness(c: str) -> int:
        return sum(hex_rgb(c))

    pos = [cs.band_hex(k) for k in range(0, 8)]
    neg = [cs.band_hex(-k) for k in range(0, 8)]
    assert all(lightness(a) > lightness(b) for a, b in zip(pos[:-1], pos[1:], strict=True))
    assert all(lightness(a) > lightness(b) for a, b in zip(neg[:-1], neg[1:], strict=True))
    for k in range(1, 8):
        r, _, b = hex_rgb(cs.band_hex(k))
        r2, _, b2 = hex_rgb(cs.band_hex(-k))
        assert r > b and b2 > r2  # red positive, blue negative
    assert cs.band_hex(99) == cs.band_hex(7)  # beyond 8 T: the darkest colour, not an error


def test_app_report_and_styles_give_a_value_the_same_colour():
    values = np.array([-9 * T, -3 * T, -T, -0.3 * T, 0.0, 0.2 * T, 0.7 * T, T, 1.5 * T, 5 * T, 20 * T])
    app_rgb = cs.colours_rgb(values, T)
    for v, rgb in zip(values, app_rgb, strict=True):
        assert tuple(int(c) for c in rgb) == hex_rgb(st.value_color(float(v), T))
    # the terminal map paints estimate pixels with the same table
    frame = make_frame((0.0, 0.0, 11.0, 1.0), 11, 1)
    inside = np.ones((frame.height, frame.width), bool)
    none = np.zeros_like(inside)
    layers = SiteLayers(inside=inside, outline=none, assets=none, zones=none)
    px = np.tile(values, (frame.height, 1))
    img = compose(frame, layers, layer="estimate", field_values=px, scale=T, markers=Markers.empty(),
                  current=None)
    assert (img[0] == app_rgb).all()


def test_contour_bands_each_lie_in_one_scale_band():
    lo, hi = -3.3 * T, 0.7 * T
    levels = cs.scale_levels(T, lo, hi)
    assert set(levels) <= set(cs.edges_v_per_m(T)) and all(lo < v < hi for v in levels)
    edges = (lo, *levels, hi)
    for a, b in zip(edges[:-1], edges[1:], strict=True):
        ks = set(cs.band_index(np.linspace(a, b, 50)[1:-1], T).tolist())
        assert len(ks) == 1
        assert cs.interval_hex(a, b, T) == cs.band_hex(ks.pop())
    assert cs.interval_hex(-math.inf, levels[0], T) == cs.colour_hex(lo, T)
    assert cs.interval_hex(levels[-1], math.inf, T) == cs.colour_hex(hi, T)


@pytest.mark.parametrize("layer", ["readings", "estimate"])
def test_legend_shows_every_colour_the_map_can_draw(layer):
    text = legend_text(layer, T, "V/in", T)
    shown = {span.style.color.triplet.hex for span in text.spans if span.style.color is not None}
    for k in range(-7, 8):
        assert cs.band_hex(k) in shown
    from mapper.app.palette import FEATURE_COLOURS

    for name in ("inside", "outside", "outline", "asset", "zone"):  # the dark-grey cells included
        assert FEATURE_COLOURS[name] in shown
    assert "125 V/in" in text.plain and "action level" in text.plain


def test_legend_rows_label_each_band_in_the_display_unit():
    rows = cs.legend_rows(T, "V/in")
    assert len(rows) == 15 and rows[7] == (cs.NEUTRAL, "-12.5 to 12.5 V/in (neutral)")
    assert rows[3] == (cs.band_hex(4), "125 to 250 V/in (action level)")
    assert rows[0][1] == "1000 V/in and above" and rows[-1][1] == "-1000 V/in and below"


def test_maps_colour_fields_as_the_meter_reads_them():
    # Atmospheric potential-gradient convention: fair weather reads +100 V/m, a downward field,
    # -100 V/m in the physics convention (Feynman Lectures II sec. 9-1).
    assert cs.display_sign("physics") == 1.0 and cs.display_sign("atmospheric") == -1.0
    physics = np.array([-100.0, 3 * T])
    assert (cs.colours_as_read(physics, T, "atmospheric") == cs.colours_rgb(-physics, T)).all()
    assert (cs.colours_as_read(physics, T, "physics") == cs.colours_rgb(physics, T)).all()


def test_uncertainty_scale_is_a_round_number_above_the_largest():
    assert cs.uncertainty_scale(np.array([[12.0, np.nan], [230.0, 4.0]])) == 250.0
    assert cs.uncertainty_scale(np.full((2, 2), np.nan)) == 1.0
