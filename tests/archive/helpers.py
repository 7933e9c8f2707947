"""Surveys for the archive tests, built through the public commands as the demo does."""

from __future__ import annotations

from pathlib import Path

from mapper.cli.main import main
from tests.conftest import BOX_SITE

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_sites"
#: The sample hall's three surveys (sample_sites/generate.py): before remedial work, after it, a week later.
HALL_SURVEYS = ("north_hall", "north_hall_after", "north_hall_third")


def hall_survey(folder: Path, name: str = "north_hall", spacing: str = "2") -> Path:
    """One of :data:`HALL_SURVEYS` as a survey file in ``folder``."""
    survey = folder / f"{name}.survey"
    steps = [
        ["new", str(survey), "--site", str(SAMPLES / "north_hall.toml"), "--spacing", spacing, "--unit", "kV/m",
         "--operator", "tester"],
        ["import", str(survey), str(SAMPLES / f"{name}_conditions.csv")],
        ["import", str(survey), str(SAMPLES / f"{name}_readings.csv")],
    ]
    for argv in steps:
        assert main(argv) == 0, argv
    return survey


#: Two small local sites (site metres, no georeference) for the many-survey tests.
SMALL_SITES = {
    "Box": BOX_SITE,
    "Bay": """
[site]
name = "Bay"
units = "m"
[outline]
wkt = "POLYGON ((0 0, 14 0, 14 8, 0 8, 0 0))"
[[asset]]
name = "press"
kind = "machine"
wkt = "POLYGON ((2 2, 4 2, 4 4, 2 4, 2 2))"
""",
}


def small_survey(folder: Path, site: str, tag: str, *, repeats: int = 1, start_day: int = 1,
                 charge_c: float = 2.0e-6, field_model: bool = True) -> Path:
    """A survey of one of :data:`SMALL_SITES` with readings of a point charge over a grounded floor.

    The field is the method-of-images closed form (Griffiths, Introduction to Electrodynamics,
    sec. 3.2.1) of ``charge_c`` coulombs 1.5 m over the site's centre, at 1 m; every planned
    point is read ``repeats`` times. With ``field_model`` an IDW field model is stored
    (``mapper grid --method idw``), so that pushing it does not interpolate.
    """
    from datetime import UTC, datetime, timedelta

    import numpy as np

    from mapper.physics.images import PointCharge, field_z
    from mapper.survey.create import create_survey
    from mapper.survey.store import NewReading

    site_file = folder / f"{site.lower()}.toml"
    if not site_file.exists():
        site_file.write_text(SMALL_SITES[site], encoding="utf-8")
    path = folder / f"{site.lower()}_{tag}.survey"
    with create_survey(path, site_file, spacing_m=1.0, operator=f"coordinator {tag}") as survey:
        bounds = survey.site.outline.bounds
        source = [PointCharge((bounds[0] + bounds[2]) / 2, (bounds[1] + bounds[3]) / 2, 1.5, charge_c)]
        start = datetime(2026, 11, start_day, 8, 0, tzinfo=UTC)
        rows = []
        for k in range(repeats):
            for i, p in enumerate(survey.plan.points):
                value = float(field_z(source, p.x, p.y, 1.0))
                rows.append(NewReading(p.x, p.y, value, "V/m", value, point=p.label, height_m=1.0,
                                       time=start + timedelta(seconds=5 * (k * len(survey.plan.points) + i))))
        survey.add_readings(rows, source="synthetic")
        survey.add_conditions(35.0, 21.0, "test", start)
        assert np.isfinite([r.value_v_per_m for r in rows]).all()
    if field_model:
        assert main(["grid", str(path), "--method", "idw"]) == 0
    return path


def distinct_copies(base: Path, folder: Path, n: int, tag: str, first: int = 1) -> list[Path]:
    """``n`` survey files with the rows of ``base`` but each its own creation time (so its own identity).

    Copy k is created ``first + k`` seconds after ``base``; calls with ranges that do not overlap
    give surveys distinct from each other's.

    Written through :func:`mapper.survey.content.write_content`, as ``mapper archive pull`` writes.
    """
    from dataclasses import replace
    from datetime import datetime, timedelta

    from mapper.survey.content import read_content, write_content
    from mapper.survey.store import Survey, to_utc_text

    with Survey.open(base) as survey:
        content = read_content(survey)
    created = datetime.fromisoformat(content.meta_dict["created_utc"])
    out = []
    for k in range(n):
        stamp = to_utc_text(created + timedelta(seconds=first + k))
        meta = tuple((key, stamp if key == "created_utc" else value) for key, value in content.meta)
        out.append(write_content(folder / f"{tag}{k}.survey", replace(content, meta=meta)))
    return out
