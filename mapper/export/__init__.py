"""Hand-over: GeoPackage with styles, GeoTIFF, CSV, the PDF report, and the GeoPackage and PDF
of a before/after comparison.

Everything here writes :class:`mapper.workflow.Products`, made once per survey by the
application layer (:func:`mapper.workflow.survey_products`).
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
    "grid_transform": "raster",
    "write_geotiff": "raster",
    "ReportResult": "report",
    "write_report": "report",
}

__all__ = sorted(_WHERE)


def __getattr__(name: str):
    if name in _WHERE:
        return getattr(importlib.import_module(f"mapper.export.{_WHERE[name]}"), name)
    raise AttributeError(f"module 'mapper.export' has no attribute {name!r}")
