"""Georeferencing: exported positions against a known rotation and offset in UTM zone 33N."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import rasterio
from pyproj import CRS
from scipy.interpolate import RegularGridInterpolator

from mapper.export.bundle import export_products
from mapper.export.raster import RESAMPLE_FACTOR
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


def test_raster_is_north_up_and_agrees_with_the_field_model_at_the_readings(rotated):
    grid = rotated["products"].grid
    tif = rotated["result"].tif
    with rasterio.open(tif) as src:
        assert src.count == 2 and src.dtypes == ("float32", "float32")
        assert CRS.from_user_input(src.crs.to_wkt()) == CRS.from_user_input(UTM)
        t = src.transform
        # North-up: no rotation terms (GDAL data model: GT(2) = GT(4) = 0), square cells of half
        # the field's ground cell (the known transform has scale 1), north at row 0.
        assert t.b == 0.0 and t.d == 0.0
        cell = grid.cell_m / RESAMPLE_FACTOR
        assert t.a == pytest.approx(cell, rel=1e-6) and t.e == pytest.approx(-cell, rel=1e-6)
        est, std = src.read(1), src.read(2)
        assert src.nodatavals[0] is not None and np.isnan(src.nodatavals[0])
    # Nodata exactly outside the outline: a cell centre mapped back into site metres by the
    # known transform is finite when inside the 20 m x 12 m rectangle and NaN outside it.
    rows, cols = np.meshgrid(np.arange(est.shape[0]), np.arange(est.shape[1]), indexing="ij")
    ce, cn = rasterio.transform.xy(t, rows.ravel(), cols.ravel(), offset="center")
    theta = np.radians(ROTATION_DEG)
    de, dn = np.asarray(ce) - known_forward(0, 0)[0], np.asarray(cn) - known_forward(0, 0)[1]
    sx, sy = np.cos(theta) * de + np.sin(theta) * dn, -np.sin(theta) * de + np.cos(theta) * dn
    margin = 1e-6
    inside = (sx > margin) & (sx < 20 - margin) & (sy > margin) & (sy < 12 - margin)
    outside = (sx < -margin) | (sx > 20 + margin) | (sy < -margin) | (sy > 12 + margin)
    flat = est.ravel()
    assert np.isfinite(flat[inside]).all() and np.isnan(flat[outside]).all()
    assert np.isfinite(std.ravel()[inside]).all()
    # Values at the readings. The field model between its nodes is the bilinear interpolant of
    # its grid (scipy's RegularGridInterpolator, method "linear", is the reference). The GeoTIFF
    # cell holding a reading was resampled bilinearly at that cell's centre q, at most
    # (raster cell) * sqrt(2) / 2 from the reading p. A bilinear interpolant is Lipschitz with constant
    # at most sqrt(2) * G, G the largest node-to-node slope of the cells it crosses, so the stated
    # resampling error bound is |tif(p) - model(p)| <= sqrt(2) * G * |q - p| (+ float32 rounding,
    # 1e-6 relative). G is taken over the 5 x 5 nodes around the reading.
    model = RegularGridInterpolator((grid.y, grid.x), grid.estimate, method="linear", bounds_error=False)
    readings = gpd.read_file(rotated["result"].gpkg.path, layer="readings")
    e, n = known_forward(readings["x_site_m"], readings["y_site_m"])
    inv = ~t
    checked = 0
    errors = []
    for x, y, pe, pn in zip(readings["x_site_m"], readings["y_site_m"], e, n, strict=True):
        ref = float(model([[y, x]])[0])
        if not np.isfinite(ref):
            continue  # a node around the reading lies outside the outline
        col, row = (int(np.floor(v)) for v in inv @ (pe, pn))
        value = float(est[row, col])
        qe, qn = t @ (col + 0.5, row + 0.5)
        dist = float(np.hypot(qe - pe, qn - pn))
        assert dist <= cell * np.sqrt(2) / 2 + 1e-9
        i, j = int(np.searchsorted(grid.x, x)), int(np.searchsorted(grid.y, y))
        win = grid.estimate[max(j - 3, 0):j + 3, max(i - 3, 0):i + 3]
        slope = np.nanmax([np.nanmax(np.abs(np.diff(win, axis=0)), initial=0.0),
                           np.nanmax(np.abs(np.diff(win, axis=1)), initial=0.0)]) / grid.cell_m
        bound = np.sqrt(2) * slope * dist + 1e-6 * abs(ref) + 1e-3
        assert abs(value - ref) <= bound, (x, y, value, ref, bound)
        errors.append(abs(value - ref))
        checked += 1
    assert checked > 50
    # In V/m, on the 9 kV/m bump of the test field: the median error stays far below the action level.
    assert float(np.median(errors)) < 0.05 * rotated["products"].threshold_v_per_m


def test_large_raster_is_tiled_with_overviews(tmp_path):
    # A synthetic 1100 x 40 cell local grid (more than 1024 cells a side): tiled in 256-cell
    # blocks with overviews 2, 4, 8 (GDAL GeoTIFF driver conventions; common practice, no source).
    from shapely.geometry import box

    from mapper.export.crs import ExportCRS
    from mapper.export.raster import write_geotiff
    from mapper.field.model import FieldGrid

    x = 0.05 + 0.1 * np.arange(1100)
    y = 0.05 + 0.1 * np.arange(40)
    est = np.outer(np.ones(40), np.sin(x))
    grid = FieldGrid(x, y, est, np.abs(est) * 0.1, "idw")
    path = write_geotiff(grid, ExportCRS(CRS.from_wkt(LOCAL_CRS_WKT)), tmp_path / "big.tif",
                         outline=box(0, 0, 110, 4))
    with rasterio.open(path) as src:
        assert src.width == 1100 and src.height == 40
        assert src.profile["tiled"] and src.block_shapes[0] == (256, 256)
        assert src.overviews(1) == [2, 4, 8]
        np.testing.assert_allclose(src.read(1), est[::-1].astype(np.float32))


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
