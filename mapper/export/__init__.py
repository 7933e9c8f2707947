"""Hand-over: the shared survey pipeline, GeoPackage with styles, GeoTIFF, CSV, the PDF report
and the GeoPackage of a before/after comparison.

:func:`survey_products` runs survey -> corrected readings -> field grid -> findings once; the
export, the report and the terminal app all read its :class:`Products`.
"""

from mapper.export.bundle import ExportResult, export_products
from mapper.export.compare_gpkg import write_comparison_gpkg
from mapper.export.crs import ExportCRS, export_crs
from mapper.export.csv_out import write_readings_csv
from mapper.export.gpkg import GpkgResult, write_geopackage
from mapper.export.metadata import MetaRow, metadata_rows
from mapper.export.pipeline import (
    MIN_FIELD_POSITIONS,
    Products,
    survey_file_products,
    survey_products,
)
from mapper.export.raster import grid_transform, write_geotiff
from mapper.export.report import ReportResult, write_report

__all__ = [
    "MIN_FIELD_POSITIONS",
    "ExportCRS",
    "ExportResult",
    "GpkgResult",
    "MetaRow",
    "Products",
    "ReportResult",
    "export_crs",
    "export_products",
    "grid_transform",
    "metadata_rows",
    "survey_file_products",
    "survey_products",
    "write_comparison_gpkg",
    "write_geopackage",
    "write_geotiff",
    "write_readings_csv",
    "write_report",
]
