"""Field-engine benchmark: mapper.field against PyKrige, GSTools and scipy on the same data.

Usage::

    .venv/bin/python benchmarks/field.py            # quick sizes (a few minutes)
    .venv/bin/python benchmarks/field.py --full     # the sizes of the performance targets
    .venv/bin/python benchmarks/field.py --case moving --case global

Every (case, engine) runs in its own subprocess, one after another (the machine has 2 cores), so
wall time and peak memory (``ru_maxrss`` of that process; "above base" subtracts the resident
size after imports and data loading) belong to that engine alone. Results are written to a
temporary directory and compared in the parent: the largest difference is given relative to the
data range (estimates) or to the total sill (variances), or as fitted parameters (variogram).

The data are invented: a Gaussian random field (GSTools SRF, exponential covariance, variance
100 (V/m)^2, practical range 30 m) around 500 V/m plus white noise of variance 5 (V/m)^2, on
uniform random positions in a 200 m x 120 m hall. Kriging cases use that
variogram as fixed parameters: exponential, sill 100, range 30 m, nugget 5.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
WIDTH, HEIGHT = 200.0, 120.0
SILL, RANGE, NUGGET = 100.0, 30.0, 5.0
K = 32
# The reference libraries keep readings a few millimetres apart as separate points (20 000 random
# positions hold a few pairs closer than our default 1 cm merge distance), so for like-for-like
# comparison repeats are merged only when they coincide.
NO_MERGE = 1e-9

QUICK = {
    "moving": [(5000, 500, 300)],
    "global": [(1000, 200, 120)],
    "loo": [(1000, 20)],  # (n, PyKrige refits actually run; time extrapolated to n)
    "loo_large": [5000],
    "variogram": [5000],
    "fast": [2000],
}
FULL = {
    "moving": [(5000, 1000, 600), (20000, 1000, 600)],
    "global": [(5000, 200, 120)],
    "loo": [(1000, 1000)],
    "loo_large": [5000],
    "variogram": [20000],
    "fast": [2000],
}


# ------------------------------------------------------------------------------------ data
def make_data(n: int, path: str, seed: int = 0) -> None:
    import gstools as gs

    rng = np.random.default_rng(seed)
    xy = rng.uniform([0.0, 0.0], [WIDTH, HEIGHT], size=(n, 2))
    srf = gs.SRF(gs.Exponential(dim=2, var=SILL, len_scale=RANGE / 3.0), seed=seed + 1)
    z = srf((xy[:, 0], xy[:, 1]), mesh_type="unstructured")
    z = 500.0 + z + rng.normal(0.0, math.sqrt(NUGGET), n)
    np.savez(path, xy=xy, z=z)


def grid_axes(nx: int, ny: int) -> tuple[np.ndarray, np.ndarray]:
    return (np.arange(nx) + 0.5) * WIDTH / nx, (np.arange(ny) + 0.5) * HEIGHT / ny


# ------------------------------------------------------------------------------------ engines
def _ours_vg():
    from mapper.field import Variogram

    return Variogram("exponential", sill=SILL, range=RANGE, nugget=NUGGET)


def _pk_params():
    return {"psill": SILL, "range": RANGE, "nugget": NUGGET}  # PyKrige exponential: practical range


def run_engine(case: str, engine: str, spec: dict, xy: np.ndarray, z: np.ndarray) -> dict:
    """Run one engine on one case; return arrays to save and scalars to report."""
    if case in ("moving", "global"):
        gx, gy = grid_axes(spec["nx"], spec["ny"])
        mx, my = np.meshgrid(gx, gy)
        targets = np.column_stack([mx.ravel(), my.ravel()])
    if case == "moving":
        if engine == "ours":
            from mapper.field import OrdinaryKriging
            from mapper.field.neighbourhood import map_nearest_sets

            kr = OrdinaryKriging(_ours_vg(), neighbors=K, merge_tol_m=NO_MERGE).fit(xy, z)
            est, std = kr.predict(targets)
            wall = time.perf_counter()
            n_sets = sum(map_nearest_sets(kr.xt_, kr.variogram_.transform(targets), K, lambda b: b.n_sets, kr.tree_))
            return {"est": est, "var": std**2, "n_sets": n_sets, "uncounted_s": time.perf_counter() - wall}
        from pykrige.ok import OrdinaryKriging as POK

        ok = POK(xy[:, 0], xy[:, 1], z, variogram_model="exponential", variogram_parameters=_pk_params())
        est, var = ok.execute("grid", gx, gy, backend="C", n_closest_points=K)
        return {"est": np.asarray(est).ravel(), "var": np.asarray(var).ravel()}
    if case == "global":
        if engine == "ours":
            from mapper.field import OrdinaryKriging

            est, std = OrdinaryKriging(_ours_vg(), merge_tol_m=NO_MERGE).fit(xy, z).predict(targets)
            return {"est": est, "var": std**2}
        if engine == "pykrige-vectorized":
            from pykrige.ok import OrdinaryKriging as POK

            ok = POK(xy[:, 0], xy[:, 1], z, variogram_model="exponential", variogram_parameters=_pk_params())
            est, var = ok.execute("grid", gx, gy, backend="vectorized")
            return {"est": np.asarray(est).ravel(), "var": np.asarray(var).ravel()}
        import gstools as gs

        model = gs.Exponential(dim=2, var=SILL, len_scale=RANGE / 3.0, nugget=NUGGET)
        k = gs.krige.Ordinary(model, cond_pos=[xy[:, 0], xy[:, 1]], cond_val=z, exact=True, pseudo_inv=False)
        est, var = k((gx, gy), mesh_type="structured", return_var=True)  # (nx, ny)
        return {"est": np.asarray(est).T.ravel(), "var": np.asarray(var).T.ravel()}
    if case in ("loo", "loo_large"):
        if engine == "ours":
            from mapper.field import OrdinaryKriging

            err, std = OrdinaryKriging(_ours_vg(), merge_tol_m=NO_MERGE).fit(xy, z).loo()
            return {"err": err, "var": std**2}
        from pykrige.ok import OrdinaryKriging as POK

        m = spec["refits"]
        err, var = np.empty(m), np.empty(m)
        for i in range(m):
            keep = np.arange(len(z)) != i
            ok = POK(xy[keep, 0], xy[keep, 1], z[keep], variogram_model="exponential",
                     variogram_parameters=_pk_params())
            e, v = ok.execute("points", xy[i:i + 1, 0], xy[i:i + 1, 1], backend="vectorized")
            err[i], var[i] = float(e[0]) - z[i], float(v[0])
        return {"err": err, "var": var}
    if case == "variogram":
        if engine == "ours":
            from mapper.field import fit_variogram

            f = fit_variogram(xy, z, "exponential")
            v = f.variogram
            return {"params": [v.sill, v.range, v.nugget], "converged": f.converged}
        if engine == "pykrige":
            from pykrige.ok import OrdinaryKriging as POK

            ok = POK(xy[:, 0], xy[:, 1], z, variogram_model="exponential", nlags=15)
            psill, rng, nug = (float(p) for p in ok.variogram_model_parameters)
            return {"params": [psill, rng, nug], "converged": True}
        import gstools as gs

        bins = np.linspace(0, math.hypot(WIDTH, HEIGHT) / 2, 16)
        centres, gamma = gs.vario_estimate((xy[:, 0], xy[:, 1]), z, bins)
        model = gs.Exponential(dim=2)
        try:
            model.fit_variogram(centres, gamma, nugget=True)
            ok = True
        except RuntimeError:
            ok = False
        return {"params": [model.var, 3.0 * model.len_scale, model.nugget], "converged": ok}
    if case == "fast":
        import shapely

        from mapper.field import build_field

        outline = shapely.box(0, 0, WIDTH, HEIGHT)
        times = []
        for _ in range(5):
            t0 = time.perf_counter()
            g = build_field(xy, z, outline, fast=True)
            times.append(time.perf_counter() - t0)
        return {"median_s": float(np.median(times)), "nodes": int(g.estimate.size)}
    raise ValueError(case)


def child(args: argparse.Namespace) -> None:
    import resource

    spec = json.loads(args.spec)
    data = np.load(args.data)
    xy, z = data["xy"], data["z"]
    # Import the engine's libraries before the baseline is taken.
    if args.engine.startswith("ours"):
        # mapper.field exports its names on first use: load the engine before the clock starts.
        from mapper.field import OrdinaryKriging, build_field  # noqa: F401
        from mapper.field.neighbourhood import map_nearest_sets  # noqa: F401
    elif args.engine.startswith("pykrige"):
        import pykrige.ok  # noqa: F401
    else:
        import gstools  # noqa: F401
    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    t0 = time.perf_counter()
    out = run_engine(args.case_name, args.engine, spec, xy, z)
    wall = time.perf_counter() - t0 - out.pop("uncounted_s", 0.0)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    arrays = {k: v for k, v in out.items() if isinstance(v, np.ndarray)}
    scalars = {k: v for k, v in out.items() if not isinstance(v, np.ndarray)}
    np.savez(args.out, **arrays)
    print(json.dumps({"wall_s": wall, "peak_mb": peak / 1024, "base_mb": base / 1024, **scalars}))


# ------------------------------------------------------------------------------------ parent
def run_child(case: str, engine: str, spec: dict, data: str, tmp: str, timeout: float) -> dict | None:
    out = os.path.join(tmp, f"{case}-{engine}-{abs(hash(json.dumps(spec)))}.npz")
    cmd = [sys.executable, os.path.abspath(__file__), "--child", "--case-name", case, "--engine", engine,
           "--spec", json.dumps(spec), "--data", data, "--out", out]
    try:
        res = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, cwd=ROOT,
                             env={**os.environ, "PYTHONPATH": ROOT})
    except subprocess.TimeoutExpired:
        print(f"    {engine:20s} timed out after {timeout:.0f} s")
        return None
    if res.returncode != 0:
        tail = (res.stderr.strip().splitlines() or ["?"])[-1]
        print(f"    {engine:20s} failed (exit {res.returncode}): {tail[:150]}")
        return None
    info = json.loads(res.stdout.strip().splitlines()[-1])
    with np.load(out) as npz:
        info["arrays"] = {k: npz[k] for k in npz.files}
    return info


def report(engine: str, info: dict | None, ref_wall: float | None, extra: str = "") -> None:
    if info is None:
        return
    ratio = f"{info['wall_s'] / ref_wall:7.1f}x" if ref_wall else "       "
    print(f"    {engine:20s} {info['wall_s']:8.2f} s  peak {info['peak_mb']:7.0f} MB "
          f"(+{info['peak_mb'] - info['base_mb']:6.0f} above base)  {ratio} vs ours  {extra}")


def max_jump(est: np.ndarray, ny: int, nx: int) -> float:
    """Largest difference between adjacent nodes of a grid estimate, V/m."""
    g = np.asarray(est).reshape(ny, nx)
    return float(max(np.max(np.abs(np.diff(g, axis=0))), np.max(np.abs(np.diff(g, axis=1)))))


def rel_diff(a: np.ndarray, b: np.ndarray, scale: float) -> tuple[float, float]:
    d = np.abs(np.asarray(a) - np.asarray(b)) / scale
    return float(np.max(d)), float(np.sqrt(np.mean(d**2)))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--full", action="store_true", help="the sizes of the performance targets")
    ap.add_argument("--quick", action="store_true", help="smaller sizes (default)")
    ap.add_argument("--case", action="append", choices=[*QUICK, "physics"],
                    help="run only these cases (physics: the physical field model, benchmarks/physics.py)")
    ap.add_argument("--readings", type=int, action="append",
                    help="run only the sizes with this many readings (moving, global, loo, variogram)")
    ap.add_argument("--timeout", type=float, default=900.0, help="per engine run, seconds")
    ap.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--case-name", help=argparse.SUPPRESS)
    ap.add_argument("--engine", help=argparse.SUPPRESS)
    ap.add_argument("--spec", help=argparse.SUPPRESS)
    ap.add_argument("--data", help=argparse.SUPPRESS)
    ap.add_argument("--out", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        child(args)
        return
    sizes = FULL if args.full else QUICK
    cases = args.case or [*QUICK, "physics"]
    if "physics" in cases:
        subprocess.run([sys.executable, os.path.join(ROOT, "benchmarks", "physics.py"),
                        *(["300", "1000", "5000"] if args.full else ["300", "1000"])], check=False)
        cases = [c for c in cases if c != "physics"]
        if not cases:
            return
    print(f"mapper.field benchmark ({'full' if args.full else 'quick'} sizes), "
          f"{os.cpu_count()} CPUs, numpy {np.__version__}")
    with tempfile.TemporaryDirectory() as tmp:
        datasets: dict[int, str] = {}

        def data_for(n: int) -> str:
            if n not in datasets:
                datasets[n] = os.path.join(tmp, f"data-{n}.npz")
                make_data(n, datasets[n])
            return datasets[n]

        zr_cache: dict[int, float] = {}

        def zrange(n: int) -> float:
            if n not in zr_cache:
                zr_cache[n] = float(np.ptp(np.load(data_for(n))["z"]))
            return zr_cache[n]

        total = SILL + NUGGET
        for case in cases:
            for item in sizes[case]:
                if args.readings and (item[0] if isinstance(item, tuple) else item) not in args.readings:
                    continue
                if case == "moving":
                    n, nx, ny = item
                    print(f"\n[moving] {K}-nearest ordinary kriging with std, {n} readings onto {nx}x{ny} nodes")
                    spec = {"nx": nx, "ny": ny}
                    ours = run_child(case, "ours", spec, data_for(n), tmp, args.timeout)
                    pk = run_child(case, "pykrige-C", spec, data_for(n), tmp, args.timeout)
                    ref = ours["wall_s"] if ours else None
                    report("ours (exact)", ours, ref, f"{ours.get('n_sets')} distinct neighbourhoods" if ours else "")
                    report("pykrige C", pk, ref)
                    if ours and pk:
                        e = rel_diff(ours["arrays"]["est"], pk["arrays"]["est"], zrange(n))
                        v = rel_diff(ours["arrays"]["var"], pk["arrays"]["var"], total)
                        print(f"    ours vs pykrige C: estimate max {e[0]:.2e} of data range; "
                              f"variance max {v[0]:.2e} of total sill")
                        jo, jp = max_jump(ours["arrays"]["est"], ny, nx), max_jump(pk["arrays"]["est"], ny, nx)
                        print(f"    largest jump between adjacent nodes: ours {jo:.4g} V/m, pykrige C {jp:.4g} V/m")
                elif case == "global":
                    n, nx, ny = item
                    print(f"\n[global] ordinary kriging with std, {n} readings onto {nx}x{ny} nodes")
                    spec = {"nx": nx, "ny": ny}
                    ours = run_child(case, "ours", spec, data_for(n), tmp, args.timeout)
                    pk = run_child(case, "pykrige-vectorized", spec, data_for(n), tmp, args.timeout)
                    # GSTools' global kriging took 277 s at 2 000 readings in a trial run here.
                    gst = run_child(case, "gstools", spec, data_for(n), tmp, args.timeout) if n <= 1000 else None
                    if gst is None and n > 1000:
                        print("    gstools skipped above 1 000 readings (277 s at 2 000 in a trial run)")
                    ref = ours["wall_s"] if ours else None
                    report("ours", ours, ref)
                    for name, other in (("pykrige vectorized", pk), ("gstools", gst)):
                        if other and ours:
                            e = rel_diff(ours["arrays"]["est"], other["arrays"]["est"], zrange(n))
                            v = rel_diff(ours["arrays"]["var"], other["arrays"]["var"], total)
                            report(name, other, ref, f"max diff: est {e[0]:.1e}, var {v[0]:.1e}")
                        else:
                            report(name, other, ref)
                elif case == "loo":
                    n, refits = item
                    print(f"\n[loo] leave-one-out of ordinary kriging, {n} readings "
                          f"(PyKrige: {refits} refits, time scaled to {n})")
                    ours = run_child(case, "ours", {}, data_for(n), tmp, args.timeout)
                    pk = run_child(case, "pykrige-refit", {"refits": refits}, data_for(n), tmp, args.timeout)
                    ref = ours["wall_s"] if ours else None
                    report("ours (closed form)", ours, ref)
                    if pk:
                        pk["wall_s"] *= n / refits
                        e = v = (float("nan"),)
                        if ours:
                            e = rel_diff(ours["arrays"]["err"][:refits], pk["arrays"]["err"], zrange(n))
                            v = rel_diff(ours["arrays"]["var"][:refits], pk["arrays"]["var"], total)
                        report("pykrige refits", pk, ref, f"max diff: error {e[0]:.1e}, var {v[0]:.1e}")
                elif case == "loo_large":
                    n = item
                    print(f"\n[loo] closed-form leave-one-out alone, {n} readings (target under 5 s)")
                    report("ours (closed form)", run_child("loo", "ours", {}, data_for(n), tmp, args.timeout), None)
                elif case == "variogram":
                    n = item
                    print(f"\n[variogram] estimate and exponential fit, {n} readings "
                          f"(simulated with sill {SILL:g}, range {RANGE:g}, nugget {NUGGET:g})")
                    ours = run_child(case, "ours", {}, data_for(n), tmp, args.timeout)
                    pk = run_child(case, "pykrige", {}, data_for(n), tmp, args.timeout)
                    gst = run_child(case, "gstools", {}, data_for(n), tmp, args.timeout)
                    ref = ours["wall_s"] if ours else None
                    for name, info in (("ours", ours), ("pykrige", pk), ("gstools", gst)):
                        if info:
                            p = info["params"]
                            report(name, info, ref, f"sill {p[0]:.1f} range {p[1]:.1f} nugget {p[2]:.2f} "
                                                    f"converged={info['converged']}")
                elif case == "fast":
                    n = item
                    print(f"\n[fast] build_field(fast=True), {n} readings, terminal-app grid (target under 0.3 s)")
                    info = run_child(case, "ours", {}, data_for(n), tmp, args.timeout)
                    if info:
                        print(f"    median of 5: {info['median_s']:.3f} s onto {info['nodes']} nodes; "
                              f"peak {info['peak_mb']:.0f} MB")


if __name__ == "__main__":
    main()
