"""Command start-up: how long ``mapper --help`` and ``mapper info`` take, in fresh processes.

Targets (issue: speed targets of the application layer): ``mapper --help`` under 0.3 s; ``mapper
info`` under 0.5 s. Each is run ``--repeat`` times; the median and the best are printed, beside
``python -c pass`` (the interpreter's own start-up) for scale. Run::

    .venv/bin/python benchmarks/cli.py [--survey FILE]

Without ``--survey`` the sample hall is made in a temporary folder (348 readings).
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
SAMPLES = HERE.parent / "sample_sites"


def _time(argv: list[str], repeat: int) -> tuple[float, float]:
    runs = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run(argv, check=True, capture_output=True)
        runs.append(time.perf_counter() - t0)
    return statistics.median(runs), min(runs)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--survey", help="survey file for 'mapper info' (default: the sample hall)")
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    py = sys.executable
    with tempfile.TemporaryDirectory() as tmp:
        survey = args.survey
        if survey is None:
            survey = str(Path(tmp) / "hall.survey")
            subprocess.run([py, "-m", "mapper", "new", survey, "--site", str(SAMPLES / "north_hall.toml"),
                            "--spacing", "2"], check=True, capture_output=True)
            subprocess.run([py, "-m", "mapper", "import", survey, str(SAMPLES / "north_hall_readings.csv")],
                           check=True, capture_output=True)
        base = _time([py, "-c", "pass"], args.repeat)
        print(f"python -c pass        median {base[0]:.3f} s, best {base[1]:.3f} s")
        for label, argv, target in (("mapper --help", ["--help"], 0.3), ("mapper info", ["info", survey], 0.5)):
            med, best = _time([py, "-m", "mapper", *argv], args.repeat)
            verdict = "met" if med < target else "NOT met"
            print(f"{label:<21} median {med:.3f} s, best {best:.3f} s  (target < {target} s: {verdict}; "
                  f"{med / base[0]:.1f}x the interpreter's start-up)")


if __name__ == "__main__":
    main()
