"""Export benchmark: ``mapper export`` of a 100 000-reading survey, stage by stage.

Usage::

    .venv/bin/python benchmarks/export.py                     # 100 000 readings
    .venv/bin/python benchmarks/export.py --readings 5000
    .venv/bin/python benchmarks/export.py --survey FILE       # an existing survey (kept)

Target (issue: speed targets of the application layer): the export of 100 000 readings under
5 s, each layer built once. The survey is the sample hall surveyed densely
(``benchmarks/surveys.py``, invented readings) with an inverse-distance field model stored, so the
figures are the export's and not an interpolation's. Figures, each in this process except the
last:

* products: :func:`mapper.workflow.survey_products` (reading the survey, the corrections with
  the outlier check, the stored field model, the map features);
* layers: every GeoPackage layer as a GeoDataFrame (:func:`mapper.export.layers.all_layers`);
* GeoPackage + GeoTIFF + CSV: :func:`mapper.export.bundle.export_products` as ``mapper export
  --csv`` calls it (layers included);
* command: ``mapper export SURVEY OUT.gpkg --csv OUT.csv`` in a fresh process, start-up included.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from surveys import dense_hall  # noqa: E402


def timed(fn, *args, **kwargs):
    start = time.perf_counter()
    out = fn(*args, **kwargs)
    return time.perf_counter() - start, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--readings", type=int, default=100_000, help="field readings (default 100 000)")
    ap.add_argument("--survey", help="use this survey instead of making one")
    args = ap.parse_args()
    from mapper.export.bundle import export_products
    from mapper.export.layers import all_layers
    from mapper.survey.store import Survey
    from mapper.workflow import survey_products

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        survey = Path(args.survey) if args.survey else None
        if survey is None:
            t_make, survey = timed(dense_hall, folder / "dense.survey", args.readings, store_idw=True)
            print(f"made the survey in {t_make:.1f} s (not part of the figures)")
        with contextlib.redirect_stderr(io.StringIO()):
            with Survey.open(survey) as s:
                t_products, products = timed(survey_products, s)
            t_layers, layers = timed(all_layers, products)
            t_export, result = timed(export_products, products, folder / "out.gpkg", csv_path=folder / "out.csv")
        n = len(products.readings)
        counts = dict(result.gpkg.layers)
        print(f"survey: {n} corrected field readings, field model {products.field_source} ({products.grid.method})")
        print(f"products (read, correct, stored model, features)  {t_products:6.2f} s")
        print(f"layers (all GeoPackage layers as frames)           {t_layers:6.2f} s  "
              f"({len(layers)} layers, readings {counts.get('readings')})")
        verdict = "met" if t_export < 5.0 else "NOT met"
        print(f"GeoPackage + GeoTIFF + CSV (export_products)       {t_export:6.2f} s  (target < 5 s: {verdict})")
        env = {**os.environ, "PYTHONPATH": str(HERE.parent)}  # the checkout this script is in
        argv = [sys.executable, "-m", "mapper", "export", str(survey), str(folder / "cmd.gpkg"),
                "--csv", str(folder / "cmd.csv")]
        t_cmd, _ = timed(subprocess.run, argv, check=True, capture_output=True, env=env)
        print(f"mapper export --csv, fresh process                 {t_cmd:6.2f} s")


if __name__ == "__main__":
    main()
