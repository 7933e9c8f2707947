"""Georeferencing: exported positions against a known rotation and offset in UTM zone 33N."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import rasterio
from pyproj import CRS

from mapper.export.bundle import export_products
from mapper.site.georef import LOCAL_CRS_WKT
from mapper.survey.store import Survey
from mapper.workflow import survey_products
from tests.export.helpers import ROTATION_DEG, UTM, add_grid_readings, known_forward

#: Required accuracy of an exported position, metres (the issue's 5 cm).
TOLERANCE_M = 0.05


def test_fitted_georef_recovers_the_known_transform(rotated):
    g = rotated["products"].site.georef
    assert CRS.from_user_input(g.crs) == CRS.from_user_input(UTM)
    # The control points were generated exactly, so the fit returns the transform: rotation to
    # well under a thousandth of a degree, scale 1 to 1e-6, residuals below a millimetre.
    assert g.rotation_deg == pytest.approx(ROTATION_DEG, abs=1e-3)
    assert g.scale == pytest.approx(1.0, abs=1e-6)
    assert max(g.residuals_m) < 1e-3


def test_every_exported_point_within_5_cm(rotated):
    path = rotated["result"].gpkg.path
    readings = gpd.read_file(path, layer="readings")
    assert readings.crs == CRS.from_user_input(UTM)
    e, n = known_forward(readings["x_site_m"], readings["y_site_m"])
    err = np.hypot(readings.geometry.x - e, readings.geometry.y - n)
    assert len(readings) > 50 and err.max() < TOLERANCE_M
    for layer in ("site", "zones", "assets", "bands", "hotspots", "contours"):
        frame = gpd.read_file(path, layer=layer)
        assert frame.crs == CRS.from_user_input(UTM), layer
    # Outline vertices: the site's corners land where the known transform puts them.
    site = gpd.read_file(path, layer="site").geometry.iloc[0]
    corners = np.array(site.geoms[0].exterior.coords)[:-1]
    expect = np.column_stack(known_forward([0, 20, 20, 0], [0, 0, 12, 12]))
    for corner in expect:
        assert np.hypot(*(corners - corner).T).min() < TOLERANCE_M
    # Hotspot peaks: the attribute (site metres) moved by the known transform lies in the polygon
    # within 5 cm.
    hot = gpd.read_file(path, layer="hotspots")
    assert len(hot) >= 1
    for row in hot.itertuples():
        pe, pn = known_forward(row.peak_x_site_m, row.peak_y_site_m)
        assert row.geometry.distance(gpd.points_from_xy([pe], [pn])[0]) < TOLERANCE_M


def test_raster_transform_has_rotation_and_lands_cells(rotated):
    grid = rotated["products"].grid
    tif = rotated["result"].tif
    with rasterio.open(tif) as src:
        assert src.count == 2 and src.dtypes == ("float32", "float32")
        assert CRS.from_user_input(src.crs.to_wkt()) == CRS.from_user_input(UTM)
        t = src.transform
        assert abs(t.b) > 0.1 and abs(t.d) > 0.1  # rotation terms present for a 37 degree site
        est, std = src.read(1), src.read(2)
        rows, cols = np.meshgrid(np.arange(src.height), np.arange(src.width), indexing="ij")
        xs, ys = rasterio.transform.xy(t, rows.ravel(), cols.ravel(), offset="center")
    ny = len(grid.y)
    site_x = grid.x[cols.ravel()]
    site_y = grid.y[ny - 1 - rows.ravel()]
    e, n = known_forward(site_x, site_y)
    assert np.hypot(np.asarray(xs) - e, np.asarray(ys) - n).max() < TOLERANCE_M
    # Values: band 1 is the estimate, band 2 the std, row 0 the largest site y; NaN outside.
    np.testing.assert_array_equal(np.isnan(est), ~grid.inside[::-1])
    np.testing.assert_allclose(est[~np.isnan(est)], grid.estimate[::-1][grid.inside[::-1]].astype(np.float32))
    np.testing.assert_allclose(std[~np.isnan(std)], grid.std[::-1][grid.inside[::-1]].astype(np.float32))


def test_local_site_exports_in_engineering_crs(tmp_path, box_survey):
    add_grid_readings(box_survey, 1.0, (10.0, 6.0))
    with Survey.open(box_survey) as survey:
        products = survey_products(survey)
    assert products.grid is not None and not products.crs.georeferenced
    result = export_products(products, tmp_path / "box.gpkg")
    local = CRS.from_wkt(LOCAL_CRS_WKT)
    for layer in ("readings", "site", "bands"):
        crs = CRS.from_user_input(pyogrio.read_info(result.gpkg.path, layer=layer)["crs"])
        assert crs.is_engineering and crs.name == local.name, layer
    readings = gpd.read_file(result.gpkg.path, layer="readings")
    # Local site: exported coordinates are the site metres themselves.
    np.testing.assert_allclose(readings.geometry.x, readings["x_site_m"])
    np.testing.assert_allclose(readings.geometry.y, readings["y_site_m"])
    with rasterio.open(result.tif) as src:
        assert src.crs is not None and "mapper local site grid" in src.crs.to_wkt()
        assert src.transform.c == pytest.approx(products.grid.x[0] - products.grid.cell_m / 2)
        assert src.transform.f == pytest.approx(products.grid.y[-1] + products.grid.cell_m / 2)
