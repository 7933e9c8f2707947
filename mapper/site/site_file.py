"""Reading site descriptions: our TOML site file, or any vector file geopandas reads.

The TOML format is documented in ``docs/site-file.md``.
"""

from __future__ import annotations

import dataclasses
import math
import re
import tomllib
from collections.abc import Mapping
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np
import shapely
from shapely import affinity
from shapely.geometry import MultiPolygon, Polygon
from shapely.geometry.base import BaseGeometry
from shapely.validation import explain_validity

from mapper.errors import MapperError
from mapper.site.georef import RMS_WARN_M, Georef, fit_similarity, utm_crs_for
from mapper.site.model import BLOCKING_KINDS, SENSITIVE_KINDS, Asset, ControlPoint, Site, Zone
from mapper.textfile import read_utf8
from mapper.units import LENGTH_UNITS, parse_threshold

VECTOR_SUFFIXES = (".gpkg", ".geojson", ".json", ".shp", ".dxf", ".fgb", ".kml", ".gml")
#: Roles a vector layer or feature can take besides an asset kind.
SPECIAL_ROLES = ("outline", "zone", "ignore")


def load_site(path: str | Path, roles: Mapping[str, str] | None = None, units: str = "m") -> Site:
    """Load a site from a TOML site file or a vector file.

    Parameters
    ----------
    path : str or Path
        ``.toml`` site file, or a vector file (GeoPackage, GeoJSON, Shapefile, DXF ...).
    roles : mapping, optional
        For vector files: layer name (or DXF layer) -> role, where a role is ``outline``,
        ``zone``, ``ignore`` or an asset kind. Features may carry a ``kind`` attribute instead.
    units : str
        For vector files without a CRS (CAD drawings): length unit of the coordinates
        (``m``, ``cm``, ``mm``, ``ft``, ``in``).
    """
    path = Path(path)
    if not path.exists():
        raise MapperError("site file not found", where=str(path))
    if path.suffix.lower() == ".toml":
        return site_from_toml_text(read_utf8(path, "site file"), source=str(path))
    if path.suffix.lower() in VECTOR_SUFFIXES:
        if units not in LENGTH_UNITS:
            raise MapperError(f"unknown units {units!r}; accepted: {', '.join(LENGTH_UNITS)}")
        return site_from_vector_file(path, roles or {}, LENGTH_UNITS[units])
    raise MapperError(
        f"unknown site file type {path.suffix!r}; use a .toml site file or one of {', '.join(VECTOR_SUFFIXES)}",
        where=str(path),
    )


def _header_line(text: str, table: str, index: int) -> int | None:
    """Line number (1-based) of the ``index``-th ``[table]``/``[[table]]`` header in TOML text."""
    pattern = re.compile(rf"^\s*\[\[?\s*{re.escape(table)}\s*\]\]?\s*(#.*)?$")
    count = 0
    for number, line in enumerate(text.splitlines(), start=1):
        if pattern.match(line):
            if count == index:
                return number
            count += 1
    return None


def _where(source: str, text: str, table: str, index: int, key: str) -> str:
    """``file:line: [table] 'key'`` pointing at the key's own line when it is there."""
    line = _header_line(text, table, index)
    if line is not None:
        lines = text.splitlines()
        key_pattern = re.compile(rf"^\s*{re.escape(key)}\s*=")
        for number in range(line + 1, len(lines) + 1):
            current = lines[number - 1]
            if current.lstrip().startswith("["):
                break
            if key_pattern.match(current):
                line = number
                break
    label = f"[[{table}]] #{index + 1}" if table not in ("site", "outline") else f"[{table}]"
    return f"{source}:{line}: {label} '{key}'" if line else f"{source}: {label} '{key}'"


def parse_outline(wkt: str, where: str) -> Polygon:
    """Parse and validate a site outline.

    Refuses empty, unclosed, non-polygon and invalid (e.g. self-intersecting) outlines with
    shapely's explanation of where it is invalid.
    """
    geom = parse_wkt(wkt, where)
    if geom.is_empty:
        raise MapperError("outline is empty; expected a POLYGON", where=where)
    if not isinstance(geom, Polygon | MultiPolygon):
        raise MapperError(f"outline is a {geom.geom_type}, not a POLYGON", where=where)
    if not geom.is_valid:
        raise MapperError(f"outline is invalid: {explain_validity(geom)}", where=where)
    if geom.area <= 0:
        raise MapperError("outline has no area", where=where)
    return geom


def parse_wkt(wkt: object, where: str) -> BaseGeometry:
    """Parse WKT text, turning GEOS errors into a one-line message."""
    if not isinstance(wkt, str) or not wkt.strip():
        raise MapperError("expected WKT text, e.g. 'POLYGON ((0 0, 10 0, 10 5, 0 5, 0 0))'", where=where)
    try:
        return shapely.from_wkt(wkt)
    except Exception as exc:  # shapely.errors.GEOSException and friends
        reason = str(exc).splitlines()[0]
        if "closed" in reason.lower():
            reason = f"ring is not closed (first and last points differ): {reason}"
        raise MapperError(f"bad WKT: {reason}", where=where) from None


def _scale(geom: BaseGeometry, factor: float) -> BaseGeometry:
    return geom if factor == 1.0 else affinity.scale(geom, factor, factor, origin=(0, 0))


def site_from_toml_text(text: str, source: str = "<site>") -> Site:
    """Parse a TOML site description into a :class:`Site` in metres.

    Parameters
    ----------
    text : str
        TOML text (see ``docs/site-file.md``).
    source : str
        File name used in error messages.
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise MapperError(f"not valid TOML: {exc}", where=source) from None
    head = data.get("site")
    if not isinstance(head, dict):
        raise MapperError("missing [site] table with 'name'", where=source)
    name = head.get("name")
    if not isinstance(name, str) or not name.strip():
        raise MapperError("missing or empty 'name'", where=_where(source, text, "site", 0, "name"))
    units = head.get("units", "m")
    if units not in LENGTH_UNITS:
        raise MapperError(
            f"unknown units {units!r}; accepted: {', '.join(LENGTH_UNITS)}",
            where=_where(source, text, "site", 0, "units"),
        )
    factor = LENGTH_UNITS[units]
    crs = head.get("crs")
    outline_table = data.get("outline")
    if not isinstance(outline_table, dict) or "wkt" not in outline_table:
        raise MapperError("missing [outline] table with 'wkt'", where=source)
    outline = _scale(parse_outline(outline_table["wkt"], _where(source, text, "outline", 0, "wkt")), factor)

    assets = []
    for i, item in enumerate(data.get("asset", [])):
        kind = str(item.get("kind", "asset"))
        geom = _scale(parse_wkt(item.get("wkt"), _where(source, text, "asset", i, "wkt")), factor)
        assets.append(
            Asset(
                name=str(item.get("name", f"{kind} {i + 1}")),
                kind=kind,
                geometry=geom,
                sensitive=_flag(item, "sensitive", kind in SENSITIVE_KINDS, _where(source, text, "asset", i, "sensitive")),
                walkable=_flag(item, "walkable", kind not in BLOCKING_KINDS, _where(source, text, "asset", i, "walkable")),
                height_m=_height(item, factor, _where(source, text, "asset", i, "height_m")),
            )
        )
    zones = []
    for i, item in enumerate(data.get("zone", [])):
        where = _where(source, text, "zone", i, "wkt")
        geom = _scale(parse_wkt(item.get("wkt"), where), factor)
        if not isinstance(geom, Polygon | MultiPolygon) or not geom.is_valid:
            raise MapperError("zone must be a valid POLYGON", where=where)
        limit = item.get("limit")
        limit_v = None
        if limit is not None:
            try:
                limit_v = parse_threshold(str(limit))
            except MapperError as exc:
                raise MapperError(exc.message, where=_where(source, text, "zone", i, "limit")) from None
        zones.append(Zone(str(item.get("name", f"zone {i + 1}")), geom, limit_v, str(item.get("kind", "zone"))))
    points = []
    for i, item in enumerate(data.get("control_point", [])):
        try:
            values = {k: float(item[k]) for k in ("x", "y", "lon", "lat")}
        except (KeyError, TypeError, ValueError) as exc:
            raise MapperError(
                f"control point needs numeric x, y, lon, lat ({exc})",
                where=_where(source, text, "control_point", i, "x"),
            ) from None
        for key, value in values.items():
            if not math.isfinite(value):
                raise MapperError(f"control point '{key}' must be a finite number, got {value}",
                                  where=_where(source, text, "control_point", i, key))
        if not -90.0 <= values["lat"] <= 90.0 or not -180.0 <= values["lon"] <= 180.0:
            raise MapperError(f"control point lon {values['lon']:g}, lat {values['lat']:g} is not on the Earth "
                              "(lon -180..180, lat -90..90)", where=_where(source, text, "control_point", i, "lat"))
        points.append(ControlPoint(values["x"] * factor, values["y"] * factor, values["lon"], values["lat"]))
    try:
        site = _finish(name, outline, assets, zones, points, crs, source)
    except MapperError as exc:
        if exc.where is not None:
            raise
        # the georeference refused the CRS or the control points: point at the file
        key = ("site", 0, "crs") if "CRS" in exc.message else ("control_point", 0, "x")
        raise MapperError(exc.message, where=_where(source, text, *key)) from None
    return dataclasses.replace(site, timezone=_timezone(head.get("timezone"), _where(source, text, "site", 0, "timezone")))


def _timezone(value, where: str) -> str | None:
    """The site's local time zone: an IANA name such as ``Europe/Berlin`` (times stay UTC inside)."""
    if value is None:
        return None
    if not isinstance(value, str) or not value.strip():
        raise MapperError(f"'timezone' must be an IANA time zone name such as 'Europe/Berlin', got {value!r}",
                          where=where)
    try:
        ZoneInfo(value.strip())
    except (ZoneInfoNotFoundError, ValueError):
        raise MapperError(f"unknown time zone {value!r}; give an IANA name such as 'Europe/Berlin'",
                          where=where) from None
    return value.strip()


def _finish(name, outline, assets, zones, points, crs, source, georef: Georef | None = None) -> Site:
    warnings = []
    for asset in assets:
        if not asset.geometry.intersects(outline):
            warnings.append(f"asset {asset.name!r} lies outside the site outline")
    for zone in zones:
        if not zone.geometry.intersects(outline):
            warnings.append(f"zone {zone.name!r} lies outside the site outline")
    if georef is None and len(points) >= 2:
        georef = fit_similarity([(p.x, p.y) for p in points], [(p.lon, p.lat) for p in points], crs)
        if not 0.9 <= georef.scale <= 1.1:
            warnings.append(
                f"georeference scale {georef.scale:.3f} is far from 1 for a drawing in metres (0.9-1.1); "
                "check the site units and the control points"
            )
        if georef.rms_m > RMS_WARN_M:
            worst = max(range(len(points)), key=lambda k: georef.residuals_m[k])
            warnings.append(
                f"georeference RMS {georef.rms_m:.2f} m exceeds {RMS_WARN_M} m "
                f"(largest residual {georef.residuals_m[worst]:.2f} m at control point {worst + 1})"
            )
    elif len(points) == 1:
        warnings.append("one control point is not enough to georeference; the site stays local")
    return Site(
        name=name,
        outline=outline,
        assets=tuple(assets),
        zones=tuple(zones),
        control_points=tuple(points),
        crs=georef.crs if georef else crs,
        georef=georef,
        warnings=tuple(warnings),
        source=source,
    )


def site_from_vector_file(path: Path, roles: Mapping[str, str], factor: float = 1.0) -> Site:
    """Build a site from a vector file (outdoor sites, CAD floor plans).

    Geographic data (lon/lat) is projected to its UTM zone; projected data keeps its CRS. Site
    coordinates are the projected ones less a round origin, and the georeference is that
    translation. Data without a CRS (typical of DXF) is taken as site coordinates, multiplied by
    ``factor`` (metres per drawing unit).
    """
    import geopandas as gpd
    import pyogrio

    try:
        layers = [str(row[0]) for row in pyogrio.list_layers(path)]
    except Exception as exc:
        raise MapperError(f"cannot read vector file: {str(exc).splitlines()[0]}", where=str(path)) from None
    unknown = sorted(set(roles) - set(layers))
    frames = []
    for layer in layers:
        frame = gpd.read_file(path, layer=layer)
        frame["_layer"] = layer
        frames.append(frame)
    if not frames:
        raise MapperError("vector file has no layers", where=str(path))
    cad_layers = {str(v) for frame in frames if "Layer" in frame.columns for v in frame["Layer"].dropna()}
    unknown = [name for name in unknown if name not in cad_layers]
    if unknown:
        known = ", ".join(sorted(set(layers) | cad_layers))
        raise MapperError(f"--role names layer {unknown[0]!r}, which the file does not have; layers: {known}", where=str(path))
    crs = frames[0].crs
    for frame in frames[1:]:
        if frame.crs != crs:
            frame.to_crs(crs, inplace=True)
    outline_parts, assets, zones = [], [], []
    for frame in frames:
        for index, row in frame.iterrows():
            geom = row.geometry
            if geom is None or geom.is_empty:
                continue
            role = _role_of(row, roles)
            where = f"{path}: layer {row['_layer']!r} feature {index}"
            if role is None:
                raise MapperError(
                    "feature has no role; give it a 'kind' attribute or map its layer with --role LAYER=ROLE",
                    where=where,
                )
            if role == "ignore":
                continue
            name = str(row.get("name") or f"{role} {len(assets) + len(zones) + 1}")
            if role == "outline":
                if geom.geom_type in ("LineString", "LinearRing") and geom.is_closed:
                    geom = Polygon(geom.coords)
                outline_parts.append((geom, where))
            elif role == "zone":
                limit = row.get("limit")
                limit_v = None
                if limit is not None and not (isinstance(limit, float) and np.isnan(limit)) and str(limit).strip():
                    try:
                        limit_v = parse_threshold(str(limit))
                    except MapperError as exc:
                        raise MapperError(f"'limit': {exc.message}", where=where) from None
                zones.append(Zone(name, geom, limit_v, str(row.get("zone_kind") or "zone")))
            else:
                assets.append(
                    Asset(
                        name, role, geom,
                        _flag(row, "sensitive", role in SENSITIVE_KINDS, where, words=True),
                        _flag(row, "walkable", role not in BLOCKING_KINDS, where, words=True),
                        _height(row, 1.0, where),
                    )
                )
    if not outline_parts:
        raise MapperError("no outline: mark one polygon with kind=outline or --role LAYER=outline", where=str(path))
    if len(outline_parts) > 1:
        raise MapperError(f"{len(outline_parts)} outline features; expected exactly one", where=outline_parts[1][1])
    outline_geom, outline_where = outline_parts[0]
    outline = parse_outline(outline_geom.wkt, outline_where)
    georef = None
    if crs is not None:
        if crs.is_geographic:
            c = outline.centroid
            target = utm_crs_for(c.x, c.y)
            frames_crs = target
            outline = _project(outline, crs, target)
            assets = [dataclasses.replace(a, geometry=_project(a.geometry, crs, target)) for a in assets]
            zones = [Zone(z.name, _project(z.geometry, crs, target), z.limit_v_per_m, z.kind) for z in zones]
        else:
            frames_crs = crs.to_string()
        minx, miny = outline.bounds[:2]
        ox, oy = float(np.floor(minx)), float(np.floor(miny))  # whole metres: site x, y start near 0
        outline = affinity.translate(outline, -ox, -oy)
        assets = [dataclasses.replace(a, geometry=affinity.translate(a.geometry, -ox, -oy)) for a in assets]
        zones = [Zone(z.name, affinity.translate(z.geometry, -ox, -oy), z.limit_v_per_m, z.kind) for z in zones]
        georef = Georef(crs=frames_crs, a=1.0, b=0.0, tx=ox, ty=oy, residuals_m=())
    elif factor != 1.0:
        outline = _scale(outline, factor)
        assets = [dataclasses.replace(a, geometry=_scale(a.geometry, factor)) for a in assets]
        zones = [Zone(z.name, _scale(z.geometry, factor), z.limit_v_per_m, z.kind) for z in zones]
    name = path.stem.replace("_", " ")
    return _finish(name, outline, assets, zones, [], georef.crs if georef else None, str(path), georef)


_FLAG_WORDS = {"true": True, "false": False, "yes": True, "no": False, "1": True, "0": False}


#: Highest asset height accepted, metres (a tall hall's roof; our own choice).
MAX_ASSET_HEIGHT_M = 50.0


def _height(item, factor: float, where: str) -> float | None:
    """An asset's optional ``height_m`` above the floor, metres (a number; never scaled by
    ``units``, it is always in metres)."""
    value = item.get("height_m") if hasattr(item, "get") else None
    if value is None or (isinstance(value, float) and np.isnan(value)) or (isinstance(value, str) and not value.strip()):
        return None
    if isinstance(value, str):
        try:
            value = float(value.strip().replace(",", "."))
        except ValueError:
            raise MapperError(f"'height_m' must be a number of metres, got {value!r}", where=where) from None
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise MapperError(f"'height_m' must be a number of metres, got {value!r}", where=where)
    h = float(value)
    if not np.isfinite(h) or not 0 < h <= MAX_ASSET_HEIGHT_M:
        raise MapperError(f"'height_m' must be above the floor and at most {MAX_ASSET_HEIGHT_M:g} m, got {value!r}", where=where)
    return h


def _flag(item, key: str, default: bool, where: str, words: bool = False) -> bool:
    """A true/false attribute (or 0/1); anything else, such as ``"false"`` in quotes, is refused.

    ``words=True`` (vector files, whose formats often store booleans as text) also accepts the
    words true/false and yes/no.
    """
    value = item.get(key) if hasattr(item, "get") else None
    if words and isinstance(value, str) and value.strip().lower() in _FLAG_WORDS:
        return _FLAG_WORDS[value.strip().lower()]
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return default
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | float | np.integer | np.floating) and value in (0, 1):
        return bool(value)  # GIS formats store booleans as 0/1 integers
    raise MapperError(f"'{key}' must be true or false (unquoted), got {value!r}", where=where)


def _role_of(row, roles: Mapping[str, str]) -> str | None:
    layer = row["_layer"]
    cad_layer = row.get("Layer") if hasattr(row, "get") else None
    for key in (cad_layer, layer):
        if key is not None and key in roles:
            return roles[key]
    kind = row.get("kind") if hasattr(row, "get") else None
    if isinstance(kind, str) and kind.strip():
        return kind.strip()
    return None


def _project(geom: BaseGeometry, source_crs, target: str) -> BaseGeometry:
    from pyproj import Transformer

    transformer = Transformer.from_crs(source_crs, target, always_xy=True)
    return shapely.transform(geom, lambda xy: np.column_stack(transformer.transform(xy[:, 0], xy[:, 1])))
