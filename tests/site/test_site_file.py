"""Site files: TOML keys, feet, validation, georeference, vector files."""

import json

import numpy as np
import pytest
from pyproj import Transformer

from mapper.errors import MapperError
from mapper.site.georef import fit_similarity
from mapper.site.site_file import load_site, site_from_toml_text

ISSUE_EXAMPLE = """
[site]
name = "Hall 3"
units = "m"
crs = "EPSG:32632"
[outline]
wkt = "POLYGON ((0 0, 48 0, 48 30, 0 30, 0 0))"
[[asset]]
name = "belt 1"
kind = "conveyor"
wkt = "LINESTRING (8 8, 34 8)"
[[zone]]
name = "packing EPA"
wkt = "POLYGON ((24 10, 36 10, 36 16, 24 16, 24 10))"
limit = "125 V/in"
[[control_point]]
x = 0.0
y = 0.0
lon = 9.1234
lat = 48.7654
"""


def test_issue_example_keys():
    site = site_from_toml_text(ISSUE_EXAMPLE)
    assert site.name == "Hall 3" and site.area_m2 == 1440.0
    assert site.assets[0].kind == "conveyor"
    assert site.zones[0].limit_v_per_m == pytest.approx(125 / 0.0254)
    assert site.georef is None  # one control point cannot georeference
    assert any("one control point" in w for w in site.warnings)


def test_feet_are_converted():
    text = ISSUE_EXAMPLE.replace('units = "m"', 'units = "ft"')
    site = site_from_toml_text(text)
    assert site.area_m2 == pytest.approx(1440 * 0.3048**2)


@pytest.mark.parametrize(
    ("wkt", "words"),
    [
        ("POLYGON ((0 0, 10 10, 10 0, 0 10, 0 0))", "Self-intersection"),
        ("POLYGON ((0 0, 10 0, 10 10, 0 10))", "closed"),
        ("POLYGON EMPTY", "empty"),
        ("LINESTRING (0 0, 10 10)", "not a POLYGON"),
        ("POLYGON ((0 0, 1 1", "bad WKT"),
    ],
)
def test_invalid_outline_refused_with_reason(wkt, words):
    text = f'[site]\nname = "x"\n[outline]\nwkt = "{wkt}"\n'
    with pytest.raises(MapperError) as info:
        site_from_toml_text(text, source="x.toml")
    assert words.lower() in str(info.value).lower()
    assert str(info.value).startswith("x.toml:4: [outline] 'wkt'")


def test_asset_outside_warns():
    text = ISSUE_EXAMPLE + '[[asset]]\nname = "far"\nkind = "door"\nwkt = "POINT (100 100)"\n'
    assert any("far" in w for w in site_from_toml_text(text).warnings)


def test_bad_limit_names_line():
    text = ISSUE_EXAMPLE.replace('limit = "125 V/in"', 'limit = "125 V/parsec"')
    with pytest.raises(MapperError, match=r"<site>:\d+: \[\[zone\]\] #1 'limit'"):
        site_from_toml_text(text)


def test_similarity_fit_recovers_transform_in_utm():
    # Control points generated from a known rotation, scale and offset in UTM 32N (EPSG:32632).
    rng = np.random.default_rng(1)
    theta, scale, e0, n0 = np.radians(31.0), 1.0, 512_345.0, 5_401_234.0
    xy = rng.uniform(0, 60, size=(5, 2))
    e = e0 + scale * (xy[:, 0] * np.cos(theta) - xy[:, 1] * np.sin(theta))
    n = n0 + scale * (xy[:, 0] * np.sin(theta) + xy[:, 1] * np.cos(theta))
    lon, lat = Transformer.from_crs("EPSG:32632", "EPSG:4326", always_xy=True).transform(e, n)
    g = fit_similarity(xy, np.column_stack([lon, lat]))
    assert g.crs == "EPSG:32632"  # picked from the control points by pyproj
    assert g.rotation_deg == pytest.approx(31.0, abs=1e-6)
    assert g.scale == pytest.approx(1.0, abs=1e-6)
    assert g.rms_m < 1e-4
    fe, fn = g.forward(xy[:, 0], xy[:, 1])
    np.testing.assert_allclose(fe, e, atol=1e-4)
    bx, by = g.inverse(fe, fn)
    np.testing.assert_allclose(np.column_stack([bx, by]), xy, atol=1e-6)


def test_high_rms_warns():
    text = ISSUE_EXAMPLE + "[[control_point]]\nx = 48.0\ny = 0.0\nlon = 9.1240\nlat = 48.7654\n"
    text += "[[control_point]]\nx = 48.0\ny = 30.0\nlon = 9.1240\nlat = 48.7640\n"  # 30 m vs ~156 m
    site = site_from_toml_text(text)
    assert site.georef is not None
    assert any("RMS" in w for w in site.warnings)


def test_geojson_lonlat_site(tmp_path):
    to_ll = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)

    def ll(coords):
        return [list(to_ll.transform(400_000 + x, 5_600_000 + y)) for x, y in coords]

    gj = {
        "type": "FeatureCollection",
        "features": [
            {"type": "Feature", "properties": {"kind": "outline", "name": "yard"},
             "geometry": {"type": "Polygon", "coordinates": [ll([(0, 0), (50, 0), (50, 20), (0, 20), (0, 0)])]}},
            {"type": "Feature", "properties": {"kind": "tank", "name": "tank"},
             "geometry": {"type": "Point", "coordinates": ll([(10, 10)])[0]}},
        ],
    }
    path = tmp_path / "yard.geojson"
    path.write_text(json.dumps(gj))
    site = load_site(path)
    assert site.georef is not None and site.georef.crs == "EPSG:32633"
    assert site.area_m2 == pytest.approx(1000.0, rel=1e-6)
    asset = site.assets[0]
    e, n = site.georef.forward(asset.geometry.x, asset.geometry.y)
    assert (float(e), float(n)) == pytest.approx((400_010.0, 5_600_010.0), abs=1e-3)


def test_vector_layer_roles_from_command_line(tmp_path):
    import geopandas as gpd
    from shapely.geometry import LineString, Polygon

    path = tmp_path / "plan.gpkg"
    gpd.GeoDataFrame({"name": ["hall"]}, geometry=[Polygon([(0, 0), (30, 0), (30, 20), (0, 20)])],
                     crs="EPSG:25832").to_file(path, layer="walls")
    gpd.GeoDataFrame({"name": ["belt"]}, geometry=[LineString([(2, 2), (20, 2)])],
                     crs="EPSG:25832").to_file(path, layer="belts")
    with pytest.raises(MapperError, match="no role"):
        load_site(path)
    site = load_site(path, {"walls": "outline", "belts": "conveyor"})
    assert site.area_m2 == pytest.approx(600.0)
    assert site.assets[0].kind == "conveyor"


def test_dxf_floor_plan_in_millimetres(tmp_path):
    import geopandas as gpd
    from shapely.geometry import LineString, Polygon

    path = tmp_path / "plan.dxf"
    walls = Polygon([(0, 0), (30000, 0), (30000, 20000), (0, 20000)]).exterior  # a closed polyline
    frame = gpd.GeoDataFrame({"Layer": ["WALLS", "BELTS"]}, geometry=[walls, LineString([(2000, 2000), (20000, 2000)])])
    with pytest.warns(UserWarning):  # GDAL notes the drawing has no CRS
        frame.to_file(path, driver="DXF")
    site = load_site(path, {"WALLS": "outline", "BELTS": "conveyor"}, units="mm")
    assert site.area_m2 == pytest.approx(600.0)
    assert site.assets[0].geometry.length == pytest.approx(18.0)
    assert site.georef is None


def test_sample_sites_load():
    from tests.conftest import SAMPLES

    hall = load_site(SAMPLES / "north_hall.toml")
    assert hall.georef is not None and hall.georef.rms_m < 0.05 and not hall.warnings
    yard = load_site(SAMPLES / "east_yard.geojson")
    assert yard.georef is not None and yard.area_m2 == pytest.approx(9600.0, rel=1e-3)


def test_quoted_boolean_refused():
    text = ISSUE_EXAMPLE.replace('wkt = "LINESTRING (8 8, 34 '
                                 '8)"', 'wkt = "LINESTRING (8 8, 34 8)"\nsensitive = "false"')
    with pytest.raises(MapperError, match=r"'sensitive' must be true or false"):
        site_from_toml_text(text, source="s.toml")


def test_vector_sensitive_attribute_and_zone_limit(tmp_path):
    import geopandas as gpd
    from shapely.geometry import Polygon

    path = tmp_path / "plan.gpkg"
    frame = gpd.GeoDataFrame(
        {"kind": ["outline", "cabinet", "zone"], "name": ["hall", "tester", "bay"],
         "sensitive": [None, True, None], "limit": [None, None, "1 kV/m"]},
        geometry=[Polygon([(0, 0), (30, 0), (30, 20), (0, 20)]), Polygon([(2, 2), (4, 2), (4, 3), (2, 3)]),
                  Polygon([(10, 10), (20, 10), (20, 15), (10, 15)])],
        crs="EPSG:25832",
    )
    frame.to_file(path, layer="plan")
    site = load_site(path)
    assert site.assets[0].sensitive is True  # kind 'cabinet' is not sensitive by default
    assert site.zones[0].limit_v_per_m == 1000.0


_CP_SITE = """
[site]
name = "Cp"
units = "m"
[outline]
wkt = "POLYGON ((0 0, 20 0, 20 12, 0 12, 0 0))"
[[control_point]]
x = {x0}
y = 0.0
lon = 13.7
lat = {lat0}
[[control_point]]
x = 20.0
y = 0.0
lon = {lon1}
lat = 51.0
"""


@pytest.mark.parametrize("x0, lat0, lon1, message", [
    ("inf", "51.0", "13.7003", "finite"),            # once made 'mapper new' spin forever
    ("nan", "51.0", "13.7003", "finite"),
    ("0.0", "51.0", "13.7", "same lon/lat"),         # scale 0: every reading at one place
    ("0.0", "91.0", "13.7003", "not on the Earth"),
])
def test_georeference_that_cannot_be_right_is_refused(tmp_path, x0, lat0, lon1, message):
    from mapper.errors import MapperError
    from mapper.site.site_file import load_site

    path = tmp_path / "cp.toml"
    path.write_text(_CP_SITE.format(x0=x0, lat0=lat0, lon1=lon1), encoding="utf-8")
    with pytest.raises(MapperError, match=message) as err:
        load_site(path)
    assert "cp.toml:" in str(err.value.where)


def test_scale_far_from_one_is_a_warning(tmp_path):
    from mapper.site.site_file import load_site

    # 20 site metres against about 42 m on the ground (0.0006 deg of longitude at 51 deg N,
    # 111.32 km x cos(51 deg) per degree, from memory): scale about 2.1.
    path = tmp_path / "cp.toml"
    path.write_text(_CP_SITE.format(x0="0.0", lat0="51.0", lon1="13.7006"), encoding="utf-8")
    site = load_site(path)
    assert any("scale" in w and "far from 1" in w for w in site.warnings)


@pytest.mark.parametrize("value, message", [('"Mars/Olympus"', "unknown time zone"), ("5", "IANA")])
def test_timezone_must_be_an_iana_name(tmp_path, value, message):
    from mapper.errors import MapperError
    from mapper.site.site_file import load_site

    path = tmp_path / "tz.toml"
    path.write_text(f'[site]\nname = "Tz"\ntimezone = {value}\n[outline]\nwkt = "POLYGON ((0 0, 9 0, 9 9, 0 9, 0 '
                    '0))"\n',
                    encoding="utf-8")
    with pytest.raises(MapperError, match=message) as err:
        load_site(path)
    assert "tz.toml:3" in str(err.value.where)
    ok = tmp_path / "ok.toml"
    ok.write_text('[site]\nname = "Tz"\ntimezone = "Europe/Berlin"\n[outline]\nwkt = "POLYGON ((0 0, 9 0, 9 9, 0 9, 0 '
                  '0))"\n',
                  encoding="utf-8")
    assert load_site(ok).timezone == "Europe/Berlin"
