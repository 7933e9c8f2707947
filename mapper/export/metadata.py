"""The survey's metadata as (section, key, value, unit) rows: the GeoPackage's non-spatial table
and the facts the report prints."""

from __future__ import annotations

from dataclasses import dataclass

from mapper import __version__
from mapper.features import CAUTIONS, LIMITS_ARE_DEFAULTS
from mapper.features.limits import DEFAULT_RULES
from mapper.field.settings import FieldSettings
from mapper.survey.store import to_utc_text, utc_now
from mapper.units import format_field
from mapper.workflow import Products

#: Name of the metadata table in the GeoPackage.
METADATA_TABLE = "survey_metadata"


@dataclass(frozen=True)
class MetaRow:
    """One metadata fact.

    Attributes
    ----------
    section : str
        ``survey``, ``site``, ``limits``, ``meter``, ``corrections``, ``conditions``, ``field``,
        ``cross_validation``, ``findings``, ``notes`` or ``cautions``.
    key : str
        Name of the fact.
    value : str
        The fact as text.
    unit : str
        Unit of ``value`` (empty when it has none).
    """

    section: str
    key: str
    value: str
    unit: str = ""


def _num(value: float | None, digits: int = 6) -> str:
    return "" if value is None else f"{value:.{digits}g}"


def metadata_rows(products: Products, exported_utc: str | None = None) -> list[MetaRow]:
    """All metadata of a survey's products, SI values with their units.

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products`.
    exported_utc : str, optional
        Time stamp of the export; default now.
    """
    p = products
    rows: list[MetaRow] = []

    def add(section: str, key: str, value: object, unit: str = "") -> None:
        rows.append(MetaRow(section, key, "" if value is None else str(value), unit))

    add("survey", "name", p.name)
    add("survey", "file", p.source)
    add("survey", "created_utc", p.created_utc)
    add("survey", "exported_utc", exported_utc or to_utc_text(utc_now()))
    add("survey", "software", f"mapper {__version__}")
    add("survey", "operator", p.operator)
    add("survey", "display_unit", p.display_unit)
    add("survey", "sign_convention_of_meter", p.sign_convention)
    add("survey", "sign_convention_of_values", "physics (positive: field pointing up, away from the floor)")
    add("survey", "planned_spacing", _num(p.spacing_m), "m")
    add("survey", "field_readings", len(p.readings))
    add("survey", "readings_used", len(p.used_readings))
    add("survey", "control_readings", len(p.controls))
    span = p.time_span()
    if span:
        add("survey", "first_reading_utc", to_utc_text(span[0]))
        add("survey", "last_reading_utc", to_utc_text(span[1]))
    add("site", "area", _num(p.site.area_m2), "m2")
    add("site", "crs", p.crs.name)
    add("site", "georeferenced", "yes" if p.crs.georeferenced else "no (local engineering CRS, site metres)")
    if p.site.georef is not None:
        g = p.site.georef
        add("site", "georef_scale", _num(g.scale, 9))
        add("site", "georef_rotation", _num(g.rotation_deg, 6), "degree")
        add("site", "georef_rms", _num(g.rms_m, 4), "m")
        add("site", "control_points", len(p.site.control_points))
    add("limits", "threshold", _num(p.threshold_v_per_m), "V/m")
    add("limits", "threshold_display", format_field(p.threshold_v_per_m, p.display_unit))
    for zone in p.site.zones:
        if zone.limit_v_per_m is not None:
            add("limits", f"zone {zone.name}", _num(zone.limit_v_per_m), "V/m")
    rules = p.findings.rules if p.findings else DEFAULT_RULES
    for rule in rules:
        add("limits", f"rule {rule.key}", f"{rule.text} ({rule.standard})")
    add("limits", "note", LIMITS_ARE_DEFAULTS)
    for m in p.meters:
        prefix = m.id
        add("meter", f"{prefix} description", m.description)
        add("meter", f"{prefix} serial", m.serial)
        add("meter", f"{prefix} specified_distance", _num(m.distance_m), "m")
        add("meter", f"{prefix} display_unit", m.unit)
        add("meter", f"{prefix} calibration_date",
            m.calibration_date.isoformat() if m.calibration_date else "not recorded")
        add("meter", f"{prefix} due_date", m.due_date.isoformat() if m.due_date else "not recorded")
        add("meter", f"{prefix} gain", _num(m.gain))
        add("meter", f"{prefix} offset", _num(m.offset_v_per_m), "V/m")
        if m.r_squared is not None:
            add("meter", f"{prefix} calibration_r2", _num(m.r_squared, 5))
        add("meter", f"{prefix} calibration_points", m.fit_points)
        if m.calibration_source:
            add("meter", f"{prefix} calibration_source", m.calibration_source)
    if p.corrections is not None:
        add("corrections", "applied", ", ".join(p.corrections.applied) or "none")
        for d in p.corrections.drift:
            for key, value, unit in _drift_facts(d):
                add("corrections", f"{d.meter_id} {key}", value, unit)
        if p.corrections.outliers is not None:
            add("corrections", "flagged_outliers", len(p.corrections.flagged_outliers))
    ranges = p.condition_ranges()
    add("conditions", "notes", len(p.conditions))
    if ranges["rh_percent"]:
        add("conditions", "rh_min", _num(ranges["rh_percent"][0]), "%")
        add("conditions", "rh_max", _num(ranges["rh_percent"][1]), "%")
    if ranges["temperature_c"]:
        add("conditions", "temperature_min", _num(ranges["temperature_c"][0]), "degC")
        add("conditions", "temperature_max", _num(ranges["temperature_c"][1]), "degC")
    if p.grid is None:
        add("field", "model", "none")
        add("field", "reason", p.no_field_reason)
    else:
        g = p.grid
        add("field", "method", g.method)
        add("field", "why", g.reason)
        add("field", "source", p.field_source)
        add("field", "cell", _num(g.cell_m), "m")
        add("field", "grid_nodes", f"{len(g.x)} x {len(g.y)}")
        for key, value in _field_facts(g.settings):
            if value is not None:
                unit = "V/m" if key.endswith("v_per_m") else "m" if key.endswith("_m") else ""
                add("field", key, value if not isinstance(value, float) else _num(value), unit)
        for c in g.cv_table or ((g.cv,) if g.cv else ()):
            prefix = c.method + (" (chosen)" if c.method == g.method else "")
            add("cross_validation", f"{prefix} n", c.n)
            add("cross_validation", f"{prefix} rmse", _num(c.rmse_v_per_m), "V/m")
            add("cross_validation", f"{prefix} mae", _num(c.mae_v_per_m), "V/m")
            add("cross_validation", f"{prefix} mean_error", _num(c.mean_error_v_per_m), "V/m")
            if c.mean_standardized is not None:
                add("cross_validation", f"{prefix} mean_standardized_error", _num(c.mean_standardized, 4))
            if c.rms_standardized is not None:
                add("cross_validation", f"{prefix} rms_standardized_error", _num(c.rms_standardized, 4))
    if p.findings is not None:
        f = p.findings
        add("findings", "hotspots", len(f.hotspots))
        add("findings", "zone_hotspots", len(f.zone_hotspots))
        add("findings", "probable_exceedance_regions", len(f.probable))
        add("findings", "keep_away_violations", len(f.violations))
        add("findings", "sampling_suggestions", len(f.advice))
        if f.unmapped_exceedances:
            add("findings", "exceeding_readings_outside_hotspots", ", ".join(map(str, f.unmapped_exceedances)))
    for i, note in enumerate(p.notes, start=1):
        add("notes", f"note {i}", f"{note.level}: {note.text}")
    for i, caution in enumerate(CAUTIONS, start=1):
        add("cautions", f"caution {i}", caution)
    return rows


def _field_facts(settings: FieldSettings | None) -> list[tuple[str, object]]:
    """(key, value) facts of a field model's settings, in the table's order (None: not applicable)."""
    if settings is None:
        return []
    s = settings
    k, r, i, std = s.kriging, s.rbf, s.idw, s.std
    return [
        ("variogram_text", k and k.variogram_text),
        ("std_source", std and std.source),
        ("std_scale", std and std.scale),
        ("neighbors", s.neighbors),
        ("kernel", r and r.kernel),
        ("smoothing", r and r.smoothing),
        ("power", i and i.power),
        ("drift", k and k.drift),
        ("n_readings", s.n_readings),
        ("n_positions", s.n_positions),
        ("repeatability_v_per_m", s.repeatability_v_per_m),
        ("data_spacing_m", s.data_spacing_m),
    ]


def _drift_facts(report) -> list[tuple[str, str, str]]:
    """(key, value, unit) facts of a DriftReport."""
    return [
        ("zero_readings", str(report.n_zero), ""),
        ("reference_readings", str(report.n_reference), ""),
        ("drift_rate", _num(report.rate_v_per_m_per_h), "V/m per h"),
        ("largest_correction", _num(report.largest_correction_v_per_m), "V/m"),
        ("extrapolated_readings", str(report.extrapolated), ""),
    ]





#: GDAL's metadata domain document (read back as the dataset's metadata by GDAL-based tools).
GDAL_MD_URI = "http://gdal.org"
_METADATA_DDL = (
    "CREATE TABLE IF NOT EXISTS gpkg_metadata (id INTEGER CONSTRAINT m_pk PRIMARY KEY ASC NOT NULL, "
    "md_scope TEXT NOT NULL DEFAULT 'dataset', md_standard_uri TEXT NOT NULL, "
    "mime_type TEXT NOT NULL DEFAULT 'text/xml', metadata TEXT NOT NULL DEFAULT '')",
    "CREATE TABLE IF NOT EXISTS gpkg_metadata_reference (reference_scope TEXT NOT NULL, table_name TEXT, "
    "column_name TEXT, row_id_value INTEGER, timestamp DATETIME NOT NULL DEFAULT "
    "(strftime('%Y-%m-%dT%H:%M:%fZ','now')), md_file_id INTEGER NOT NULL, md_parent_id INTEGER, "
    "CONSTRAINT crmr_mfi_fk FOREIGN KEY (md_file_id) REFERENCES gpkg_metadata(id), "
    "CONSTRAINT crmr_mpi_fk FOREIGN KEY (md_parent_id) REFERENCES gpkg_metadata(id))",
)


def gdal_metadata_xml(items: dict[str, str]) -> str:
    """A ``GDALMultiDomainMetadata`` document of key/value items (default domain)."""
    import xml.etree.ElementTree as ET

    root = ET.Element("GDALMultiDomainMetadata")
    md = ET.SubElement(root, "Metadata")
    for key, value in items.items():
        ET.SubElement(md, "MDI", {"key": key}).text = value
    return ET.tostring(root, encoding="unicode")


def metadata_items(rows: list[MetaRow]) -> dict[str, str]:
    """Metadata rows as ``SECTION_KEY -> "value unit"`` items (keys upper case, no spaces)."""
    out: dict[str, str] = {}
    for r in rows:
        key = f"{r.section}_{r.key}".upper().replace(" ", "_").replace("(", "").replace(")", "")
        out[key] = f"{r.value} {r.unit}".strip() if r.unit else r.value
    return out


def write_gdal_metadata(conn, rows: list[MetaRow], now_utc: str) -> None:
    """Store the metadata also in the GeoPackage metadata extension, as GDAL writes dataset metadata.

    One ``gpkg_metadata`` row (``md_standard_uri`` ``http://gdal.org``, a
    ``GDALMultiDomainMetadata`` XML document) referenced with scope ``geopackage`` (the whole
    file), which GDAL and the tools built on it read as the dataset's metadata.

    Parameters
    ----------
    conn : sqlite3.Connection
        Open GeoPackage (the caller commits).
    rows : list of MetaRow
        What :func:`metadata_rows` returned.
    now_utc : str
        Time stamp of the reference, ``YYYY-MM-DDTHH:MM:SS.sssZ``.
    """
    from mapper.export.columns import register_extension

    for ddl in _METADATA_DDL:
        conn.execute(ddl)
    definition = "http://www.geopackage.org/spec120/#extension_metadata"
    for table in ("gpkg_metadata", "gpkg_metadata_reference"):
        register_extension(conn, table, "gpkg_metadata", definition)
    cur = conn.execute(
        "INSERT INTO gpkg_metadata (md_scope, md_standard_uri, mime_type, metadata) "
        "VALUES ('dataset', ?, 'text/xml', ?)",
        (GDAL_MD_URI, gdal_metadata_xml(metadata_items(rows))))
    conn.execute(
        "INSERT INTO gpkg_metadata_reference (reference_scope, table_name, column_name, row_id_value, timestamp, "
        "md_file_id, md_parent_id) VALUES ('geopackage', NULL, NULL, NULL, ?, ?, NULL)", (now_utc, cur.lastrowid))

__all__ = ["GDAL_MD_URI", "METADATA_TABLE", "MetaRow", "gdal_metadata_xml", "metadata_items", "metadata_rows",
           "write_gdal_metadata"]
