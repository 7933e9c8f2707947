"""Findings as RFC 7946 GeoJSON (longitude/latitude, WGS 84), and the CRS statement of ``--json``.

RFC 7946 fixes the coordinate reference system to WGS 84 longitude/latitude (section 4) and has
no ``crs`` member, so only a georeferenced site can be written: its site metres go through the
site's similarity transform into its projected CRS and from there to EPSG:4326. Polygon
exterior rings run counter-clockwise and holes clockwise (section 3.1.6).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import shapely
from pyproj import Transformer
from shapely.geometry import Point, mapping
from shapely.geometry.base import BaseGeometry

from mapper.atomic_file import atomic_path, output_path
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS, export_crs
from mapper.site.model import Site

#: Decimal places of longitude and latitude: 1e-8 degree is about 1 mm on the ground.
DECIMALS = 8


def crs_statement(site: Site) -> dict:
    """What the coordinates of ``--json`` output mean, for a JSON document.

    Positions (``x``, ``y``, ``peak_x``, ``peak_y``) and ``wkt`` geometries are in site metres;
    a georeferenced site also names its projected CRS and the transform into it.
    """
    ecrs = export_crs(site)
    out: dict = {
        "coordinates": "site metres (the site file's own x and y axes)",
        "georeferenced": ecrs.georef is not None,
        "export_crs": ecrs.name,
    }
    if ecrs.georef is not None:
        g = ecrs.georef
        out["site_to_export"] = {
            "formula": "E = a x - b y + tx, N = b x + a y + ty",
            "a": g.a, "b": g.b, "tx": g.tx, "ty": g.ty,
            "scale": g.scale, "rotation_deg": g.rotation_deg, "rms_m": g.rms_m,
        }
    else:
        out["site_crs_wkt"] = ecrs.wkt
    return out


def _to_lonlat(ecrs: ExportCRS):
    to_ll = Transformer.from_crs(ecrs.crs, "EPSG:4326", always_xy=True)

    def move(geom: BaseGeometry) -> BaseGeometry:
        projected = ecrs.geometry(geom)

        def f(coords: np.ndarray) -> np.ndarray:
            lon, lat = to_ll.transform(coords[:, 0], coords[:, 1])
            return np.round(np.column_stack([lon, lat]), DECIMALS)

        return shapely.orient_polygons(shapely.transform(projected, f), exterior_cw=False)

    return move


def _clean(value):
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, tuple | list):
        return [_clean(v) for v in value]
    return value


def _feature(layer: str, geom: BaseGeometry, props: dict, move) -> dict:
    properties = {"layer": layer, **{k: _clean(v) for k, v in props.items() if k not in ("wkt", "geometry")}}
    return {"type": "Feature", "geometry": mapping(move(geom)), "properties": properties}


def findings_geojson(products) -> dict:
    """Hotspots, sampling advice and (physical model) sources as a GeoJSON FeatureCollection.

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products` with a field model, of a
        georeferenced site.

    Raises
    ------
    MapperError
        The site is local (no georeference): GeoJSON needs longitude and latitude.
    """
    from mapper.features.sources import source_records

    site = products.site
    if site.georef is None:
        raise MapperError(
            f"site {site.name!r} is a local grid without a georeference, so it cannot be written as GeoJSON "
            "(longitude/latitude); give the site file a crs and control points", where="--geojson")
    move = _to_lonlat(products.crs)
    f = products.findings
    features = []
    for h in (*f.hotspots, *f.zone_hotspots):
        if h.geometry.is_empty:
            continue
        props = {**h.to_dict(), "hotspot_id": h.id, "n_readings": len(h.reading_ids),
                 "peak_x_site_m": h.peak_x, "peak_y_site_m": h.peak_y}
        for k in ("id", "peak_x", "peak_y"):
            props.pop(k)
        features.append(_feature("hotspots", h.geometry, props, move))
    for s in f.advice:
        props = {**s.to_dict(), "x_site_m": s.x, "y_site_m": s.y}
        props.pop("x")
        props.pop("y")
        features.append(_feature("advice", Point(s.x, s.y), props, move))
    for r in source_records(products.grid, site):
        geom = r.get("geometry")
        geom = geom if geom is not None else shapely.from_wkt(r["wkt"])
        if geom.is_empty:
            continue
        props = {k: v for k, v in r.items() if k not in ("x_m", "y_m")}
        features.append(_feature("sources", geom, props, move))
    return {
        "type": "FeatureCollection",
        "name": site.name,
        "threshold_v_per_m": products.threshold_v_per_m,
        "features": features,
    }


def write_geojson(products, path: str | Path) -> Path:
    """Write :func:`findings_geojson` to ``path`` (UTF-8), atomically."""
    path = output_path(path, ".geojson")
    doc = findings_geojson(products)
    with atomic_path(path) as tmp:
        tmp.write_text(json.dumps(doc, indent=1, allow_nan=False), encoding="utf-8")
    return path


__all__ = ["DECIMALS", "crs_statement", "findings_geojson", "write_geojson"]
