"""Grid benchmark: ``build_field`` with ``method="auto"`` against the single method it chooses.

Usage::

    .venv/bin/python benchmarks/grid.py                       # 5 000 and 20 000 readings, 1000 x 600 nodes
    .venv/bin/python benchmarks/grid.py --baseline /path/to/older/checkout
    .venv/bin/python benchmarks/grid.py --case rbf --full     # RBF prediction up to 1.5M nodes
    .venv/bin/python benchmarks/grid.py --case threads        # BLAS threads with the other core busy

Cases:

``auto``
    ``build_field`` over a 200 m x 120 m hall at 0.2 m cells (1000 x 600 nodes), first with
    ``method="auto"``, then with the method auto chose; the ratio auto / chosen is the target
    (at most 2). Each run prints where its time went (cumulative time of the main stages, from
    ``cProfile``). With ``--baseline DIR`` the same runs are repeated with the package found in
    ``DIR`` (an older checkout), in the same session, for before/after figures.
``rbf``
    Moving-neighbourhood RBF prediction (64 nearest readings, thin-plate spline) of 20 000
    readings onto 600 x 400 nodes (``--full``: also 1500 x 1000), ours against scipy's
    ``RBFInterpolator(neighbors=64)`` at the same smoothing (reference library), with the largest
    difference relative to the data range.
``threads``
    Closed-form leave-one-out of global ordinary kriging at 5 000 readings with OpenBLAS on 1
    and on 2 threads, each on a quiet machine and with a busy loop on the other core.

Every run is a subprocess of its own, one after another (the machine has 2 cores): wall time and
peak memory (``ru_maxrss``) belong to that run alone. ``--busy`` adds a busy loop (another
process) during every run. The data are invented: the Gaussian random field of
``benchmarks/field.py`` (exponential covariance, variance 100 (V/m)^2, practical range 30 m, about
500 V/m, white noise of variance 5 (V/m)^2) on uniform random positions.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, HERE)
from field import HEIGHT, WIDTH, make_data  # noqa: E402

CELL = 0.2  # 1000 x 600 nodes over the hall
STAGES = {  # (file ending, function name) -> label, for the time breakdown
    ("physical.py", "fit"): "physics fit",
    ("rbf.py", "fit"): "RBF fit (smoothing)",
    ("rbf.py", "predict"): "RBF predict",
    ("kriging.py", "predict"): "kriging predict",
    ("kriging.py", "loo"): "kriging LOO",
    ("build.py", "_fit"): "variogram fits",
    ("build.py", "_cross_validate"): "cross-validation",
}


# ------------------------------------------------------------------------------------ children
def child(args: argparse.Namespace) -> None:
    spec = json.loads(args.spec)
    case = args.case[0]
    d = np.load(args.data)
    xy, z = d["xy"], d["z"]
    out: dict = {}
    if case == "auto":
        import cProfile
        import pstats

        import shapely

        from mapper.field import build_field

        outline = shapely.box(0.0, 0.0, WIDTH, HEIGHT)
        prof = cProfile.Profile()
        t0 = time.perf_counter()
        prof.enable()
        g = build_field(xy, z, outline, method=spec["method"], cell_m=CELL)
        prof.disable()
        out["wall"] = time.perf_counter() - t0
        out["chosen"] = g.method
        out["nodes"] = int(g.estimate.size)
        stats = pstats.Stats(prof).stats
        stages: dict[str, float] = {}
        for (path, _, name), (_, _, _, cum, _) in stats.items():
            for (end, fn), label in STAGES.items():
                if name == fn and path.endswith(os.sep + end):
                    stages[label] = stages.get(label, 0.0) + cum
        out["stages"] = stages
    elif case == "rbf":
        gx = (np.arange(spec["nx"]) + 0.5) * WIDTH / spec["nx"]
        gy = (np.arange(spec["ny"]) + 0.5) * HEIGHT / spec["ny"]
        mx, my = np.meshgrid(gx, gy)
        targets = np.column_stack([mx.ravel(), my.ravel()])
        if spec["engine"] == "ours":
            from mapper.field import RBF

            rbf = RBF(smoothing=spec["smoothing"], neighbors=64, merge_tol_m=1e-9).fit(xy, z)
            t0 = time.perf_counter()
            est, _ = rbf.predict(targets)
        else:
            from scipy.interpolate import RBFInterpolator

            t0 = time.perf_counter()
            est = RBFInterpolator(xy, z, neighbors=64, smoothing=spec["smoothing"])(targets)
        out["wall"] = time.perf_counter() - t0
        np.save(os.path.join(args.out + ".npy"), est)
    elif case == "threads":
        from mapper.field import OrdinaryKriging, Variogram
        from mapper.field.threads import blas_threads

        kr = OrdinaryKriging(Variogram("exponential", sill=100.0, range=30.0, nugget=5.0)).fit(xy, z)
        with blas_threads(spec["threads"]):
            t0 = time.perf_counter()
            kr.loo()
            out["wall"] = time.perf_counter() - t0
    out["rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    with open(args.out, "w", encoding="utf-8") as f:
        json.dump(out, f)


def run_child(case: str, spec: dict, data: str, tmp: str, package: str, busy: bool) -> dict | None:
    out = os.path.join(tmp, f"{case}-{abs(hash(json.dumps(spec, sort_keys=True)))}.json")
    cmd = [sys.executable, os.path.abspath(__file__), "--child", "--case", case, "--spec", json.dumps(spec),
           "--data", data, "--out", out]
    env = dict(os.environ, PYTHONPATH=package)
    loop = subprocess.Popen([sys.executable, "-c", "while True: pass"]) if busy else None
    try:
        subprocess.run(cmd, check=True, env=env, timeout=3600)
    except (subprocess.CalledProcessError, subprocess.TimeoutExpired) as exc:
        print(f"  {case} {spec}: failed ({exc})")
        return None
    finally:
        if loop is not None:
            loop.kill()
            loop.wait()
    with open(out, encoding="utf-8") as f:
        info = json.load(f)
    if case == "rbf":
        info["est"] = np.load(out + ".npy")
    return info


# ------------------------------------------------------------------------------------ parent
def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--case", action="append", choices=("auto", "rbf", "threads"))
    ap.add_argument("--full", action="store_true")
    ap.add_argument("--baseline", help="checkout whose mapper package gives the 'before' figures")
    ap.add_argument("--busy", action="store_true", help="a busy loop on the other core during every run")
    ap.add_argument("--sizes", type=int, nargs="*", default=[5000, 20000])
    ap.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--spec", help=argparse.SUPPRESS)
    ap.add_argument("--data", help=argparse.SUPPRESS)
    ap.add_argument("--out", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        child(args)
        return
    cases = args.case or ["auto"]
    with tempfile.TemporaryDirectory() as tmp:
        def data_for(n: int) -> str:
            path = os.path.join(tmp, f"data{n}.npz")
            if not os.path.exists(path):
                make_data(n, path)
            return path

        packages = [("ours", ROOT)] + ([("before", os.path.abspath(args.baseline))] if args.baseline else [])
        if "auto" in cases:
            print(f"== build_field, auto against the chosen method, {WIDTH:g} m x {HEIGHT:g} m at {CELL:g} m cells")
            for n in args.sizes:
                for label, pkg in packages:
                    auto = run_child("auto", {"method": "auto"}, data_for(n), tmp, pkg, args.busy)
                    if auto is None:
                        continue
                    one = run_child("auto", {"method": auto["chosen"]}, data_for(n), tmp, pkg, args.busy)
                    if one is None:
                        continue
                    print(f"{label:>6} n={n}: {auto['nodes']} nodes, chose {auto['chosen']}; "
                          f"auto {auto['wall']:.1f} s {auto['rss_mb']:.0f} MB, {auto['chosen']} alone "
                          f"{one['wall']:.1f} s {one['rss_mb']:.0f} MB; ratio {auto['wall'] / one['wall']:.2f} "
                          "(target <= 2)")
                    for name, info in (("auto", auto), (auto["chosen"], one)):
                        ranked = sorted(info["stages"].items(), key=lambda kv: -kv[1])
                        parts = ", ".join(f"{k} {v:.1f}" for k, v in ranked)
                        print(f"         {name} stages (s, cumulative, overlapping): {parts}")
        if "rbf" in cases:
            sizes = [(600, 400)] + ([(1500, 1000)] if args.full else [])
            n = 20000
            print(f"== RBF prediction, {n} readings, 64 nearest, thin-plate spline")
            for nx, ny in sizes:
                spec = {"nx": nx, "ny": ny, "smoothing": 1.0}
                runs = {}
                for label, pkg in packages:
                    runs[label] = run_child("rbf", dict(spec, engine="ours"), data_for(n), tmp, pkg, args.busy)
                runs["scipy"] = run_child("rbf", dict(spec, engine="scipy"), data_for(n), tmp, ROOT, args.busy)
                ref = runs["scipy"]
                for label, info in runs.items():
                    if info is None:
                        continue
                    extra = ""
                    if ref is not None and label != "scipy":
                        z = np.load(data_for(n))["z"]
                        diff = float(np.max(np.abs(info["est"] - ref["est"])) / np.ptp(z))
                        extra = f", {ref['wall'] / info['wall']:.1f}x scipy, max diff {diff:.1e} of the data range"
                    print(f"{label:>6} {nx}x{ny}: {info['wall']:.2f} s, {info['rss_mb']:.0f} MB{extra}")
        if "threads" in cases:
            print("== leave-one-out, global ordinary kriging, 5 000 readings, OpenBLAS threads")
            for busy in (False, True):
                for threads in (2, 1):
                    info = run_child("threads", {"threads": threads}, data_for(5000), tmp, ROOT, busy)
                    if info is not None:
                        print(f"  {'busy other core' if busy else 'quiet':>15}, {threads} thread(s): "
                              f"{info['wall']:.2f} s, {info['rss_mb']:.0f} MB")


if __name__ == "__main__":
    main()
