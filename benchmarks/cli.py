"""Command start-up: how long ``mapper --help`` and ``mapper info`` take, in fresh processes.

Targets (issue: speed targets of the application layer): ``mapper --help`` under 0.3 s; ``mapper
info`` on a 5 000-reading survey under 0.5 s. Each is run ``--repeat`` times; the median and the
best are printed, beside ``python -c pass`` (the interpreter's own start-up) for scale. The
commands run from the checkout this script is in. Run::

    .venv/bin/python benchmarks/cli.py [--survey FILE] [--readings N]

Without ``--survey`` the sample hall is made in a temporary folder (348 field readings), and the
hall surveyed densely with about ``--readings`` field readings (default 5 000; invented readings,
``benchmarks/surveys.py``).
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
SAMPLES = HERE.parent / "sample_sites"
#: The commands run from this checkout, whatever the virtualenv's own install points at.
ENV = {**os.environ, "PYTHONPATH": str(HERE.parent)}


def _time(argv: list[str], repeat: int) -> tuple[float, float]:
    runs = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run(argv, check=True, capture_output=True, env=ENV)
        runs.append(time.perf_counter() - t0)
    return statistics.median(runs), min(runs)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--survey", help="survey file for 'mapper info' (default: the sample hall)")
    ap.add_argument("--readings", type=int, default=5000, help="field readings of the dense survey (default 5 000)")
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    py = sys.executable
    with tempfile.TemporaryDirectory() as tmp:
        cases = [("mapper --help", ["--help"], 0.3)]
        if args.survey is not None:
            cases.append(("mapper info", ["info", args.survey], 0.5))
        else:
            hall = str(Path(tmp) / "hall.survey")
            subprocess.run([py, "-m", "mapper", "new", hall, "--site", str(SAMPLES / "north_hall.toml"),
                            "--spacing", "2"], check=True, capture_output=True, env=ENV)
            subprocess.run([py, "-m", "mapper", "import", hall, str(SAMPLES / "north_hall_readings.csv")],
                           check=True, capture_output=True, env=ENV)
            sys.path.insert(0, str(HERE.parent))
            sys.path.insert(0, str(HERE))
            from surveys import dense_hall

            dense = dense_hall(Path(tmp) / "dense.survey", args.readings)
            cases += [("mapper info, 348", ["info", hall], None),
                      (f"mapper info, {args.readings}", ["info", str(dense)], 0.5)]
        base = _time([py, "-c", "pass"], args.repeat)
        print(f"python -c pass        median {base[0]:.3f} s, best {base[1]:.3f} s")
        for label, argv, target in cases:
            med, best = _time([py, "-m", "mapper", *argv], args.repeat)
            verdict = "" if target is None else f"target < {target} s: {'met' if med < target else 'NOT met'}; "
            print(f"{label:<21} median {med:.3f} s, best {best:.3f} s  ({verdict}"
                  f"{med / base[0]:.1f}x the interpreter's start-up)")


if __name__ == "__main__":
    main()
