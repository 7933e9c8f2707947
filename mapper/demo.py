"""The demo: the indoor sample site from survey file to hand-over, through the public commands."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

from mapper.errors import MapperError

SAMPLES = Path(__file__).resolve().parent.parent / "sample_sites"


def run_demo(out: Path, samples: Path = SAMPLES) -> Iterator[str]:
    """Run each stage on the North Hall sample and yield a line per thing written.

    Parameters
    ----------
    out : Path
        Output folder; its earlier demo survey is replaced.
    samples : Path
        Folder holding the sample site files.
    """
    from mapper.cli.main import main

    site = samples / "north_hall.toml"
    if not site.exists():
        raise MapperError("sample site not found (run from a clone of the repository)", where=str(site))
    if out.exists() and not out.is_dir():
        raise MapperError("is a file; --out takes a folder to write the demo into", where=str(out))
    out.mkdir(parents=True, exist_ok=True)
    survey = out / "north_hall.survey"
    after = out / "north_hall_after.survey"
    for path in (survey, after):
        for stale in (path, Path(f"{path}-wal"), Path(f"{path}-shm")):
            stale.unlink(missing_ok=True)
    steps = [
        ["new", str(survey), "--site", str(site), "--spacing", "2", "--unit", "kV/m", "--operator", "demo"],
        ["meter", "add", str(survey), "meter1", "--description", "sample handheld field meter", "--serial",
         "NH-0001", "--calibrated", "2026-05-12", "--due", "2027-05-12"],
        ["import", str(survey), str(samples / "north_hall_conditions.csv")],
        ["import", str(survey), str(samples / "north_hall_readings.csv")],
        ["info", str(survey)],
        ["grid", str(survey)],
        ["hotspots", str(survey)],
        ["export", str(survey), str(out / "north_hall.gpkg"), "--csv", str(out / "north_hall_readings.csv")],
        ["report", str(survey), str(out / "north_hall.pdf"), "--png"],
        # a week later, after an ioniser bar and a grounded brush were fitted to belt 1
        ["new", str(after), "--site", str(site), "--spacing", "2", "--unit", "kV/m", "--operator", "demo"],
        ["meter", "add", str(after), "meter1", "--description", "sample handheld field meter", "--serial",
         "NH-0001", "--calibrated", "2026-05-12", "--due", "2027-05-12"],
        ["import", str(after), str(samples / "north_hall_after_conditions.csv")],
        ["import", str(after), str(samples / "north_hall_after_readings.csv")],
        ["grid", str(after)],
        ["compare", str(survey), str(after), "--out", str(out / "north_hall_before_after.gpkg")],
    ]
    for argv in steps:
        yield f"$ mapper {' '.join(argv)}"
        status = main(argv)
        if status:
            raise MapperError(f"demo step 'mapper {argv[0]}' failed with status {status}")
    yield f"wrote {survey} and {after}"
