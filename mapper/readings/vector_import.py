"""Import readings from a GIS point layer: GeoJSON, GeoPackage or Shapefile.

Attribute columns carry what the CSV columns carry (``value``, ``unit``, ``time``, ``height_m``,
``note``, ``kind``, ``meter``, ``point``; names in any letter case); each feature's point is the
reading's position, reprojected from the layer's CRS to site metres through the site's
georeference. Every feature passes the same :class:`~mapper.readings.importing.RowChecker` as a
CSV row.
"""

from __future__ import annotations

import math
import re
import warnings
from collections.abc import Sequence
from datetime import date, datetime, tzinfo
from pathlib import Path

import numpy as np
import pandas as pd
import shapely
from shapely.geometry import MultiPoint, Point

from mapper.errors import MapperError
from mapper.readings.importing import (
    ParsedFile,
    RejectedRow,
    RowError,
    make_row_checker,
    parse_crs,
    site_xy_from_crs,
)
from mapper.readings.model import NewReading
from mapper.site.georef import LOCAL_CRS_WKT
from mapper.site.model import Site

#: File name endings read as GIS point layers.
VECTOR_READING_SUFFIXES = (".geojson", ".json", ".gpkg", ".shp")
#: Attribute columns a reading may carry (the CSV's columns other than the position).
ATTRIBUTE_COLUMNS = ("value", "unit", "time", "height_m", "note", "kind", "meter", "point")
#: Files that belong to a Shapefile besides the ``.shp`` (their content is part of the import).
SHAPEFILE_PARTS = (".shx", ".dbf", ".prj", ".cpg")


def is_vector_readings(path: str | Path) -> bool:
    """True when a readings file is a GIS point layer (by its name's ending)."""
    return Path(path).suffix.lower() in VECTOR_READING_SUFFIXES


def input_files(path: str | Path) -> list[Path]:
    """The files an import of ``path`` reads: a Shapefile's sidecar files too."""
    path = Path(path)
    if path.suffix.lower() != ".shp":
        return [path]
    return [path] + [p for p in (path.with_suffix(s) for s in SHAPEFILE_PARTS) if p.exists()]


def parse_readings_vector(
    path: str | Path,
    site: Site,
    *,
    layer: str | None = None,
    crs: str | None = None,
    unit: str | None = None,
    sign_convention: str = "physics",
    plan_labels: Sequence[str] = (),
    meters: Sequence[str] = (),
    skip_bad: bool = False,
    tz: tzinfo | None = None,
) -> ParsedFile:
    """Read and check the readings of a point layer.

    Parameters
    ----------
    path : str or Path
        GeoJSON, GeoPackage or Shapefile.
    site : Site
        Site the readings belong to (positions are checked against its outline).
    layer : str, optional
        Layer to read; needed when the file holds several layers and not exactly one of points.
    crs : str, optional
        CRS of a layer that states none (e.g. ``"EPSG:32633"``); refused when the layer states
        another. A layer without a CRS is otherwise read as site metres, for a local site only.
    unit, sign_convention, plan_labels, meters, skip_bad, tz
        As for :func:`~mapper.readings.importing.parse_readings_csv`.

    Returns
    -------
    ParsedFile
        Good readings, and bad features (``line`` is the feature id) when skipping bad ones.
    """
    path = Path(path)
    if not path.exists():
        raise MapperError("file not found", where=str(path))
    name = _pick_layer(path, layer)
    frame = _read_layer(path, name)
    where = f"{path}: layer {name!r}" if path.suffix.lower() == ".gpkg" else str(path)
    columns = _attribute_columns(list(frame.columns), where)
    if "value" not in columns:
        raise MapperError(f"the layer has no 'value' attribute; attributes: {_listing(frame)}", where=where)
    if "unit" not in columns and unit is None:
        raise MapperError("no 'unit' attribute; add one or pass --unit", where=where)
    source = _layer_crs(frame.crs, crs, site, where)
    checker = make_row_checker(site, unit=unit, sign_convention=sign_convention, plan_labels=plan_labels,
                               meters=meters, tz=tz)
    points = [_point(geom) for geom in frame.geometry]
    e = np.array([p[0] if p else math.nan for p in points])
    n = np.array([p[1] if p else math.nan for p in points])
    if source is None:
        x, y = e, n
    else:
        try:
            x, y = site_xy_from_crs(site, source, e, n)
        except MapperError as exc:
            raise MapperError(exc.message, where=where) from None
    degrees = source is not None and parse_crs(source).is_geographic
    good: list[NewReading] = []
    rejected: list[RejectedRow] = []
    cells = frame[list(columns.values())].to_dict("records")
    for index, (fid, geom) in enumerate(zip(frame.index, frame.geometry, strict=True)):
        row = {key: _cell(cells[index][column]) for key, column in columns.items()}
        if "time" in row:
            row["time"] = _iso_time_text(row["time"])
        try:
            if points[index] is None:
                raise RowError("geometry", _geometry_problem(geom))
            lonlat = (float(e[index]), float(n[index])) if degrees else None
            good.append(checker.check(row, float(x[index]), float(y[index]), "geometry", lonlat))
        except (MapperError, RowError) as exc:
            column = exc.column if isinstance(exc, RowError) else ""
            feature = f"{where}: feature {fid}"
            if not skip_bad:
                raise MapperError(exc.message, where=f"{feature}: {column}" if column else feature) from None
            rejected.append(RejectedRow(int(fid), row, f"{column}: {exc.message}" if column else exc.message))
    if not good and not rejected:
        raise MapperError("the layer has no features", where=where)
    return ParsedFile(good, rejected)


def _pick_layer(path: Path, layer: str | None) -> str:
    """The layer to read: the one named, the only one, or the only point layer."""
    import pyogrio

    try:
        layers = [(str(n), str(g or "")) for n, g in pyogrio.list_layers(path)]
    except Exception as exc:  # pyogrio's DataSourceError
        raise MapperError(f"cannot read as a GIS file: {str(exc).splitlines()[0]}", where=str(path)) from None
    names = [n for n, _ in layers]
    if layer is not None:
        if layer not in names:
            raise MapperError(f"no layer {layer!r}; layers: {', '.join(names)}", where=str(path))
        return layer
    if len(layers) == 1:
        return names[0]
    point_layers = [n for n, g in layers if "point" in g.lower()]
    if len(point_layers) == 1:
        return point_layers[0]
    raise MapperError(f"the file holds {len(layers)} layers; name one with --layer NAME "
                      f"(layers: {', '.join(names)})", where=str(path))


def _read_layer(path: Path, layer: str):
    """One layer as a GeoDataFrame indexed by feature id (DATETIME fields as datetimes)."""
    import pyogrio

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # GDAL's notes become our errors
            return pyogrio.read_dataframe(path, layer=layer, fid_as_index=True,
                                          on_invalid="ignore")
    except Exception as exc:  # pyogrio's DataSourceError, FieldError and GEOS errors
        raise MapperError(f"cannot read layer {layer!r}: {str(exc).splitlines()[0]}", where=str(path)) from None


def _attribute_columns(names: list[str], where: str) -> dict[str, str]:
    """Reading column -> the layer's attribute name (matched in any letter case)."""
    found: dict[str, str] = {}
    for name in names:
        key = str(name).lower()
        if key in ATTRIBUTE_COLUMNS:
            if key in found:
                raise MapperError(f"attributes {found[key]!r} and {name!r} are the same column; keep one",
                                  where=where)
            found[key] = name
    return found


def _layer_crs(stated, given: str | None, site: Site, where: str) -> str | None:
    """The CRS positions are read in (None: they are site metres)."""
    from pyproj import CRS

    stated_crs = CRS.from_user_input(stated) if stated is not None else None
    if stated_crs is not None and stated_crs == CRS.from_wkt(LOCAL_CRS_WKT):
        if site.georef is not None:
            raise MapperError("the layer is in a local site grid, but this site is georeferenced; "
                              "give the layer a projected CRS", where=where)
        return None  # mapper's own local grid: site metres
    if given is not None:
        wanted = parse_crs(given)
        if stated_crs is not None and stated_crs != wanted:
            raise MapperError(f"the layer states its CRS ({stated_crs.to_string()}); "
                              f"--crs {given} is for a layer without one", where=where)
        return wanted.to_wkt()
    if stated_crs is None:
        if site.georef is not None:
            raise MapperError("the layer has no CRS and the site is georeferenced; give the layer's CRS "
                              "with --crs EPSG:NNNN", where=where)
        return None
    return stated_crs.to_wkt()


def _point(geom) -> tuple[float, float] | None:
    """A feature's point (a multipoint of one point counts), or None when it has none."""
    if isinstance(geom, MultiPoint) and len(geom.geoms) == 1:
        geom = geom.geoms[0]
    if not isinstance(geom, Point) or geom.is_empty:
        return None
    x, y = shapely.get_coordinates(geom)[0]
    if not (math.isfinite(x) and math.isfinite(y)):
        return None
    return float(x), float(y)


def _geometry_problem(geom) -> str:
    if geom is None or not hasattr(geom, "geom_type"):
        return "the feature has no geometry; each reading needs a point"
    if geom.is_empty:
        return "the feature's point is empty; each reading needs a point"
    if isinstance(geom, Point | MultiPoint):
        if isinstance(geom, MultiPoint):
            return f"the feature is a multipoint of {len(geom.geoms)} points; each reading needs one point"
        return "the feature's point has a coordinate that is not a finite number"
    return f"the feature is a {geom.geom_type}, not a point; each reading needs a point"


def _cell(value) -> str:
    """An attribute value as the text a CSV cell would hold (numbers exactly: ``repr`` round-trips)."""
    if value is None or (not isinstance(value, str | bytes) and np.ndim(value) == 0 and pd.isna(value)):
        return ""
    if isinstance(value, float | np.floating):
        return "" if math.isnan(value) else repr(float(value))
    if isinstance(value, bool | np.bool_):
        return str(bool(value)).lower()
    if isinstance(value, int | np.integer):
        return str(int(value))
    if isinstance(value, datetime | date):
        return value.isoformat()
    return str(value)


#: GDAL's text form of a date-time (``2026/11/17 07:30:00+00``), as it writes one to a Shapefile.
_GDAL_TIME = re.compile(
    r"^\s*(\d{4})/(\d{2})/(\d{2})[ T](\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?)"
    r"\s*(?:([+-]\d{2})(?::?(\d{2}))?)?\s*$"
)


def _iso_time_text(text: str) -> str:
    """GDAL's date-time text as ISO 8601 (any other text unchanged, for the time parser to judge)."""
    found = _GDAL_TIME.match(text)
    if not found:
        return text
    year, month, day, clock, hours, minutes = found.groups()
    offset = f"{hours}:{minutes or '00'}" if hours else ""
    return f"{year}-{month}-{day}T{clock}{offset}"


def _listing(frame) -> str:
    names = [str(c) for c in frame.columns if c != frame.geometry.name]
    return ", ".join(names) if names else "none"
