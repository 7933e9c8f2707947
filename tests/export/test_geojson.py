"""``hotspots --geojson``: RFC 7946 GeoJSON of hotspots, advice and sources; CRS in ``--json``."""

from __future__ import annotations

import json

import numpy as np
import pytest
import shapely
from pyproj import Transformer
from shapely.geometry import shape

from tests.export.helpers import ROTATION_DEG, UTM, add_grid_readings, known_forward, run_cli


def test_geojson_of_a_georeferenced_site(rotated, tmp_path, capsys):
    out = tmp_path / "findings.geojson"
    assert run_cli(["hotspots", str(rotated["survey"]), "--geojson", str(out), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    # --json says what its coordinates are and how they reach the projected CRS.
    crs = data["crs"]
    assert crs["georeferenced"] is True and crs["export_crs"] == UTM
    assert crs["site_to_export"]["rotation_deg"] == pytest.approx(ROTATION_DEG, abs=1e-3)
    assert data["geojson"] == str(out)
    doc = json.loads(out.read_text(encoding="utf-8"))
    # RFC 7946: a FeatureCollection, no "crs" member (section 4), positions [longitude, latitude].
    assert doc["type"] == "FeatureCollection" and "crs" not in doc
    layers = {f["properties"]["layer"] for f in doc["features"]}
    assert "hotspots" in layers
    to_utm = Transformer.from_crs("EPSG:4326", UTM, always_xy=True)
    hotspots = [f for f in doc["features"] if f["properties"]["layer"] == "hotspots"]
    assert [f["properties"]["hotspot_id"] for f in hotspots] == [h.id for h in rotated["products"].findings.hotspots]
    for feature, h in zip(hotspots, rotated["products"].findings.hotspots, strict=True):
        geom = shape(feature["geometry"])
        lon, lat = shapely.get_coordinates(geom).T
        # The yard lies in UTM zone 33N (12..18 degrees east) at about 51 degrees north
        # (helpers.OFFSET_N): longitude first, latitude second.
        assert ((12 < lon) & (lon < 18)).all() and ((50 < lat) & (lat < 52)).all()
        # RFC 7946 section 3.1.6: exterior rings counter-clockwise.
        for poly in getattr(geom, "geoms", [geom]):
            assert poly.exterior.is_ccw
        # Back in UTM the outline is the site-metre hotspot moved by the known transform, within
        # 5 cm (the export's tolerance); the 1e-8 degree rounding is about 1 mm.
        back = shapely.transform(geom, lambda c: np.column_stack(to_utm.transform(c[:, 0], c[:, 1])))
        expect = shapely.transform(h.geometry, lambda c: np.column_stack(known_forward(c[:, 0], c[:, 1])))
        assert back.hausdorff_distance(expect) < 0.05
        props = feature["properties"]
        assert props["n_readings"] == len(h.reading_ids) and props["peak_x_site_m"] == h.peak_x


def test_geojson_refused_for_a_local_site(tmp_path, box_survey, capsys):
    add_grid_readings(box_survey, 1.0, (10.0, 6.0))
    out = tmp_path / "f.geojson"
    assert run_cli(["hotspots", str(box_survey), "--geojson", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "cannot be written as GeoJSON" in err and "--geojson" in err
    assert not out.exists()
    assert run_cli(["hotspots", str(box_survey), "--json"]) == 0
    crs = json.loads(capsys.readouterr().out)["crs"]
    assert crs["georeferenced"] is False and "site_crs_wkt" in crs
    assert run_cli(["hotspots", str(box_survey), "--geojson", str(tmp_path / "f.json")]) == 2
    assert "should end in .geojson" in capsys.readouterr().err


def test_compare_json_states_its_crs(comparison, tmp_path, capsys):
    before = comparison["before"].source
    after = comparison["after"].source
    assert run_cli(["compare", before, after, "--out", str(tmp_path / "d.gpkg"), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["crs"]["export_crs"] == UTM and data["crs"]["georeferenced"] is True
