"""Surveys for the export tests: the indoor sample, a synthetic georeferenced site, a tiny one."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
from pyproj import Transformer

from mapper.survey.create import create_survey
from mapper.survey.store import NewReading, Survey

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_sites"


def run_cli(argv: list[str]) -> int:
    """Run ``mapper`` in-process, with the export commands registered even before the lead wires them."""
    from mapper.cli import main as cli_main

    missing = tuple(c for c in ("cmd_export", "cmd_report") if c not in cli_main.COMMANDS)
    saved = cli_main.COMMANDS
    cli_main.COMMANDS = saved + missing
    try:
        return cli_main.main(argv)
    finally:
        cli_main.COMMANDS = saved


def north_hall_survey(folder: Path) -> Path:
    """The indoor sample survey, built through the public commands as the demo does."""
    survey = folder / "north_hall.survey"
    steps = [
        ["new", str(survey), "--site", str(SAMPLES / "north_hall.toml"), "--spacing", "2", "--unit", "kV/m",
         "--operator", "tester"],
        ["import", str(survey), str(SAMPLES / "north_hall_conditions.csv")],
        ["import", str(survey), str(SAMPLES / "north_hall_readings.csv")],
    ]
    for argv in steps:
        assert run_cli(argv) == 0, argv
    return survey


#: A known similarity transform into UTM zone 33N (EPSG:32633): rotation, offset; scale 1.
ROTATION_DEG = 37.0
OFFSET_E = 412_345.678
OFFSET_N = 5_655_432.109
UTM = "EPSG:32633"


def known_forward(x, y):
    """Site metres -> UTM 33N by the known rotation and offset (the truth the export must meet)."""
    t = math.radians(ROTATION_DEG)
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    return (OFFSET_E + math.cos(t) * x - math.sin(t) * y, OFFSET_N + math.sin(t) * x + math.cos(t) * y)


def georef_site_text() -> str:
    """A 20 m x 12 m site whose control points come from :func:`known_forward`, as lon/lat."""
    to_ll = Transformer.from_crs(UTM, "EPSG:4326", always_xy=True)
    corners = [(0.0, 0.0), (20.0, 0.0), (20.0, 12.0), (0.0, 12.0)]
    lines = [
        "[site]", 'name = "Rotated yard"', 'units = "m"', f'crs = "{UTM}"',
        "[outline]", 'wkt = "POLYGON ((0 0, 20 0, 20 12, 0 12, 0 0))"',
        "[[asset]]", 'name = "bench A"', 'kind = "workstation"', 'wkt = "POLYGON ((14 8, 17 8, 17 9, 14 9, 14 8))"',
        "[[asset]]", 'name = "belt"', 'kind = "conveyor"', 'wkt = "LINESTRING (2 3, 12 3)"',
        "[[zone]]", 'name = "EPA"', 'kind = "EPA"', 'wkt = "POLYGON ((12 6, 20 6, 20 12, 12 12, 12 6))"',
        'limit = "2 kV/m"',
    ]
    for x, y in corners:
        e, n = known_forward(x, y)
        lon, lat = to_ll.transform(float(e), float(n))
        lines += ["[[control_point]]", f"x = {x}", f"y = {y}", f"lon = {lon:.10f}", f"lat = {lat:.10f}"]
    return "\n".join(lines) + "\n"


def bump_field(x, y, x0=6.0, y0=4.0, peak=9000.0, width=2.5, base=-150.0):
    """A smooth synthetic field, V/m: a Gaussian bump on a small negative floor."""
    return base + peak * np.exp(-((np.asarray(x) - x0) ** 2 + (np.asarray(y) - y0) ** 2) / (2 * width**2))


def add_grid_readings(survey_path: Path, spacing: float, extent: tuple[float, float], field=bump_field) -> int:
    """Record readings on a grid over ``extent`` (width, height in metres); returns how many."""
    start = datetime(2026, 3, 2, 9, 0, tzinfo=UTC)
    xs = np.arange(spacing / 2, extent[0], spacing)
    ys = np.arange(spacing / 2, extent[1], spacing)
    new = []
    for k, (x, y) in enumerate((x, y) for y in ys for x in xs):
        v = float(field(x, y))
        new.append(NewReading(x=float(x), y=float(y), entered_value=v, entered_unit="V/m", value_v_per_m=v,
                              time=start + timedelta(seconds=20 * k), height_m=1.0))
    with Survey.open(survey_path, write=True) as survey:
        survey.add_readings(new, source="test")
        survey.add_conditions(41.0, 22.5, "start", start - timedelta(minutes=1))
        survey.add_conditions(38.0, 23.5, "end", start + timedelta(seconds=20 * len(new)))
    return len(new)


def georef_survey(folder: Path, name: str = "rotated", field=bump_field) -> Path:
    """A survey of the rotated yard with a grid of bump-field readings."""
    site = folder / f"{name}.toml"
    site.write_text(georef_site_text(), encoding="utf-8")
    path = folder / f"{name}.survey"
    create_survey(path, site, spacing_m=2.0, threshold_v_per_m=4000.0).close()
    add_grid_readings(path, 1.5, (20.0, 12.0), field)
    return path


def moved_bump(x, y):
    """The bump field after a change: the bump moved to (14, 8) and a negative one added at (4, 9)."""
    return (bump_field(x, y, x0=14.0, y0=8.0, peak=7000.0)
            + bump_field(x, y, x0=4.0, y0=9.0, peak=-6000.0, base=150.0))
