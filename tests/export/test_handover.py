"""What a desktop GIS reads from the hand-over: one geometry type per layer, the field as a float
coverage with its unit, column descriptions and units, DATETIME columns, GDAL dataset metadata,
SLD beside QML, the GeoTIFF's own style, and label priorities."""

from __future__ import annotations

import math
import sqlite3
import xml.etree.ElementTree as ET

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import rasterio

from mapper.export.coverage import COVERAGE_NODATA
from mapper.export.layers import ASSET_COLUMNS
from mapper.features import colour_scale as cs

SLD_NS = "{http://www.opengis.net/sld}"


def _qml(text: str) -> ET.Element:
    return ET.fromstring(text.split("\n", 1)[1])


@pytest.fixture(scope="module")
def conn(hall):
    c = sqlite3.connect(hall["result"].gpkg.path)
    yield c
    c.close()


def test_assets_one_geometry_type_per_layer(rotated):
    path = rotated["result"].gpkg.path
    site = rotated["products"].site
    kinds = {"assets": {"MultiPolygon"}, "asset_lines": {"MultiLineString"}, "asset_points": {"MultiPoint"}}
    total = 0
    for layer, allowed in kinds.items():
        info = pyogrio.read_info(path, layer=layer)
        assert info["geometry_type"] == next(iter(allowed)), layer
        frame = gpd.read_file(path, layer=layer)
        assert tuple(c for c in frame.columns if c != "geometry") == ASSET_COLUMNS, layer
        assert set(frame.geom_type) <= allowed
        total += len(frame)
    # helpers.georef_site_text: one bench (polygon) and one belt (line).
    assert total == len(site.assets) == 2
    assert list(gpd.read_file(path, layer="asset_lines")["name"]) == ["belt"]
    assert list(gpd.read_file(path, layer="assets")["name"]) == ["bench A"]


def test_field_coverage_with_unit_name_nodata_and_description(hall, conn):
    # OGC 17-066r1 (2D gridded coverage): ancillary row with datatype, unit of measure, field
    # name, quantity definition and data_null; description in gpkg_contents.
    rows = {r[0]: r for r in conn.execute(
        "SELECT tile_matrix_set_name, datatype, uom, field_name, quantity_definition, data_null "
        "FROM gpkg_2d_gridded_coverage_ancillary")}
    assert set(rows) == {"field_estimate", "field_std"}
    for name, row in rows.items():
        assert row[1] == "float" and row[2] == "V/m" and row[3] and row[4], name
        assert row[5] == pytest.approx(COVERAGE_NODATA), name
    desc = dict(conn.execute("SELECT table_name, description FROM gpkg_contents"))
    assert "V/m" in desc["field_estimate"] and "nodata outside the site" in desc["field_estimate"]
    ext = {(r[0], r[1]) for r in conn.execute("SELECT table_name, extension_name FROM gpkg_extensions")}
    assert ("field_estimate", "gpkg_2d_gridded_coverage") in ext
    # Read back through GDAL (rasterio): the same north-up values as band 1 of the GeoTIFF.
    path = hall["result"].gpkg.path
    with rasterio.open(path, table="field_estimate") as cov, rasterio.open(hall["result"].tif) as tif:
        assert cov.transform.almost_equals(tif.transform) and cov.shape == tif.shape
        assert cov.units == ("V/m",) and cov.nodata == pytest.approx(COVERAGE_NODATA)
        a, b = cov.read(1, masked=True), tif.read(1, masked=True)
        np.testing.assert_array_equal(a.mask, np.isnan(tif.read(1)))
        np.testing.assert_array_equal(a.compressed(), b.compressed())


def test_every_time_column_is_datetime(hall, conn):
    # OGC 12-128 clause 1.1.1.1.1: DATETIME, ISO-8601 UTC text.
    tables = [r[0] for r in conn.execute("SELECT table_name FROM gpkg_contents WHERE data_type = 'features' "
                                         "OR table_name = 'survey_metadata'")]
    seen = 0
    for table in tables:
        for _, column, ctype, *_ in conn.execute(f'PRAGMA table_info("{table}")'):
            if column.endswith("_utc"):
                assert ctype == "DATETIME", (table, column, ctype)
                seen += 1
    assert seen >= 3  # readings: time_utc, recorded_utc, conditions_utc
    stamp = conn.execute("SELECT conditions_utc FROM readings LIMIT 1").fetchone()[0]
    assert stamp.endswith("Z") or stamp.endswith("+00:00"), stamp


def test_data_columns_describe_every_measured_column(hall, conn):
    # GeoPackage schema extension (OGC 12-128 F.9): gpkg_data_columns, registered in gpkg_extensions.
    described = {(r[0], r[1]): (r[2], r[3]) for r in conn.execute(
        "SELECT table_name, column_name, title, description FROM gpkg_data_columns")}
    assert ("gpkg_data_columns", "gpkg_schema") in {
        (r[0], r[1]) for r in conn.execute("SELECT table_name, extension_name FROM gpkg_extensions")}
    features = [r[0] for r in conn.execute("SELECT table_name FROM gpkg_contents WHERE data_type = 'features'")]
    n = 0
    for table in features:
        for _, column, *_ in conn.execute(f'PRAGMA table_info("{table}")'):
            if column.endswith(("_v_per_m", "_m", "_m2", "_utc", "_percent")):
                title, description = described[(table, column)]
                unit = {"_v_per_m": "V/m", "_m2": "m2", "_utc": "UTC", "_percent": "%"}.get(
                    next((s for s in ("_v_per_m", "_m2", "_utc", "_percent") if column.endswith(s)), ""), "m")
                assert f"[{unit}]" in title and description.endswith(f"unit {unit}"), (table, column)
                n += 1
    assert n > 30
    assert described[("readings", "value_display")][0] == "value display [kV/m]"  # the sample's display unit


def test_dataset_metadata_in_gdal_tables(hall):
    # GDAL reads gpkg_metadata rows of md_standard_uri 'http://gdal.org' referenced with scope
    # 'geopackage' as the dataset's metadata (GDAL GPKG driver documentation, "Metadata").
    meta = pyogrio.read_info(hall["result"].gpkg.path, layer="readings")["dataset_metadata"]
    assert meta["SURVEY_OPERATOR"] == "tester"
    assert meta["FIELD_METHOD"] == hall["products"].grid.method
    assert meta["LIMITS_THRESHOLD"].endswith(" V/m")


def test_sld_beside_every_qml(hall, conn):
    # SLD 1.0.0 (OGC 02-070): root StyledLayerDescriptor, NamedLayer/UserStyle/FeatureTypeStyle/Rule.
    f = hall["products"].findings
    for table, sld in conn.execute("SELECT f_table_name, styleSLD FROM layer_styles"):
        root = ET.fromstring(sld.split("\n", 1)[1])
        assert root.tag == f"{SLD_NS}StyledLayerDescriptor" and root.get("version") == "1.0.0", table
        assert root.find(f"{SLD_NS}NamedLayer/{SLD_NS}Name").text == table
        assert root.findall(f".//{SLD_NS}Rule"), table
    sld = dict(conn.execute("SELECT f_table_name, styleSLD FROM layer_styles"))
    bands = ET.fromstring(sld["bands"].split("\n", 1)[1])
    fills = [r.find(f".//{SLD_NS}Fill/{SLD_NS}CssParameter[@name='fill']").text
             for r in bands.iter(f"{SLD_NS}Rule")]
    from mapper.export.styles import band_colors

    assert fills == band_colors(f.bands, f.threshold_v_per_m)
    hot = ET.fromstring(sld["hotspots"].split("\n", 1)[1])
    assert hot.find(f".//{SLD_NS}TextSymbolizer/{SLD_NS}Label/{{http://www.opengis.net/ogc}}PropertyName").text \
        == "hotspot_id"


def test_geotiff_style_files_use_the_action_level_scale(hall):
    tif = hall["result"].tif
    qml, sld = tif.with_suffix(".qml"), tif.with_suffix(".sld")
    assert qml.exists() and sld.exists()
    t = hall["products"].threshold_v_per_m
    r = _qml(qml.read_text()).find("pipe/rasterrenderer")
    assert r.get("type") == "singlebandpseudocolor" and r.get("band") == "1"
    shader = r.find("rastershader/colorrampshader")
    assert shader.get("colorRampType") == "DISCRETE"
    items = shader.findall("item")
    assert len(items) == 2 * len(cs.POSITIVE) + 1
    # A discrete ramp gives a value the colour of the first item whose value is not below it
    # (QGIS QgsColorRampShader, "Discrete"). Check that rule against the scale at values inside
    # each band and exactly on each edge (an edge belongs to the band outside it).
    bounds = [math.inf if i.get("value") == "inf" else float(i.get("value")) for i in items]
    probes = [*cs.edges_v_per_m(t), *(0.5 * (a + b) for a, b in zip(cs.edges_v_per_m(t)[:-1],
                                                                      cs.edges_v_per_m(t)[1:], strict=True)),
              -20 * t, 20 * t, 0.0]
    for v in probes:
        k = next(i for i, b in enumerate(bounds) if v <= b)
        assert items[k].get("color") == cs.colour_hex(v, t), v
    root = ET.fromstring(sld.read_text().split("\n", 1)[1])
    entries = root.findall(f".//{SLD_NS}ColorMap/{SLD_NS}ColorMapEntry")
    assert [e.get("color") for e in entries] == [i.get("color") for i in items]


def test_hotspot_labels_outrank_probable_exceedance_labels(conn):
    qml = {t: _qml(q) for t, q in conn.execute("SELECT f_table_name, styleQML FROM layer_styles")}
    hot = qml["hotspots"].find("labeling/settings")
    prob = qml["probable_exceedance"].find("labeling/settings")
    # QGIS label settings: placement priority 0-10 (10 first), displayAll draws colliding labels,
    # obstacle="0" lets other layers' labels sit over the features.
    assert hot.find("placement").get("priority") == "10" and hot.find("rendering").get("displayAll") == "1"
    assert int(prob.find("placement").get("priority")) < 10
    assert prob.find("rendering").get("obstacle") == "0"
    assert prob.find("placement").get("placement") != hot.find("placement").get("placement")


def test_comparison_follows_the_survey_conventions(comparison, hall):
    path = comparison["path"]
    main = set(pyogrio.read_info(hall["result"].gpkg.path, layer="hotspots")["fields"])
    for side in ("before", "after"):
        fields = set(pyogrio.read_info(path, layer=f"hotspots_{side}")["fields"])
        assert main <= fields and fields - main == {"change"}, side
    hot = gpd.read_file(path, layer="hotspots_after")
    assert len(hot) >= 1 and {"hotspot_id", "peak_x_site_m", "n_readings"} <= set(hot.columns)
    conn = sqlite3.connect(path)
    try:
        # Open band ends are NULL, never +-inf (SQLite stores inf as a REAL 'Inf').
        ends = conn.execute("SELECT lower_v_per_m, upper_v_per_m FROM difference_bands").fetchall()
        assert ends and all(v is None or math.isfinite(v) for row in ends for v in row)
        assert any(row[0] is None for row in ends) and any(row[1] is None for row in ends)
        described = {r[0] for r in conn.execute("SELECT table_name FROM gpkg_data_columns")}
        assert {"hotspots_after", "difference_bands", "summary"} <= described
    finally:
        conn.close()
    # The difference coverage agrees with after - before of the two field models at a node.
    cmp = comparison["cmp"]
    with rasterio.open(path, table="difference") as ds:
        assert ds.transform.b == 0 and ds.transform.d == 0 and ds.units == ("V/m",)
        band = ds.read(1, masked=True)
        assert band.count() > 0
        assert float(band.max()) <= float(np.nanmax(cmp.difference)) + 1e-3
        assert float(band.min()) >= float(np.nanmin(cmp.difference)) - 1e-3
