"""Archive benchmark: pushing a 5 000-reading survey, and the history of a site with 50 surveys.

Usage::

    .venv/bin/python benchmarks/archive.py                # 5 000 readings, 50 surveys
    .venv/bin/python benchmarks/archive.py --surveys 20   # a shorter history

Targets (issue 14): push of a 5 000-reading survey under 5 s; history of a site with 50 surveys
under 2 s.

A PostgreSQL server with PostGIS is started from the machine's binaries in a temporary folder
(as the tests do: ``tests/archive/server.py``; as the ``postgres`` user when run as root), on a
Unix socket, with ``fsync`` on (the server's defaults apart from the socket).

Figures:

* push, new: ``mapper.archive.push.push`` of the sample hall surveyed at 0.5 m (about 5 000 field
  readings of the sample generator's sources, 1 % gain noise and 25 V/m meter noise, invented),
  with its IDW field model stored (``mapper grid --method idw``, not timed): reading the file,
  the products from the stored model, one transaction.
* push, unchanged: the same survey again (nothing written).
* push, +100 readings: after 100 more readings (the stored model is then older than the
  readings, so the products interpolate again with its method; that is most of this figure).
* history: ``mapper.archive.history.site_history`` over N surveys of the hall (the three sample
  surveys at 2 m, with their physical field models stored, pushed again and again as distinct
  surveys).
"""

from __future__ import annotations

import argparse
import contextlib
import io
import statistics
import sys
import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from mapper.archive.connect import connect  # noqa: E402
from mapper.archive.history import site_history  # noqa: E402
from mapper.archive.push import push  # noqa: E402
from mapper.archive.schema import initialise  # noqa: E402
from mapper.cli.main import main  # noqa: E402
from mapper.physics.images import field_z  # noqa: E402
from mapper.survey.create import create_survey  # noqa: E402
from mapper.survey.store import NewReading, Survey  # noqa: E402
from tests.archive.helpers import HALL_SURVEYS, SAMPLES, distinct_copies, hall_survey  # noqa: E402
from tests.archive.server import start_server  # noqa: E402


def _quiet(argv: list[str]) -> None:
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        assert main(argv) == 0, argv


def dense_hall(folder: Path, spacing_m: float = 0.5) -> Path:
    """The sample hall at ``spacing_m`` with readings of the generator's sources at every point."""
    import importlib.util

    spec = importlib.util.spec_from_file_location("sample_generate", SAMPLES / "generate.py")
    gen = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(gen)
    rng = np.random.default_rng(14)
    path = folder / "dense.survey"
    with create_survey(path, SAMPLES / "north_hall.toml", spacing_m=spacing_m) as survey:
        points = survey.plan.points
        x = np.array([p.x for p in points])
        y = np.array([p.y for p in points])
        truth = field_z(gen.HALL_SOURCES, x, y, 1.0)
        values = truth * (1 + rng.normal(0, 0.01, len(x))) + rng.normal(0, 25.0, len(x))
        start = datetime(2026, 11, 3, 7, 0, tzinfo=UTC)
        survey.add_readings([
            NewReading(p.x, p.y, float(v), "V/m", float(v), point=p.label, height_m=1.0,
                       time=start + timedelta(seconds=6 * i))
            for i, (p, v) in enumerate(zip(points, values, strict=True))
        ], source="benchmark")
    _quiet(["grid", str(path), "--method", "idw"])
    return path


def timed(fn, *args):
    start = time.perf_counter()
    out = fn(*args)
    return time.perf_counter() - start, out


def main_benchmark() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--surveys", type=int, default=50, help="surveys in the history (default 50)")
    parser.add_argument("--repeat", type=int, default=3, help="history runs (default 3)")
    args = parser.parse_args()
    server, reason = start_server(fsync=True)
    if server is None:
        print(f"benchmark skipped: {reason}")
        return
    try:
        with tempfile.TemporaryDirectory() as tmp:
            folder = Path(tmp)
            import psycopg

            with psycopg.connect(server.url(), autocommit=True) as conn:
                conn.execute("CREATE DATABASE bench")
            url = server.url("bench")
            with connect(url, autocommit=True) as conn:
                conn.execute("CREATE EXTENSION postgis")
                initialise(conn, url)
            dense = dense_hall(folder)
            with Survey.open(dense) as survey:
                n = survey.count_rows()
            from mapper.workflow import survey_products

            with Survey.open(dense) as survey:
                t_products, _ = timed(survey_products, survey)
            t_new, first = timed(push, dense, url)
            t_same, same = timed(push, dense, url)
            with Survey.open(dense, write=True) as survey:
                survey.add_readings([NewReading(1.0 + 0.1 * k, 1.0, 50.0, "V/m", 50.0, height_m=1.0)
                                     for k in range(100)])
            t_more, more = timed(push, dense, url)
            print(f"push, new survey of {n} readings:  {t_new:.2f} s ({first.status}; target < 5 s)")
            print(f"  of which products from the stored model: {t_products:.2f} s")
            print(f"push, unchanged:                   {t_same:.3f} s ({same.status})")
            print(f"push, +100 readings:               {t_more:.2f} s ({more.status}, "
                  f"{more.added['readings']} rows added; products interpolated again)")

            hall = folder / "hall"
            hall.mkdir()
            bases = []
            for name in HALL_SURVEYS:
                with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
                    path = hall_survey(hall, name)
                _quiet(["grid", str(path)])
                bases.append(path)
            per = -(-args.surveys // len(bases))
            copies = [c for k, b in enumerate(bases) for c in distinct_copies(b, hall, per, f"h{k}_")]
            copies = copies[: args.surveys - 1]  # with the dense survey: args.surveys of the hall
            start = time.perf_counter()
            for c in copies:
                push(c, url)
            t_pushes = time.perf_counter() - start
            times = []
            for _ in range(args.repeat):
                t, history = timed(site_history, url, "North Hall")
                times.append(t)
            print(f"pushed {len(copies)} more hall surveys in {t_pushes:.1f} s ({t_pushes / len(copies):.2f} s each, "
                  "stored physical models)")
            print(f"history of {len(history.surveys)} surveys, {len(history.places)} places: "
                  f"median {statistics.median(times):.3f} s, best {min(times):.3f} s (target < 2 s)")
    finally:
        server.stop()


if __name__ == "__main__":
    main_benchmark()
