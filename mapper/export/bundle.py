"""The hand-over in one call: GeoPackage, GeoTIFF beside it and, on request, CSV."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from mapper.atomic_file import atomic_path
from mapper.export.csv_out import write_readings_csv
from mapper.export.gpkg import GpkgResult, write_geopackage
from mapper.export.layers import reading_table
from mapper.export.raster import north_up, write_geotiff
from mapper.units import format_field
from mapper.wording import plural
from mapper.workflow import Products


@dataclass(frozen=True)
class ExportResult:
    """What an export wrote.

    Attributes
    ----------
    gpkg : GpkgResult
        The GeoPackage and its layer counts.
    tif : Path or None
        The GeoTIFF (``None`` without a field model).
    csv : Path or None
        The CSV, when asked for.
    removed_stale_tif : bool
        A GeoTIFF from an earlier export stood beside the GeoPackage and was removed, because this
        export has no field model to replace it with.
    """

    gpkg: GpkgResult
    tif: Path | None
    csv: Path | None
    removed_stale_tif: bool = False

    def lines(self, products: Products) -> list[str]:
        """What was written, one line per file, for the command line."""
        counts = ", ".join(f"{name} {n}" for name, n in self.gpkg.layers.items())
        out = [f"wrote {self.gpkg.path} (CRS {self.gpkg.crs}): {counts}"]
        if self.tif is not None:
            g = products.grid
            out.append(
                f"wrote {self.tif}: north-up, cells of {g.cell_m:g} m, bands estimate and "
                f"standard deviation in V/m, nodata outside the site; style {self.tif.with_suffix('.qml').name} "
                f"and {self.tif.with_suffix('.sld').name} beside it"
            )
        else:
            out.append(f"no field layers and no GeoTIFF: {products.no_field_reason}")
            if self.removed_stale_tif:
                out.append(f"removed {Path(self.gpkg.path).with_suffix('.tif')} left by an earlier export")
        if self.csv is not None:
            out.append(f"wrote {self.csv}: {plural(len(products.readings), 'corrected reading')}")
        if products.findings is not None:
            f = products.findings
            out.append(
                f"at {format_field(products.threshold_v_per_m, products.display_unit)}: "
                f"{plural(len(f.hotspots), 'hotspot')}, "
                f"{plural(len(f.violations), 'keep-away violation')}, {plural(len(f.advice), 'suggested reading')}"
            )
        return out


def write_raster_styles(products: Products, tif_path: Path) -> tuple[Path, Path]:
    """The GeoTIFF's style beside it: ``OUT.qml`` (read by the desktop GIS on opening) and ``OUT.sld``."""
    from mapper.export.styles import LayerStyle, field_raster_qml

    style = LayerStyle(tif_path.stem, field_raster_qml(products.threshold_v_per_m, products.display_unit),
                       "field estimate (band 1) on the action-level scale", raster=True)
    out = []
    for suffix, text in ((".qml", style.qml), (".sld", style.sld)):
        target = tif_path.with_suffix(suffix)
        with atomic_path(target) as tmp:
            tmp.write_text(text, encoding="utf-8")
        out.append(target)
    return out[0], out[1]


def export_products(products: Products, gpkg_path: str | Path, *, csv_path: str | Path | None = None) -> ExportResult:
    """Write the GeoPackage, the GeoTIFF beside it (``OUT.tif``) and optionally the CSV.

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products`.
    gpkg_path : str or Path
        Target ``.gpkg``.
    csv_path : str or Path, optional
        Also write the corrected readings here as CSV.

    Returns
    -------
    ExportResult
    """
    gpkg_path = Path(gpkg_path)
    # Each made once: the readings' attributes (layer and CSV), the north-up field (GeoPackage
    # rasters and GeoTIFF).
    table = reading_table(products)
    resampled = None if products.grid is None else north_up(products.grid, products.crs, products.site.outline)
    gpkg = write_geopackage(products, gpkg_path, table=table, resampled=resampled)
    tif_path = gpkg_path.with_suffix(".tif")
    tif = None
    removed = False
    if products.grid is not None:
        tif = write_geotiff(
            products.grid, products.crs, tif_path, outline=products.site.outline,
            tags={"threshold_v_per_m": f"{products.threshold_v_per_m:.10g}", "site": products.name,
                  "sign_convention": "physics (positive: field pointing up)"},
            resampled=resampled,
        )
        write_raster_styles(products, tif_path)
    elif tif_path.exists():
        tif_path.unlink()
        removed = True
        for side in (tif_path.with_suffix(".qml"), tif_path.with_suffix(".sld")):
            side.unlink(missing_ok=True)
    csv = write_readings_csv(products, csv_path, table) if csv_path is not None else None
    return ExportResult(gpkg, tif, csv, removed)


__all__ = ["ExportResult", "export_products", "write_raster_styles"]
