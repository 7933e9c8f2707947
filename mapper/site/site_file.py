"""Reading site descriptions: our TOML site file, or any vector file geopandas reads.

The TOML format is documented in ``docs/site-file.md``.
"""

from __future__ import annotations

import dataclasses
import math
import re
import tomllib
import warnings
from collections.abc import Mapping, Sequence
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


def load_site(
    path: str | Path,
    roles: Mapping[str, str] | None = None,
    units: str = "m",
    *,
    site_crs: str | None = None,
    control_points: str | Path | None = None,
) -> Site:
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
    site_crs : str, optional
        For a vector file without a CRS (a DXF): the projected CRS its coordinates are in, e.g.
        ``"EPSG:32633"``; drawing units are that CRS's units.
    control_points : str or Path, optional
        For a vector file without a CRS: a CSV of control points ``x,y,lon,lat`` (drawing units,
        WGS 84 degrees), two or more, to georeference it as a TOML site's ``[[control_point]]``.
    """
    path = Path(path)
    if not path.exists():
        raise MapperError("site file not found", where=str(path))
    if path.suffix.lower() == ".toml":
        if site_crs is not None or control_points is not None:
            option = "--site-crs" if site_crs is not None else "--control-points"
            raise MapperError(f"{option} is for a drawing or GIS file; a TOML site file gives 'crs' and "
                              "[[control_point]] tables itself", where=str(path))
        return site_from_toml_text(read_utf8(path, "site file"), source=str(path))
    if path.suffix.lower() in VECTOR_SUFFIXES:
        if units not in LENGTH_UNITS:
            raise MapperError(f"unknown units {units!r}; accepted: {', '.join(LENGTH_UNITS)}")
        if site_crs is not None and control_points is not None:
            raise MapperError("give --site-crs (the drawing is drawn in that CRS) or --control-points "
                              "(fit the drawing to the ground), not both")
        points = read_control_points(control_points, LENGTH_UNITS[units]) if control_points is not None else []
        return site_from_vector_file(path, roles or {}, LENGTH_UNITS[units], site_crs=site_crs,
                                     control_points=points)
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
        geom = shapely.from_wkt(wkt)
    except Exception as exc:  # shapely.errors.GEOSException and friends
        raise MapperError(f"bad WKT: {_geos_reason(exc)}", where=where) from None
    if shapely.has_z(geom):
        raise MapperError("WKT has Z coordinates; site geometry is a 2-D plan in x, y "
                          "(give an asset's height as height_m)", where=where)
    if not np.isfinite(shapely.get_coordinates(geom)).all():
        raise MapperError("WKT holds a coordinate that is not a finite number (nan or inf)", where=where)
    return geom


def _geos_reason(exc: Exception) -> str:
    """The first line of a GEOS error, with a plain-words note for an unclosed ring."""
    reason = str(exc).splitlines()[0]
    if "closed" in reason.lower():
        reason = f"ring is not closed (first and last points differ): {reason}"
    return reason


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
    _refuse_non_finite(data, source, text)
    units = head.get("units", "m")
    if not isinstance(units, str) or units not in LENGTH_UNITS:
        raise MapperError(
            f"unknown units {units!r}; accepted: {', '.join(LENGTH_UNITS)}",
            where=_where(source, text, "site", 0, "units"),
        )
    factor = LENGTH_UNITS[units]
    crs = head.get("crs")
    if crs is not None and not (isinstance(crs, str) and crs.strip()):
        raise MapperError(f"'crs' must be text such as 'EPSG:32633', got {crs!r}",
                          where=_where(source, text, "site", 0, "crs"))
    outline_table = data.get("outline")
    if not isinstance(outline_table, dict) or "wkt" not in outline_table:
        raise MapperError("missing [outline] table with 'wkt'", where=source)
    outline = _scale(parse_outline(outline_table["wkt"], _where(source, text, "outline", 0, "wkt")), factor)

    assets = []
    for i, item in enumerate(_tables(data, "asset", source, text)):
        kind = str(item.get("kind", "asset"))
        geom = _scale(parse_wkt(item.get("wkt"), _where(source, text, "asset", i, "wkt")), factor)
        assets.append(
            Asset(
                name=str(item.get("name", f"{kind} {i + 1}")),
                kind=kind,
                geometry=geom,
                sensitive=_flag(item, "sensitive", kind in SENSITIVE_KINDS,
                                _where(source, text, "asset", i, "sensitive")),
                walkable=_flag(item, "walkable", kind not in BLOCKING_KINDS,
                               _where(source, text, "asset", i, "walkable")),
                height_m=_height(item, factor, _where(source, text, "asset", i, "height_m")),
            )
        )
    zones = []
    for i, item in enumerate(_tables(data, "zone", source, text)):
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
    for i, item in enumerate(_tables(data, "control_point", source, text)):
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
    where = _where(source, text, "site", 0, "timezone")
    return dataclasses.replace(site, timezone=_timezone(head.get("timezone"), where))


def _tables(data: dict, name: str, source: str, text: str) -> list[dict]:
    """The ``[[name]]`` tables of a site file; any other shape (a single ``[name]`` table, a
    string, a number, a list of non-tables) is refused, pointing at the key."""
    value = data.get(name, [])
    if isinstance(value, list) and all(isinstance(item, dict) for item in value):
        return value
    if isinstance(value, dict):
        found = f"a single [{name}] table"
    elif isinstance(value, list):
        found = "a list that is not all tables"
    else:
        found = f"{type(value).__name__} {value!r}"
    line = _header_line(text, name, 0) or _key_line(text, name)
    raise MapperError(f"'{name}' must be [[{name}]] tables (double brackets), one per {name.replace('_', ' ')}; "
                      f"found {found}", where=f"{source}:{line}" if line else source)


def _key_line(text: str, key: str) -> int | None:
    """Line number of the first ``key = ...`` line in TOML text."""
    pattern = re.compile(rf"^\s*{re.escape(key)}\s*=")
    return next((n for n, line in enumerate(text.splitlines(), start=1) if pattern.match(line)), None)


def _refuse_non_finite(data: dict, source: str, text: str) -> None:
    """Refuse ``nan`` and ``inf`` anywhere in a site file (they would stall or poison the georeference
    and the plan), naming the table and key."""
    for table, value in data.items():
        if isinstance(value, float) and not math.isfinite(value):
            raise MapperError(f"'{table}' must be a finite number, got {value}", where=source)
        items = [value] if isinstance(value, dict) else value if isinstance(value, list) else []
        for index, item in enumerate(items):
            if not isinstance(item, dict):
                continue  # a list that is not tables is refused by _tables
            for key, number in item.items():
                if isinstance(number, float) and not math.isfinite(number):
                    raise MapperError(f"'{key}' must be a finite number, got {number}",
                                      where=_where(source, text, table, index, key))


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


def site_from_vector_file(
    path: Path,
    roles: Mapping[str, str],
    factor: float = 1.0,
    *,
    site_crs: str | None = None,
    control_points: Sequence[ControlPoint] = (),
) -> Site:
    """Build a site from a vector file (outdoor sites, CAD floor plans).

    Geographic data (lon/lat) is projected to its UTM zone; projected data keeps its CRS. Site
    coordinates are the projected ones less a round origin, converted to metres, and the
    georeference is that translation (and the unit's scale). Data without a CRS (typical of DXF)
    is read in ``site_crs`` when given (drawing units are its units), else taken as site
    coordinates multiplied by ``factor`` (metres per drawing unit), georeferenced by
    ``control_points`` (site metres and WGS 84 degrees) when there are two or more.
    """
    layers, frames = _read_layers(path)
    unknown = sorted(set(roles) - set(layers))
    if not frames:
        raise MapperError("vector file has no layers", where=str(path))
    cad_layers = {str(v) for frame in frames if "Layer" in frame.columns for v in frame["Layer"].dropna()}
    unknown = [name for name in unknown if name not in cad_layers]
    if unknown:
        known = ", ".join(sorted(set(layers) | cad_layers))
        raise MapperError(f"--role names layer {unknown[0]!r}, which the file does not have; layers: "
                          f"{known}", where=str(path))
    crs = frames[0].crs
    for frame in frames[1:]:
        if frame.crs != crs:
            frame.to_crs(crs, inplace=True)
    crs = _given_crs(crs, site_crs, control_points, path)
    outline_parts, assets, zones, z_notes = [], [], [], []
    for frame in frames:
        for index, row in frame.iterrows():
            geom = row.geometry
            where = f"{path}: layer {row['_layer']!r} feature {index}"
            if not isinstance(geom, BaseGeometry):
                raise MapperError("feature has no geometry, or one that cannot be read (e.g. a polygon ring "
                                  "that is not closed); fix or remove it", where=where)
            if geom.is_empty:
                continue
            if not np.isfinite(shapely.get_coordinates(geom)).all():
                raise MapperError("feature has a coordinate that is not a finite number", where=where)
            if shapely.has_z(geom):  # CAD drawings are often 3-D with every Z at 0: the plan is 2-D
                if np.any(shapely.get_coordinates(geom, include_z=True)[:, 2] != 0):
                    z_notes.append(f"{where}: Z coordinates dropped; the site is a 2-D plan "
                                   "(give an asset's height as height_m)")
                geom = shapely.force_2d(geom)
            role = _role_of(row, roles)
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
        # metres per CRS unit (1 for UTM; 0.3048 for a CRS in feet)
        unit_m = float(crs.axis_info[0].unit_conversion_factor) if not crs.is_geographic else 1.0
        minx, miny = outline.bounds[:2]
        ox, oy = float(np.floor(minx)), float(np.floor(miny))  # whole units: site x, y start near 0

        def to_site(geom: BaseGeometry) -> BaseGeometry:
            return _scale(affinity.translate(geom, -ox, -oy), unit_m)

        outline = to_site(outline)
        assets = [dataclasses.replace(a, geometry=to_site(a.geometry)) for a in assets]
        zones = [Zone(z.name, to_site(z.geometry), z.limit_v_per_m, z.kind) for z in zones]
        georef = Georef(crs=frames_crs, a=1.0 / unit_m, b=0.0, tx=ox, ty=oy, residuals_m=())
    elif factor != 1.0:
        outline = _scale(outline, factor)
        assets = [dataclasses.replace(a, geometry=_scale(a.geometry, factor)) for a in assets]
        zones = [Zone(z.name, _scale(z.geometry, factor), z.limit_v_per_m, z.kind) for z in zones]
    name = path.stem.replace("_", " ")
    site = _finish(name, outline, assets, zones, list(control_points), georef.crs if georef else None,
                   str(path), georef)
    return dataclasses.replace(site, warnings=site.warnings + tuple(z_notes[:1]))


def _given_crs(stated, site_crs: str | None, control_points: Sequence[ControlPoint], path: Path):
    """The CRS a vector file is read in: its own, or ``site_crs`` for a drawing without one."""
    from pyproj import CRS

    if control_points and stated is not None:
        raise MapperError(f"the file states its CRS ({CRS.from_user_input(stated).to_string()}) and is "
                          "georeferenced by it; --control-points are for a drawing without one", where=str(path))
    if site_crs is None:
        return stated
    try:
        wanted = CRS.from_user_input(site_crs)
    except Exception as exc:  # pyproj's CRSError carries a long message
        raise MapperError(f"unknown CRS {site_crs!r}: {str(exc).splitlines()[0]}; give e.g. EPSG:32633",
                          where="--site-crs") from None
    if not wanted.is_projected:
        raise MapperError(f"{site_crs} is not a projected CRS; a drawing is drawn in a projected CRS "
                          "(e.g. a UTM zone, EPSG:326NN)", where="--site-crs")
    if stated is not None and CRS.from_user_input(stated) != wanted:
        raise MapperError(f"the file states its CRS ({CRS.from_user_input(stated).to_string()}); "
                          f"--site-crs {site_crs} is for a drawing without one", where=str(path))
    return wanted


def read_control_points(path: str | Path, factor: float = 1.0) -> list[ControlPoint]:
    """Control points from a CSV with columns ``x,y,lon,lat`` (any letter case).

    Parameters
    ----------
    path : str or Path
        CSV file, UTF-8, header first.
    factor : float
        Metres per drawing unit of ``x`` and ``y``.

    Returns
    -------
    list of ControlPoint
        In site metres and WGS 84 degrees.
    """
    import csv

    path = Path(path)
    if not path.exists():
        raise MapperError("control points file not found", where=str(path))
    lines = read_utf8(path, "control points file").splitlines()
    try:
        rows = list(csv.reader(lines))
    except csv.Error as exc:
        raise MapperError(f"not readable as CSV: {exc}", where=str(path)) from None
    header = [h.strip().lower() for h in rows[0]] if rows else []
    needed = ("x", "y", "lon", "lat")
    missing = [name for name in needed if name not in header]
    if missing:
        raise MapperError(f"header needs x,y,lon,lat columns (missing {','.join(missing)})", where=f"{path}:1")
    points = []
    for number, cells in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in cells):
            continue
        values = {}
        for name in needed:
            index = header.index(name)
            text = cells[index].strip() if index < len(cells) else ""
            try:
                values[name] = float(text)
            except ValueError:
                values[name] = math.nan
            if not math.isfinite(values[name]):
                raise MapperError(f"{name} must be a number, got {text!r}", where=f"{path}:{number}: {name}")
        if not -90.0 <= values["lat"] <= 90.0 or not -180.0 <= values["lon"] <= 180.0:
            raise MapperError(f"lon {values['lon']:g}, lat {values['lat']:g} is not on the Earth "
                              "(lon -180..180, lat -90..90)", where=f"{path}:{number}: lat")
        points.append(ControlPoint(values["x"] * factor, values["y"] * factor, values["lon"], values["lat"]))
    if len(points) < 2:
        raise MapperError(f"{len(points)} control points; a georeference needs at least 2", where=str(path))
    return points


def _read_layers(path: Path) -> tuple[list[str], list]:
    """The layer names of a vector file and one GeoDataFrame per layer (column ``_layer``).

    A DXF whose text is UTF-8 is read as UTF-8 whatever code page its header names (GDAL itself
    writes such files), so non-ASCII layer names come out as written. A geometry GDAL cannot turn
    into a shape (an unclosed ring) reads as a missing geometry, refused per feature by the caller.
    """
    import geopandas as gpd
    import pyogrio

    options = {}
    if path.suffix.lower() == ".dxf" and _is_utf8_beyond_ascii(path):
        options = {"DXF_ENCODING": "UTF-8"}
    before = {key: pyogrio.get_gdal_config_option(key) for key in options}
    pyogrio.set_gdal_config_options(options)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # GDAL's notes (no CRS, unclosed ring) become our errors
            layers = [str(row[0]) for row in pyogrio.list_layers(path)]
            frames = []
            for layer in layers:
                frame = gpd.read_file(path, layer=layer, on_invalid="ignore")
                frame["_layer"] = layer
                frames.append(frame)
    except Exception as exc:  # pyogrio's DataSourceError, FeatureError and GEOS errors
        raise MapperError(f"cannot read vector file: {_vector_reason(path, exc)}", where=str(path)) from None
    finally:
        pyogrio.set_gdal_config_options(before)
    return layers, frames


def _is_utf8_beyond_ascii(path: Path) -> bool:
    data = path.read_bytes()
    if data.isascii():
        return False
    try:
        data.decode("utf-8")
    except UnicodeDecodeError:
        return False
    return True


def _vector_reason(path: Path, exc: Exception) -> str:
    """GDAL's complaint in a line; for a DXF, the line and the entity GDAL stopped at."""
    reason = _geos_reason(exc)
    found = re.search(r"error at line (\d+)", reason)
    if path.suffix.lower() != ".dxf" or not found:
        return reason
    line = int(found.group(1))
    entity = _dxf_entity_at(path, line)
    hint = "fix or remove it, or save the drawing again from the CAD program"
    if entity == "SPLINE":
        hint = "a SPLINE given by fit points only cannot be read; convert it to a polyline in the CAD program"
    return f"the drawing cannot be read at line {line} (in a {entity or 'unknown'} entity); {hint}"


def _dxf_entity_at(path: Path, line: int) -> str | None:
    """The type of the DXF entity that holds ``line`` (the last group code 0 before it)."""
    lines = path.read_bytes().decode("utf-8", "replace").splitlines()
    for number in range(min(line, len(lines)) - 1, 0, -1):
        if lines[number - 1].strip() == "0" and number % 2 == 1:  # group codes sit on odd lines
            return lines[number].strip() or None
    return None


_FLAG_WORDS = {"true": True, "false": False, "yes": True, "no": False, "1": True, "0": False}


#: Highest asset height accepted, metres (a tall hall's roof; our own choice).
MAX_ASSET_HEIGHT_M = 50.0


def _height(item, factor: float, where: str) -> float | None:
    """An asset's optional ``height_m`` above the floor, metres (a number; never scaled by
    ``units``, it is always in metres)."""
    value = item.get("height_m") if hasattr(item, "get") else None
    if (value is None or (isinstance(value, float) and np.isnan(value))
            or (isinstance(value, str) and not value.strip())):
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
        raise MapperError(f"'height_m' must be above the floor and at most {MAX_ASSET_HEIGHT_M:g} m, got "
                          f"{value!r}", where=where)
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
