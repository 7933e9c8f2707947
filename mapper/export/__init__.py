"""Hand-over: the shared survey pipeline, GeoPackage with styles, GeoTIFF, CSV, the PDF report
and the GeoPackage of a before/after comparison.

:func:`survey_products` runs survey -> corrected readings -> field grid -> findings once; the
export, the report and the terminal app all read its :class:`Products`.
"""

import importlib

#: Public names and the module each lives in; loaded on first use, so that commands which do not
#: draw (``info``, ``hotspots`` ...) do not pay for matplotlib.
_WHERE = {
    "ExportResult": "bundle",
    "export_products": "bundle",
    "write_comparison_gpkg": "compare_gpkg",
    "ExportCRS": "crs",
    "export_crs": "crs",
    "write_readings_csv": "csv_out",
    "GpkgResult": "gpkg",
    "write_geopackage": "gpkg",
    "MetaRow": "metadata",
    "metadata_rows": "metadata",
    "MIN_FIELD_POSITIONS": "pipeline",
    "Products": "pipeline",
    "survey_file_products": "pipeline",
    "survey_products": "pipeline",
    "north_up": "raster",
    "write_geotiff": "raster",
    "ReportResult": "report",
    "write_report": "report",
}

__all__ = sorted(_WHERE)


def __getattr__(name: str):
    if name in _WHERE:
        return getattr(importlib.import_module(f"mapper.export.{_WHERE[name]}"), name)
    raise AttributeError(f"module 'mapper.export' has no attribute {name!r}")
