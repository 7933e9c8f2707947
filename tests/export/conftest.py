"""Fixtures shared by the export tests (built once per test session: building a field takes ~1 s)."""

from __future__ import annotations

import pytest

from mapper.export.bundle import export_products
from mapper.survey.store import Survey
from mapper.workflow import survey_products
from tests.export.helpers import georef_survey, north_hall_survey


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
