"""The exported layers as GeoDataFrames in the export CRS, one builder per layer.

Attribute values are SI (``*_v_per_m``, metres, square metres) with display-unit copies where a
person reads them; areas and distances are ground metres measured in the site frame.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from mapper.export.crs import affine_xy, transform_all
from mapper.export.styles import band_colors
from mapper.features.sources import source_records
from mapper.units import FIELD_UNITS, canonical_unit, from_si
from mapper.workflow import Products, is_excluded


@dataclass(frozen=True)
class Layer:
    """One layer to write.

    Attributes
    ----------
    name : str
        Table name in the GeoPackage.
    frame : geopandas.GeoDataFrame
        Features in the export CRS.
    geometry_type : str
        OGR geometry type name written to the GeoPackage (``Point``, ``MultiPolygon``, ``Unknown``...).
    description : str
        What the layer holds (stored in ``gpkg_contents``).
    """

    name: str
    frame: gpd.GeoDataFrame
    geometry_type: str
    description: str


def _frame(records: Sequence[dict], geoms: Sequence, products: Products, columns: Sequence[str]) -> gpd.GeoDataFrame:
    data = pd.DataFrame.from_records(list(records), columns=list(columns))
    return gpd.GeoDataFrame(data, geometry=transform_all(geoms, products.crs), crs=products.crs.crs)


def _display(value: float | None, unit: str) -> float | None:
    return None if value is None or not math.isfinite(value) else from_si(value, unit)


def _finite(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def _utc(value) -> pd.Timestamp | None:
    """A time (datetime or ISO text) as a UTC timestamp, or None."""
    if value is None or value == "":
        return None
    t = pd.Timestamp(value)
    return t.tz_localize("UTC") if t.tzinfo is None else t.tz_convert("UTC")


READING_COLUMNS = (
    "reading_id", "point", "kind", "value_v_per_m", "raw_v_per_m", "value_display", "display_unit",
    "entered_value", "entered_unit", "time_utc", "height_m", "meter_id", "note", "flags",
    "corrections", "used_in_model", "x_site_m", "y_site_m", "source", "recorded_utc",
    "rh_percent", "temperature_c", "conditions_utc", "conditions_note",
)
#: Columns of :data:`READING_COLUMNS` holding times (UTC; empty where unknown).
TIME_COLUMNS = ("time_utc", "recorded_utc", "conditions_utc")


def _times(stamps: list) -> pd.DatetimeIndex:
    """UTC timestamps (or ``None``) as one index, of microseconds unless all are unknown (then of
    the unit pandas gives an empty column, as the layer always had)."""
    index = pd.DatetimeIndex(pd.to_datetime(stamps, utc=True, format="ISO8601"))
    return index.as_unit("us") if index.notna().any() else index


@dataclass(frozen=True)
class ReadingTable:
    """The readings' attributes (:data:`READING_COLUMNS`) and export positions, made once per
    export and shared by the ``readings`` layer and the CSV.

    Attributes
    ----------
    columns : dict of str to sequence
        One sequence per column of :data:`READING_COLUMNS`, one entry per corrected field reading:
        lists of Python values, and for :data:`TIME_COLUMNS` a UTC ``pandas.DatetimeIndex``
        (``NaT`` where unknown).
    x_export, y_export : ndarray
        Positions in the export CRS, metres.
    """

    columns: dict
    x_export: np.ndarray
    y_export: np.ndarray

    def __len__(self) -> int:
        return len(self.x_export)

    def records(self) -> list[dict]:
        """One dict per reading, keys :data:`READING_COLUMNS`."""
        cols = [[None if t is pd.NaT else t for t in self.columns[c]] if c in TIME_COLUMNS else self.columns[c]
                for c in READING_COLUMNS]
        return [dict(zip(READING_COLUMNS, row, strict=True)) for row in zip(*cols, strict=True)]


def reading_table(products: Products) -> ReadingTable:
    """The attributes of every corrected field reading, column by column (see :class:`ReadingTable`)."""
    unit = products.display_unit
    factor = FIELD_UNITS[canonical_unit(unit)]
    readings = products.readings
    raw = [c.reading for c in readings]
    n = len(raw)
    conds = products.nearest_conditions_all([r.time for r in raw])
    extras = [products.reading_extra.get(r.id, {}) for r in raw]
    stamps: dict = {}

    def utc(value):
        if value not in stamps:
            stamps[value] = _utc(value)
        return stamps[value]

    columns = {
        "reading_id": [r.id for r in raw],
        "point": [r.point for r in raw],
        "kind": [r.kind for r in raw],
        "value_v_per_m": [c.value_v_per_m for c in readings],
        "raw_v_per_m": [r.value_v_per_m for r in raw],
        "value_display": [c.value_v_per_m / factor for c in readings],
        "display_unit": [unit] * n,
        "entered_value": [r.entered_value for r in raw],
        "entered_unit": [r.entered_unit for r in raw],
        "time_utc": _times([r.time for r in raw]),
        "height_m": [r.height_m for r in raw],
        "meter_id": [r.meter_id for r in raw],
        "note": [r.note for r in raw],
        "flags": [",".join(dict.fromkeys([*c.reading.flags, *c.flags])) for c in readings],
        "corrections": [",".join(c.corrections) for c in readings],
        "used_in_model": [not is_excluded(c) for c in readings],
        "x_site_m": [r.x for r in raw],
        "y_site_m": [r.y for r in raw],
        "source": [e.get("source") for e in extras],
        "recorded_utc": _times([utc(e.get("recorded_utc")) for e in extras]),
        "rh_percent": [c.rh_percent if c else None for c in conds],
        "temperature_c": [c.temperature_c if c else None for c in conds],
        "conditions_utc": _times([utc(c.time) if c else None for c in conds]),
        "conditions_note": [c.note if c else None for c in conds],
    }
    xs, ys = affine_xy(products.crs, columns["x_site_m"], columns["y_site_m"])
    return ReadingTable(columns, xs, ys)


def reading_records(products: Products) -> list[dict]:
    """One dict per corrected field reading with every stored attribute (see :data:`READING_COLUMNS`)."""
    return reading_table(products).records()


def readings_layer(products: Products, table: ReadingTable | None = None) -> Layer:
    """Corrected field readings as points.

    Parameters
    ----------
    products : Products
        The survey's products.
    table : ReadingTable, optional
        The readings' attributes when already made (:func:`reading_table`).
    """
    table = reading_table(products) if table is None else table
    data = pd.DataFrame({c: table.columns[c] for c in READING_COLUMNS}, columns=list(READING_COLUMNS))
    frame = gpd.GeoDataFrame(data, geometry=shapely.points(table.x_export, table.y_export), crs=products.crs.crs)
    for col in TIME_COLUMNS:
        frame[col] = pd.to_datetime(frame[col], utc=True, format="ISO8601")
    for col in ("height_m", "rh_percent", "temperature_c"):
        frame[col] = pd.to_numeric(frame[col], errors="coerce").astype(float)
    return Layer("readings", frame, "Point", "field readings: corrected value_v_per_m, raw value, entry, conditions")


def site_layer(products: Products) -> Layer:
    """The site outline."""
    s = products.site
    frame = _frame([{"name": s.name, "area_m2": s.area_m2, "crs": products.crs.name}], [s.outline],
                   products, ("name", "area_m2", "crs"))
    return Layer("site", frame, "MultiPolygon", "site outline")


def zones_layer(products: Products) -> Layer:
    """Zones with their own limits."""
    unit = products.display_unit
    zones = products.site.zones
    records = [{"name": z.name, "kind": z.kind, "limit_v_per_m": z.limit_v_per_m,
                "limit_display": _display(z.limit_v_per_m, unit), "display_unit": unit,
                "area_m2": float(z.geometry.area)} for z in zones]
    frame = _frame(records, [z.geometry for z in zones], products,
                   ("name", "kind", "limit_v_per_m", "limit_display", "display_unit", "area_m2"))
    frame["limit_v_per_m"] = frame["limit_v_per_m"].astype(float)
    frame["limit_display"] = frame["limit_display"].astype(float)
    return Layer("zones", frame, "MultiPolygon", "zones (e.g. ESD protected areas) with their limits")


#: Columns of the three asset layers (the same in each).
ASSET_COLUMNS = ("name", "kind", "sensitive", "walkable")
#: Asset layer of each geometry family: one geometry type per layer, so one style applies to all.
ASSET_LAYERS = (("assets", "MultiPolygon", ("Polygon", "MultiPolygon"), "asset polygons: workstations, racks ..."),
                ("asset_lines", "MultiLineString", ("LineString", "MultiLineString", "LinearRing"),
                 "line assets: conveyors, rails ..."),
                ("asset_points", "MultiPoint", ("Point", "MultiPoint"), "point assets: tools, sensors ..."))


def asset_layers(products: Products) -> list[Layer]:
    """Assets split by geometry type: ``assets`` (polygons), ``asset_lines``, ``asset_points``."""
    out = []
    for name, gtype, kinds, description in ASSET_LAYERS:
        assets = [a for a in products.site.assets if a.geometry.geom_type in kinds and not a.geometry.is_empty]
        records = [{"name": a.name, "kind": a.kind, "sensitive": bool(a.sensitive), "walkable": bool(a.walkable)}
                   for a in assets]
        frame = _frame(records, [a.geometry for a in assets], products, ASSET_COLUMNS)
        if frame.empty:
            frame = frame.astype({"sensitive": bool, "walkable": bool, "name": object, "kind": object})
        out.append(Layer(name, frame, gtype, description))
    return out


def assets_layer(products: Products) -> Layer:
    """Asset polygons (the ``assets`` layer)."""
    return asset_layers(products)[0]


def contours_layer(products: Products) -> Layer:
    """Iso-lines of the estimate with their level."""
    f = products.findings
    lines = [i for i in f.isolines if not i.geometry.is_empty]
    unit = products.display_unit
    records = [{"level_v_per_m": i.level_v_per_m, "level_display": from_si(i.level_v_per_m, unit),
                "display_unit": unit, "label": i.label, "length_m": i.length_m} for i in lines]
    frame = _frame(records, [i.geometry for i in lines], products,
                   ("level_v_per_m", "level_display", "display_unit", "label", "length_m"))
    return Layer("contours", frame, "MultiLineString", "contour lines of the field estimate")


def bands_layer(products: Products) -> Layer:
    """Filled bands between consecutive levels (open ends stored as NULL)."""
    f = products.findings
    colors = band_colors(f.bands, f.threshold_v_per_m)
    unit = products.display_unit
    records, geoms = [], []
    for i, (b, color) in enumerate(zip(f.bands, colors, strict=True)):
        if b.geometry.is_empty:
            continue
        records.append({
            "band_index": i, "lower_v_per_m": _finite(b.lower_v_per_m), "upper_v_per_m": _finite(b.upper_v_per_m),
            "lower_display": _display(b.lower_v_per_m, unit), "upper_display": _display(b.upper_v_per_m, unit),
            "display_unit": unit, "label": b.label, "area_m2": b.area_m2, "color": color,
        })
        geoms.append(b.geometry)
    frame = _frame(records, geoms, products, ("band_index", "lower_v_per_m", "upper_v_per_m", "lower_display",
                                              "upper_display", "display_unit", "label", "area_m2", "color"))
    for col in ("lower_v_per_m", "upper_v_per_m", "lower_display", "upper_display"):
        frame[col] = frame[col].astype(float)
    return Layer("bands", frame, "MultiPolygon", "field bands between contour levels (lower < E <= upper)")


HOTSPOT_COLUMNS = (
    "hotspot_id", "polarity", "status", "area_m2", "threshold_v_per_m", "peak_v_per_m", "peak_display",
    "display_unit", "peak_x_site_m", "peak_y_site_m", "mean_v_per_m", "n_readings", "reading_ids",
    "max_reading_v_per_m", "p_exceed_max", "nearest_asset", "nearest_asset_m", "zones", "zone",
)


def hotspot_record(h, unit: str) -> dict:
    """One hotspot's attributes (:data:`HOTSPOT_COLUMNS`); SI with a display-unit peak."""
    return {
        "hotspot_id": h.id, "polarity": h.polarity, "status": h.status, "area_m2": h.area_m2,
        "threshold_v_per_m": h.threshold_v_per_m, "peak_v_per_m": h.peak_v_per_m,
        "peak_display": from_si(h.peak_v_per_m, unit), "display_unit": unit,
        "peak_x_site_m": h.peak_x, "peak_y_site_m": h.peak_y, "mean_v_per_m": h.mean_v_per_m,
        "n_readings": len(h.reading_ids), "reading_ids": ",".join(map(str, h.reading_ids)),
        "max_reading_v_per_m": _finite(h.max_reading_v_per_m), "p_exceed_max": _finite(h.p_exceed_max),
        "nearest_asset": h.nearest_asset, "nearest_asset_m": _finite(h.nearest_asset_m),
        "zones": ",".join(h.zones), "zone": h.zone,
    }


def hotspots_layer(products: Products) -> Layer:
    """Hotspots at the survey threshold, then those at zone limits (``zone`` set)."""
    f = products.findings
    unit = products.display_unit
    spots = (*f.hotspots, *f.zone_hotspots)
    records = [hotspot_record(h, unit) for h in spots]
    frame = _frame(records, [h.geometry for h in spots], products, HOTSPOT_COLUMNS)
    for col in ("max_reading_v_per_m", "p_exceed_max", "nearest_asset_m"):
        frame[col] = frame[col].astype(float)
    return Layer("hotspots", frame, "MultiPolygon",
                 "regions with |E| at or above the threshold (zone = a zone's own limit)")


def probable_layer(products: Products) -> Layer:
    """Regions where P(|E| >= threshold) >= 0.5."""
    f = products.findings
    records = [{"probable_id": p.id, "area_m2": p.area_m2, "threshold_v_per_m": p.threshold_v_per_m,
                "p_exceed_max": p.p_exceed_max, "hotspot_ids": ",".join(p.hotspot_ids)} for p in f.probable]
    frame = _frame(records, [p.geometry for p in f.probable], products,
                   ("probable_id", "area_m2", "threshold_v_per_m", "p_exceed_max", "hotspot_ids"))
    return Layer("probable_exceedance", frame, "MultiPolygon",
                 "regions where the probability of exceeding the threshold is at least 0.5")


def violations_layer(products: Products) -> Layer:
    """High-field regions too close to sensitive assets, one feature per violation."""
    f = products.findings
    records = [{"rule": v.rule.key, "standard": v.rule.standard, "asset": v.asset, "asset_kind": v.asset_kind,
                "distance_m": v.distance_m, "min_distance_m": v.rule.min_distance_m,
                "field_above_v_per_m": v.rule.field_above_v_per_m, "region_peak_v_per_m": v.region_peak_v_per_m,
                "message": v.message} for v in f.violations]
    frame = _frame(records, [v.region for v in f.violations], products,
                   ("rule", "standard", "asset", "asset_kind", "distance_m", "min_distance_m",
                    "field_above_v_per_m", "region_peak_v_per_m", "message"))
    return Layer("violations", frame, "MultiPolygon", "keep-away rule violations (region above the rule's level)")


def advice_layer(products: Products) -> Layer:
    """Suggested places for the next readings, ranked."""
    f = products.findings
    records = [{"rank": s.rank, "reason": s.reason, "why": s.why, "estimate_v_per_m": s.estimate_v_per_m,
                "std_v_per_m": s.std_v_per_m, "p_exceed": s.p_exceed, "gap_m": s.gap_m, "point": s.point,
                "x_site_m": s.x, "y_site_m": s.y} for s in f.advice]
    frame = _frame(records, shapely.points([(s.x, s.y) for s in f.advice]) if f.advice else [], products,
                   ("rank", "reason", "why", "estimate_v_per_m", "std_v_per_m", "p_exceed", "gap_m", "point",
                    "x_site_m", "y_site_m"))
    for col in ("std_v_per_m", "p_exceed", "gap_m"):
        frame[col] = frame[col].astype(float)
    return Layer("advice", frame, "Point", "suggested places for the next readings, rank 1 first")


#: Columns of the ``sources`` layer (SI: coulombs, metres, V/m).
SOURCE_COLUMNS = ("source_id", "kind", "asset", "charge_c", "charge_std_c", "height_m", "height_std_m",
                  "peak_v_per_m", "peak_display", "status", "position_std_m")


def sources_layer(products: Products) -> Layer:
    """The physical field model's charged sources (points, lines and patches)."""
    rows = source_records(products.grid, products.site)
    unit = products.display_unit
    records = [{**{k: r[k] for k in SOURCE_COLUMNS if k in r}, "peak_display": _display(r["peak_v_per_m"], unit)}
               for r in rows]
    frame = _frame(records, [shapely.from_wkt(r["wkt"]) for r in rows], products, SOURCE_COLUMNS)
    for col in ("charge_c", "charge_std_c", "height_m", "height_std_m", "peak_v_per_m", "peak_display",
                "position_std_m"):
        frame[col] = frame[col].astype(float)
    return Layer("sources", frame, "Unknown",
                 "likely charged objects from the physical field model: charge (C) and height (m) with "
                 "standard errors, peak field at the meter height (V/m)")


def all_layers(products: Products, table: ReadingTable | None = None) -> list[Layer]:
    """Every layer the products allow: the base layers always, field layers with a field model.

    ``table`` is the readings' attributes when already made (:func:`reading_table`).
    """
    layers = [readings_layer(products, table), site_layer(products), zones_layer(products), *asset_layers(products)]
    if products.has_field:
        layers += [contours_layer(products), bands_layer(products), hotspots_layer(products),
                   probable_layer(products), violations_layer(products), advice_layer(products)]
        if products.grid.method == "physics":
            layers.append(sources_layer(products))
    return layers


#: Layers only written with a field model.
FIELD_LAYERS = ("contours", "bands", "hotspots", "probable_exceedance", "violations", "advice")
#: Layers only written with a physical field model.
PHYSICS_LAYERS = ("sources",)

__all__ = ["ASSET_COLUMNS", "ASSET_LAYERS", "FIELD_LAYERS", "HOTSPOT_COLUMNS", "READING_COLUMNS", "TIME_COLUMNS",
           "Layer", "ReadingTable", "all_layers", "asset_layers", "hotspot_record", "reading_records", "reading_table"]
