"""Physical field model benchmark: fit time and accuracy at 300, 1 000 and 5 000 readings.

Usage::

    .venv/bin/python benchmarks/physics.py            # 300, 1 000 and 5 000 readings
    .venv/bin/python benchmarks/field.py --case physics

The data are invented: four charged sources over a grounded floor (method of images) in a
120 m x 80 m hall, an overhead line along a listed conveyor, a listed tote stack (patch), and two
unlisted point charges, read at 1 m with 3 % + 20 V/m meter noise on uniform random positions.
Side by side on the same readings: scipy's ``RBFInterpolator`` (thin-plate spline, 64 neighbours
above 1 000 readings) and its leave-one-out by ``mapper.field.RBF``, the data-only reference.
Targets (issue): physical fit under 3 s at 1 000 readings and under 20 s at 5 000, 2 cores.
"""

from __future__ import annotations

import resource
import sys
import time

import numpy as np
import shapely

sys.path.insert(0, __file__.rsplit("/", 2)[0])

from mapper.field import RBF  # noqa: E402
from mapper.field.physical import PhysicalModel, SourceSeed  # noqa: E402
from mapper.physics.images import AreaCharge, LineCharge, PointCharge, field_z  # noqa: E402

W, H = 120.0, 80.0
SOURCES = [
    LineCharge(20, 30, 80, 30, 2.4, -8e-7),
    AreaCharge(90, 55, 96, 60, 1.5, -4e-7),
    PointCharge(40, 62, 2.7, 4e-6),
    PointCharge(100, 15, 0.3, -1e-6),
]
SEEDS = (SourceSeed("belt", shapely.LineString([(20, 30), (80, 30)])),
         SourceSeed("totes", shapely.box(90, 55, 96, 60)))


def data(n: int, seed: int = 0):
    rng = np.random.default_rng(seed)
    xy = rng.uniform([0, 0], [W, H], size=(n, 2))
    clean = field_z(SOURCES, xy[:, 0], xy[:, 1], 1.0)
    return xy, clean * (1 + 0.03 * rng.standard_normal(n)) + 20 * rng.standard_normal(n), clean


def main() -> None:
    sizes = [int(a) for a in sys.argv[1:]] or [300, 1000, 5000]
    print(f"physical model benchmark: 4 sources, sizes {sizes}")
    for n in sizes:
        xy, v, clean = data(n)
        t0 = time.perf_counter()
        m = PhysicalModel(SEEDS, bounds=(0, 0, W, H)).fit(xy, v)
        fit_s = time.perf_counter() - t0
        t0 = time.perf_counter()
        err, std = m.loo()
        loo_s = time.perf_counter() - t0
        t0 = time.perf_counter()
        rbf = RBF(neighbors=None if n <= 1000 else 64).fit(xy, v)
        rerr, _ = rbf.loo()
        rbf_s = time.perf_counter() - t0
        rms = float(np.sqrt(np.mean(err**2)))
        rrms = float(np.sqrt(np.mean(rerr**2)))
        zrms = float(np.sqrt(np.mean((err / std) ** 2)))
        found = len(m.sources_)
        peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        target = {1000: 3.0, 5000: 20.0}.get(n)
        verdict = "" if target is None else (f" (target < {target:g} s: {'met' if fit_s < target else 'NOT met'})")
        print(f"  n={n:5d}: fit {fit_s:6.2f} s{verdict}, leave-one-out {loo_s:.2f} s, {found} sources; "
              f"LOO RMSE {rms:7.1f} V/m (RBF fit + LOO {rbf_s:.2f} s, RMSE {rrms:7.1f} V/m, ratio "
              f"{rms / rrms:.2f}); RMS z {zrms:.2f}; peak {peak_mb:.0f} MB")


if __name__ == "__main__":
    main()
