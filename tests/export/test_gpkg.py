"""GeoPackage: OGC 12-128 conformance checks a reader can make with sqlite3, and the round trip."""

from __future__ import annotations

import math
import sqlite3
import xml.etree.ElementTree as ET

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely
from pyproj import CRS

from mapper.export.crs import transform_all
from mapper.export.metadata import METADATA_TABLE
from mapper.export.styles import band_colors

# The sample hall's field model is the physical one (it wins auto's cross-validation), so its
# export also holds the source inventory.
SPATIAL = ("readings", "site", "zones", "assets", "contours", "bands", "hotspots", "probable_exceedance",
           "violations", "advice", "sources")


@pytest.fixture(scope="module")
def conn(hall):
    c = sqlite3.connect(hall["result"].gpkg.path)
    yield c
    c.close()


def test_header_application_id_and_version(hall, conn):
    # OGC 12-128 Req 2: application_id 0x47504B47 ("GPKG"); GeoPackage 1.2+ user_version >= 10200.
    with open(hall["result"].gpkg.path, "rb") as handle:
        header = handle.read(100)
    assert header[:16] == b"SQLite format 3\x00"  # OGC 12-128 Req 1
    assert header[68:72] == b"GPKG"
    assert conn.execute("PRAGMA application_id").fetchone()[0] == 0x47504B47
    assert conn.execute("PRAGMA user_version").fetchone()[0] >= 10200


def test_integrity_and_foreign_keys(conn):
    # OGC 12-128 Req 6 (integrity_check "ok") and Req 7 (foreign_key_check returns no rows).
    assert conn.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    assert conn.execute("PRAGMA foreign_key_check").fetchall() == []


def test_required_spatial_ref_sys_rows(conn):
    # OGC 12-128 Req 11: rows for srs_id 4326 (EPSG), -1 (undefined Cartesian), 0 (undefined geographic).
    rows = {r[0]: r for r in conn.execute(
        "SELECT srs_id, organization, organization_coordsys_id, definition FROM gpkg_spatial_ref_sys")}
    assert rows[4326][1].upper() == "EPSG" and rows[4326][2] == 4326
    assert rows[-1][1].upper() == "NONE" and rows[-1][2] == -1 and rows[-1][3] == "undefined"
    assert rows[0][1].upper() == "NONE" and rows[0][2] == 0 and rows[0][3] == "undefined"


def test_one_contents_row_per_layer_with_crs(hall, conn):
    rows = conn.execute("SELECT table_name, data_type, srs_id FROM gpkg_contents").fetchall()
    names = [r[0] for r in rows]
    assert len(names) == len(set(names))
    expected = {*SPATIAL, METADATA_TABLE, "layer_styles"}
    assert set(names) == expected
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    assert expected <= tables
    features = {r[0]: r[2] for r in rows if r[1] == "features"}
    assert set(features) == set(SPATIAL)
    # Every spatial layer carries the site's projected CRS (the sample names EPSG:32633).
    assert set(features.values()) == {32633}
    geom = dict(conn.execute("SELECT table_name, srs_id FROM gpkg_geometry_columns").fetchall())
    assert geom == features
    assert {r[1] for r in rows if r[0] in (METADATA_TABLE, "layer_styles")} == {"attributes"}


def test_geometry_blob_header(conn):
    # OGC 12-128 Req 19 / clause 2.1.3: blob starts with magic 'GP', version 0, then flags; the
    # srs_id in the header equals the layer's.
    for layer in SPATIAL:
        blob = conn.execute(f'SELECT geom FROM "{layer}" LIMIT 1').fetchone()
        if blob is None:
            continue
        data = blob[0]
        assert data[:2] == b"GP", layer
        assert data[2] == 0, layer
        little = data[3] & 1
        srs = int.from_bytes(data[4:8], "little" if little else "big", signed=True)
        assert srs == 32633, layer


def test_round_trip_readings(hall):
    products = hall["products"]
    back = gpd.read_file(hall["result"].gpkg.path, layer="readings")
    assert back.crs == CRS.from_user_input("EPSG:32633")
    assert len(back) == len(products.readings) == 348
    by_id = back.set_index("reading_id")
    for c in products.readings:
        row = by_id.loc[c.reading.id]
        assert row["value_v_per_m"] == c.value_v_per_m
        assert row["raw_v_per_m"] == c.reading.value_v_per_m
        assert row["entered_value"] == c.reading.entered_value and row["entered_unit"] == c.reading.entered_unit
        assert row["time_utc"].to_pydatetime() == c.reading.time
        e, n = products.crs.points(c.reading.x, c.reading.y)
        assert row.geometry.x == pytest.approx(float(e), abs=1e-6)
        assert row.geometry.y == pytest.approx(float(n), abs=1e-6)
    # The sample's conditions: RH 29-34 %; each reading carries the nearest note's values.
    assert set(back["rh_percent"]) <= {34.0, 31.0, 29.0}
    assert back["corrections"].str.contains("zero").all()


def test_round_trip_field_layers(hall):
    products = hall["products"]
    f = products.findings
    path = hall["result"].gpkg.path
    bands = gpd.read_file(path, layer="bands").sort_values("band_index")
    kept = [b for b in f.bands if not b.geometry.is_empty]
    assert len(bands) == len(kept)
    for row, band, geom in zip(bands.itertuples(), kept, transform_all([b.geometry for b in kept], products.crs),
                               strict=True):
        assert shapely.equals_exact(shapely.normalize(row.geometry), shapely.normalize(geom), tolerance=1e-6)
        lower = None if math.isinf(band.lower_v_per_m) else band.lower_v_per_m
        assert (row.lower_v_per_m if not np.isnan(row.lower_v_per_m) else None) == lower
    hot = gpd.read_file(path, layer="hotspots")
    spots = (*f.hotspots, *f.zone_hotspots)
    assert list(hot["hotspot_id"]) == [h.id for h in spots]
    for row, h in zip(hot.itertuples(), spots, strict=True):
        assert row.peak_v_per_m == h.peak_v_per_m and row.area_m2 == h.area_m2
        assert row.status == h.status and row.polarity == h.polarity
        moved = transform_all([h.geometry], products.crs)[0]
        assert shapely.equals_exact(shapely.normalize(row.geometry),
                                    shapely.normalize(shapely.MultiPolygon([moved])), tolerance=1e-6)
    # Ground area survives the move (similarity scale ~1.0003 at the sample): within 0.1 %.
    assert bands.geometry.area.sum() == pytest.approx(products.site.area_m2, rel=1e-3)
    contours = gpd.read_file(path, layer="contours")
    assert set(contours["label"]) <= {i.label for i in f.isolines}
    advice = gpd.read_file(path, layer="advice")
    assert list(advice["rank"]) == [s.rank for s in f.advice]
    for layer in SPATIAL:
        assert pyogrio.read_info(path, layer=layer)["crs"] == "EPSG:32633"


def test_metadata_table(hall):
    meta = pyogrio.read_dataframe(hall["result"].gpkg.path, layer=METADATA_TABLE)
    facts = {(r.section, r.key): (r.value, r.unit) for r in meta.itertuples()}
    assert facts[("survey", "operator")][0] == "tester"
    assert float(facts[("limits", "threshold")][0]) == pytest.approx(125 / 0.0254, rel=1e-6)  # 125 V/in
    assert facts[("field", "method")][0] == hall["products"].grid.method
    assert ("cross_validation", f"{hall['products'].grid.method} (chosen) rmse") in facts
    assert ("meter", "meter1 calibration_date") in facts
    assert facts[("conditions", "rh_min")] == ("29", "%")
    assert any(section == "cautions" for section, _ in facts)


def test_layer_styles(hall, conn):
    rows = conn.execute("SELECT f_table_name, f_geometry_column, styleQML, useAsDefault FROM layer_styles").fetchall()
    styled = {r[0] for r in rows}
    assert {"bands", "hotspots", "readings", "contours", "site", "zones", "assets"} <= styled
    qml = {r[0]: ET.fromstring(r[2].split("\n", 1)[1]) for r in rows}
    assert all(r[1] == "geom" and r[3] == 1 for r in rows)
    f = hall["products"].findings
    cats = qml["bands"].find("renderer-v2").find("categories")
    assert len(cats) == len(f.bands)
    assert qml["hotspots"].find("labeling/settings/text-style").get("fieldName") == "hotspot_id"
    assert qml["readings"].find("renderer-v2").get("type") == "graduatedSymbol"
    # Diverging: bands below zero are blue-dominant, above zero red-dominant.
    for band, color in zip(f.bands, band_colors(f.bands, f.threshold_v_per_m), strict=True):
        r, b = int(color[1:3], 16), int(color[5:7], 16)
        if band.upper_v_per_m <= 0:
            assert b > r, (band.label, color)
        if band.lower_v_per_m >= 0:
            assert r > b, (band.label, color)


def test_sources_layer_has_the_inventory_columns(hall):
    import geopandas as gpd

    frame = gpd.read_file(hall["result"].gpkg.path, layer="sources")
    # Column names fixed by the issue that asked for the layer (other tools rely on them).
    for col in ("source_id", "kind", "asset", "charge_c", "charge_std_c", "height_m", "peak_v_per_m", "status"):
        assert col in frame.columns
    assert list(frame["source_id"]) == [f"S{k}" for k in range(1, len(frame) + 1)]
    assert set(frame.geometry.geom_type) <= {"Point", "LineString", "Polygon", "MultiLineString", "MultiPolygon"}
    # belt 1 is in the sample's inventory, as a line along the asset (sample_sites/generate.py).
    belt = frame[frame["asset"] == "belt 1"]
    assert len(belt) == 1 and belt.geometry.iloc[0].geom_type == "LineString"
    assert (frame["charge_std_c"] >= 0).all()
