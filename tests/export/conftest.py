"""Fixtures shared by the export tests (built once per test session: building a field takes ~1 s)."""

from __future__ import annotations

import pytest

from mapper.export.bundle import export_products
from mapper.survey.store import Survey
from mapper.workflow import survey_products
from tests.export.helpers import georef_survey, moved_bump, north_hall_survey


@pytest.fixture(scope="session")
def hall(tmp_path_factory):
    """The indoor sample: survey path, products, and its export (gpkg, tif, csv)."""
    folder = tmp_path_factory.mktemp("hall")
    path = north_hall_survey(folder)
    with Survey.open(path) as survey:
        products = survey_products(survey)
    result = export_products(products, folder / "hall.gpkg", csv_path=folder / "hall.csv")
    return {"survey": path, "products": products, "result": result, "folder": folder}


@pytest.fixture(scope="session")
def rotated(tmp_path_factory):
    """The synthetic rotated, georeferenced yard and its export."""
    folder = tmp_path_factory.mktemp("rotated")
    path = georef_survey(folder)
    with Survey.open(path) as survey:
        products = survey_products(survey)
    result = export_products(products, folder / "rotated.gpkg")
    return {"survey": path, "products": products, "result": result, "folder": folder}


@pytest.fixture(scope="session")
def comparison(tmp_path_factory):
    """The rotated yard before and after its bump moved, compared into a GeoPackage."""
    from mapper.export.compare_gpkg import write_comparison_gpkg
    from mapper.features import compare_fields
    from mapper.workflow import survey_file_products

    folder = tmp_path_factory.mktemp("comparison")
    before = survey_file_products(georef_survey(folder, "before")).require_field()
    after = survey_file_products(georef_survey(folder, "after", moved_bump)).require_field()
    cmp = compare_fields(before.grid, after.grid, before.site, after.site, before.threshold_v_per_m,
                         before.readings, after.readings)
    path = folder / "diff.gpkg"
    write_comparison_gpkg(path, cmp, before.site, before.display_unit)
    return {"path": path, "cmp": cmp, "before": before, "after": after}
