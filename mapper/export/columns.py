"""What each exported column holds and its unit: the GeoPackage's ``gpkg_data_columns`` rows.

The GeoPackage schema extension (OGC 12-128, clause F.9, ``gpkg_schema``) gives each column a
title and a description; it has no unit field, so the unit is written in the title (``[V/m]``)
and at the end of the description.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Iterable

#: Column -> (description, unit); unit "" for text, counts, flags and ids.
COLUMN_INFO: dict[str, tuple[str, str]] = {
    "value_v_per_m": ("corrected field value, physics sign (positive: pointing up)", "V/m"),
    "raw_v_per_m": ("field value as recorded, before corrections, physics sign", "V/m"),
    "value_display": ("corrected field value in the display unit", "display_unit"),
    "entered_value": ("the number as typed or sent by the meter", "entered_unit"),
    "time_utc": ("time of the reading", "UTC"),
    "recorded_utc": ("time the reading was stored", "UTC"),
    "conditions_utc": ("time of the nearest conditions note", "UTC"),
    "height_m": ("meter height above the floor", "m"),
    "x_site_m": ("x in the site's own metres", "m"),
    "y_site_m": ("y in the site's own metres", "m"),
    "rh_percent": ("relative humidity of the nearest conditions note", "%"),
    "temperature_c": ("air temperature of the nearest conditions note", "degC"),
    "area_m2": ("ground area", "m2"),
    "limit_v_per_m": ("the zone's own limit", "V/m"),
    "limit_display": ("the zone's limit in the display unit", "display_unit"),
    "level_v_per_m": ("contour level", "V/m"),
    "level_display": ("contour level in the display unit", "display_unit"),
    "length_m": ("length of the line", "m"),
    "lower_v_per_m": ("lower bound of the band (NULL: open)", "V/m"),
    "upper_v_per_m": ("upper bound of the band (NULL: open)", "V/m"),
    "lower_display": ("lower bound in the display unit (NULL: open)", "display_unit"),
    "upper_display": ("upper bound in the display unit (NULL: open)", "display_unit"),
    "threshold_v_per_m": ("action level the region is drawn at", "V/m"),
    "peak_v_per_m": ("largest |E| of the estimate in the region, signed", "V/m"),
    "peak_display": ("peak in the display unit", "display_unit"),
    "peak_x_site_m": ("x of the peak, site metres", "m"),
    "peak_y_site_m": ("y of the peak, site metres", "m"),
    "mean_v_per_m": ("mean estimate in the region", "V/m"),
    "n_readings": ("number of readings inside", ""),
    "max_reading_v_per_m": ("largest |reading| inside, signed", "V/m"),
    "p_exceed_max": ("largest probability of exceeding the action level", "1"),
    "p_exceed": ("probability of exceeding the action level", "1"),
    "nearest_asset_m": ("distance to the nearest asset", "m"),
    "distance_m": ("distance between the region and the asset", "m"),
    "min_distance_m": ("keep-away distance of the rule", "m"),
    "field_above_v_per_m": ("field level the rule applies above", "V/m"),
    "region_peak_v_per_m": ("peak field of the violating region", "V/m"),
    "estimate_v_per_m": ("field estimate there", "V/m"),
    "std_v_per_m": ("standard deviation of the estimate there", "V/m"),
    "gap_m": ("distance to the nearest reading", "m"),
    "charge_c": ("fitted charge", "C"),
    "charge_std_c": ("standard error of the charge", "C"),
    "height_std_m": ("standard error of the height", "m"),
    "position_std_m": ("standard error of the position", "m"),
    "mean_before_v_per_m": ("mean field before, common region", "V/m"),
    "mean_after_v_per_m": ("mean field after, common region", "V/m"),
    "mean_difference_v_per_m": ("mean of after - before", "V/m"),
    "max_abs_difference_v_per_m": ("largest |after - before|", "V/m"),
    "peak_before_v_per_m": ("peak before", "V/m"),
    "peak_after_v_per_m": ("peak after", "V/m"),
    "area_before_m2": ("area before", "m2"),
    "area_after_m2": ("area after", "m2"),
}

#: Units by name ending, for columns not listed above.
_SUFFIX_UNITS = (("_v_per_m", "V/m"), ("_m2", "m2"), ("_utc", "UTC"), ("_m", "m"), ("_percent", "%"))


def column_info(column: str) -> tuple[str, str] | None:
    """(description, unit) of a measured column, or ``None`` when it is not a measured quantity."""
    if column in COLUMN_INFO:
        return COLUMN_INFO[column]
    for suffix, unit in _SUFFIX_UNITS:
        if column.endswith(suffix):
            return column.removesuffix(suffix).replace("_", " "), unit
    return None


DATA_COLUMNS_DDL = (
    "CREATE TABLE IF NOT EXISTS gpkg_data_columns (table_name TEXT NOT NULL, column_name TEXT NOT NULL, "
    "name TEXT, title TEXT, description TEXT, mime_type TEXT, constraint_name TEXT, "
    "CONSTRAINT pk_gdc PRIMARY KEY (table_name, column_name), "
    "CONSTRAINT gdc_tn UNIQUE (table_name, name))"
)
CONSTRAINTS_DDL = (
    "CREATE TABLE IF NOT EXISTS gpkg_data_column_constraints (constraint_name TEXT NOT NULL, "
    "constraint_type TEXT NOT NULL, value TEXT, min NUMERIC, min_is_inclusive BOOLEAN, max NUMERIC, "
    "max_is_inclusive BOOLEAN, description TEXT, "
    "CONSTRAINT gdcc_ntv UNIQUE (constraint_name, constraint_type, value))"
)
_EXTENSIONS_DDL = (
    "CREATE TABLE IF NOT EXISTS gpkg_extensions (table_name TEXT, column_name TEXT, extension_name TEXT NOT NULL, "
    "definition TEXT NOT NULL, scope TEXT NOT NULL, CONSTRAINT ge_tce UNIQUE (table_name, column_name, "
    "extension_name))"
)


def register_extension(conn: sqlite3.Connection, table: str, extension: str, definition: str) -> None:
    """Add a ``gpkg_extensions`` row (once) for a table an extension defines."""
    conn.execute(_EXTENSIONS_DDL)
    conn.execute("DELETE FROM gpkg_extensions WHERE table_name = ? AND column_name IS NULL AND extension_name = ?",
                 (table, extension))
    conn.execute("INSERT INTO gpkg_extensions VALUES (?, NULL, ?, ?, 'read-write')", (table, extension, definition))


def write_data_columns(conn: sqlite3.Connection, tables: Iterable[str], display_unit: str) -> int:
    """Describe every measured column of the given tables in ``gpkg_data_columns``.

    Parameters
    ----------
    conn : sqlite3.Connection
        Open GeoPackage (the caller commits).
    tables : iterable of str
        Tables to describe.
    display_unit : str
        What ``display_unit`` stands for in :data:`COLUMN_INFO`.

    Returns
    -------
    int
        Rows written.
    """
    conn.execute(DATA_COLUMNS_DDL)
    conn.execute(CONSTRAINTS_DDL)
    definition = "http://www.geopackage.org/spec/#extension_schema"
    for table in ("gpkg_data_columns", "gpkg_data_column_constraints"):
        register_extension(conn, table, "gpkg_schema", definition)
    rows = []
    for table in tables:
        for _, column, *_ in conn.execute(f'PRAGMA table_info("{table}")').fetchall():
            info = column_info(column)
            if info is None:
                continue
            description, unit = info
            if unit == "display_unit":
                unit = display_unit
            elif unit == "entered_unit":
                unit = "as in entered_unit"
            title = column.replace("_", " ") + (f" [{unit}]" if unit else "")
            rows.append((table, column, column, title, f"{description}" + (f"; unit {unit}" if unit else "")))
    conn.executemany(
        "INSERT OR REPLACE INTO gpkg_data_columns (table_name, column_name, name, title, description) "
        "VALUES (?, ?, ?, ?, ?)", rows)
    return len(rows)


__all__ = ["COLUMN_INFO", "column_info", "register_extension", "write_data_columns"]
