"""Large surveys for the command benchmarks: the sample hall surveyed densely (invented data).

The readings are the vertical field of the sample generator's sources (``sample_sites/generate.py``,
``HALL_SOURCES``) at the meter height of 1 m, with 1 % gain noise, 25 V/m meter noise and a slow zero
drift of 45 V/m per hour, taken walking the plan; a zero reading at the start and at the end of
each 500 readings lets the drift correction work as on a real survey. The sample hall has 348
field readings; these have thousands.
"""

from __future__ import annotations

import importlib.util
import math
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "sample_sites"
#: Area of the sample hall's outline, square metres.
HALL_AREA_M2 = 1380.0
#: Field readings between two zero readings.
ZERO_EVERY = 500


def _generator():
    spec = importlib.util.spec_from_file_location("sample_generate", SAMPLES / "generate.py")
    gen = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(gen)
    return gen


def dense_hall(path: Path, readings: int, seed: int = 14, store_idw: bool = False) -> Path:
    """Create ``path``: the sample hall with about ``readings`` field readings on a square plan.

    Parameters
    ----------
    path : Path
        Survey file to create (replaced).
    readings : int
        Field readings wanted; the plan spacing is chosen from the hall's area so that one reading
        per planned point comes close (the plan decides the exact number).
    seed : int
        Seed of the noise.
    store_idw : bool
        Store an inverse-distance field model (as ``mapper grid --method idw`` does), so that the
        commands use it instead of interpolating.

    Returns
    -------
    Path
    """
    from mapper.field import field_to_bytes
    from mapper.physics.images import field_z
    from mapper.readings.model import NewReading
    from mapper.survey.create import create_survey
    from mapper.workflow import build_survey_field

    gen = _generator()
    for stale in (path, Path(f"{path}-wal"), Path(f"{path}-shm")):
        stale.unlink(missing_ok=True)
    rng = np.random.default_rng(seed)
    spacing = math.sqrt(HALL_AREA_M2 / readings)
    with create_survey(path, SAMPLES / "north_hall.toml", spacing_m=spacing) as survey:
        points = survey.plan.points
        x = np.array([p.x for p in points])
        y = np.array([p.y for p in points])
        truth = field_z(gen.HALL_SOURCES, x, y, 1.0)
        start = datetime(2026, 11, 3, 7, 0, tzinfo=UTC)
        hours = np.arange(len(x)) * 2.0 / 3600.0
        values = truth * (1 + rng.normal(0, 0.01, len(x))) + rng.normal(0, 25.0, len(x)) + 45.0 * hours
        rows = []
        for i, (p, v) in enumerate(zip(points, values, strict=True)):
            t = start + timedelta(seconds=2 * i)
            if i % ZERO_EVERY == 0:
                z = 45.0 * i * 2.0 / 3600.0 + rng.normal(0, 25.0)
                rows.append(NewReading(1.0, 1.0, float(z), "V/m", float(z), kind="zero", height_m=1.0,
                                       time=t - timedelta(seconds=1)))
            rows.append(NewReading(p.x, p.y, float(v), "V/m", float(v), point=p.label, height_m=1.0, time=t))
        t_end = start + timedelta(seconds=2 * len(x))
        z = 45.0 * len(x) * 2.0 / 3600.0
        rows.append(NewReading(1.0, 1.0, z, "V/m", z, kind="zero", height_m=1.0, time=t_end))
        survey.add_readings(rows, source="benchmark")
    if store_idw:
        from mapper.corrections.pipeline import correct_survey
        from mapper.survey.store import Survey

        with Survey.open(path, write=True) as survey:
            corrected = correct_survey(survey, check_outliers=False)
            grid = build_survey_field(survey.site, corrected.readings, method="idw")
            survey.save_field(grid.method, {"method": grid.method, "reason": grid.reason, "cell_m": grid.cell_m,
                                            "corrections": list(corrected.applied),
                                            "readings": len(corrected.readings)}, field_to_bytes(grid))
    return path


__all__ = ["dense_hall"]
