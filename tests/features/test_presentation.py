"""The hotspot rows the CLI, the report and the app show are built once, in the display unit."""

from __future__ import annotations

import shapely

from mapper.features.hotspots import Hotspot
from mapper.presentation import hotspot_cells, hotspot_table

#: 125 V/in in V/m (1 in = 0.0254 m exactly, NIST SP 811).
T = 125 / 0.0254


def _hotspot(name: str) -> Hotspot:
    return Hotspot(id="H1", polarity="negative", geometry=shapely.box(0, 0, 3, 2), area_m2=6.0, threshold_v_per_m=T,
                   peak_v_per_m=-2 * T, peak_x=1.25, peak_y=0.5, mean_v_per_m=-1.5 * T, reading_ids=(3, 4),
                   max_reading_v_per_m=-1.8 * T, status="confirmed", p_exceed_max=0.97, nearest_asset=name,
                   nearest_asset_m=0.0, zones=("packing EPA",))


def test_cells_are_in_the_display_unit_without_exponents():
    c = hotspot_cells(_hotspot("bench"), "V/in")
    assert c["peak"] == "-250 V/in" and c["mean"] == "-187.5 V/in" and c["max_reading"] == "-225 V/in"
    assert c["area"] == "6.0" and c["pol"] == "−" and c["polarity"] == "negative"
    assert c["readings"] == "2" and c["zones"] == "packing EPA" and c["nearest"] == "bench (0.0 m)"
    big = hotspot_cells(_hotspot("bench"), "V/m")
    assert "e+" not in big["peak"] and big["peak"] == "-9843 V/m"


def test_long_names_are_wrapped_never_cut():
    name = "stretch-wrap station by the loading dock"
    header, rows = hotspot_table([_hotspot(name)], "V/m", ("id", "nearest"), wrap={"nearest": 16})
    assert header == ["id", "nearest asset"]
    cell = rows[0][1]
    assert "\n" in cell and cell.replace("\n", " ") == f"{name} (0.0 m)"
    assert all(len(line) <= 16 for line in cell.splitlines())
