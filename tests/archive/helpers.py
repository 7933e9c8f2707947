"""Surveys for the archive tests, built through the public commands as the demo does."""

from __future__ import annotations

from pathlib import Path

from mapper.cli.main import main

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
