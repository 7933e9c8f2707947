"""Shared fixtures: small sites written to temporary folders."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "sample_sites"

BOX_SITE = textwrap.dedent(
    """
    [site]
    name = "Box"
    units = "m"
    [outline]
    wkt = "POLYGON ((0 0, 10 0, 10 6, 0 6, 0 0))"
    [[asset]]
    name = "bench"
    kind = "workstation"
    wkt = "POLYGON ((6 4, 8 4, 8 5, 6 5, 6 4))"
    [[zone]]
    name = "EPA"
    wkt = "POLYGON ((5 3, 9 3, 9 6, 5 6, 5 3))"
    limit = "125 V/in"
    """
)


@pytest.fixture
def box_site(tmp_path: Path) -> Path:
    """A 10 m x 6 m local site with one workstation and one zone."""
    path = tmp_path / "box.toml"
    path.write_text(BOX_SITE, encoding="utf-8")
    return path


@pytest.fixture
def box_survey(tmp_path: Path, box_site: Path) -> Path:
    """A closed survey of the box site at 2 m spacing (15 points), display unit V/m."""
    from mapper.survey.create import create_survey

    path = tmp_path / "box.survey"
    create_survey(path, box_site, spacing_m=2.0).close()
    return path
