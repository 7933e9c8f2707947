"""Golden figures of the bundled sample survey: what the command line, the exports and the app give.

:func:`collect` builds the North Hall sample survey (``sample_sites/``) as the main-job test does,
runs ``mapper grid``, ``hotspots --json`` and ``export`` on it, reads back the stored field model,
the GeoPackage, the GeoTIFF's tags and the report's pages as text, fits each method of the field
engine in turn and runs the app's live refit. The figures are this program's own earlier output
(a regression pin, not an outside reference): :mod:`tests.cli.test_golden` compares them with
``golden_sample.json``.

Regenerate the fixture (only when a change of figures is intended, and say why in the commit)::

    PYTHONPATH=. python -m tests.cli.golden
"""

from __future__ import annotations

import json
import math
import re
import sqlite3
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_sites"
FIXTURE = Path(__file__).with_name("golden_sample.json")
#: Relative tolerance of floating-point figures: the computation is deterministic, so only
#: rounding-order noise is allowed (common practice, no source).
REL = 1e-9
#: Absolute tolerance, for figures that are zero up to rounding (V/m, metres, or unitless).
ABS = 1e-9
#: Methods fitted one by one (``auto`` is what ``mapper grid`` stores).
METHODS = ("kriging", "universal", "rbf", "idw", "physics")
#: Time stamps of the run itself (when the model was made, the export or report written).
_STAMP = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?(\+00:00|Z)?|\d{4}-\d\d-\d\d \d\d:\d\d UTC")


def mapper(*args, cwd: Path) -> subprocess.CompletedProcess:
    r = subprocess.run([sys.executable, "-m", "mapper", *map(str, args)], capture_output=True, text=True, cwd=cwd)
    if r.returncode != 0:
        raise RuntimeError(f"mapper {' '.join(map(str, args))} failed: {r.stderr}")
    return r


def _plain(value):
    """JSON-ready copy: numpy scalars and arrays to Python, tuples to lists, time stamps masked."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, str):
        return _STAMP.sub("<time>", value)
    return value


def _array_stats(a) -> dict:
    a = np.asarray(a, dtype=float)
    ok = np.isfinite(a)
    if not ok.any():
        return {"shape": list(a.shape), "finite": 0}
    v = a[ok]
    return {"shape": list(a.shape), "finite": int(ok.sum()), "min": float(v.min()), "max": float(v.max()),
            "mean": float(v.mean()), "rms": float(np.sqrt(np.mean(v**2))),
            "argmax_abs": int(np.flatnonzero(ok)[np.argmax(np.abs(v))])}


def _cv(c) -> dict | None:
    from dataclasses import asdict

    return None if c is None else _plain(asdict(c))


def stored_params(data: bytes) -> dict:
    """The settings object of a stored field model, as written in the file (``params``)."""
    import io

    with np.load(io.BytesIO(data), allow_pickle=False) as npz:
        return json.loads(npz["meta"].tobytes().decode("utf-8"))["params"]


def grid_figures(grid) -> dict:
    """The field model's figures: method, reason, parameters as stored, CV and the arrays' statistics."""
    from mapper.field import field_from_bytes, field_to_bytes

    grid = field_from_bytes(field_to_bytes(grid))  # what a survey file keeps
    stored = stored_params(field_to_bytes(grid))
    return {
        "method": grid.method,
        "reason": grid.reason,
        "cell_m": grid.cell_m,
        "nx": len(grid.x), "ny": len(grid.y),
        "x0": float(grid.x[0]), "y0": float(grid.y[0]),
        "params": _plain(stored),
        "cv": _cv(grid.cv),
        "cv_table": [_cv(c) for c in grid.cv_table],
        "estimate": _array_stats(grid.estimate),
        "std": _array_stats(grid.std),
    }


def _geometry(wkt: str) -> dict:
    import shapely

    g = shapely.from_wkt(wkt)
    return {"type": g.geom_type, "area": g.area, "length": g.length, "bounds": list(g.bounds)}


def _hotspots_json(text: str) -> dict:
    data = json.loads(text)
    data["file"] = "<file>"

    def walk(v):
        if isinstance(v, dict):
            return {k: (_geometry(x) if k == "wkt" and isinstance(x, str) else walk(x)) for k, x in v.items()}
        if isinstance(v, list):
            return [walk(x) for x in v]
        return v

    return _plain(walk(data))


#: Layers whose attribute tables are pinned row by row (the others by count and column statistics).
_FULL_LAYERS = ("hotspots", "probable_exceedance", "violations", "advice", "sources", "zones", "contours")


#: Tables read elsewhere (the metadata) or not about the figures (stored styles): rows only.
_COUNT_ONLY = ("survey_metadata", "layer_styles")
#: Columns about this run (when the readings were imported), not about the survey.
_RUN_COLUMNS = ("recorded_utc",)


def _layer(path: Path, name: str) -> dict:
    import pyogrio

    if name in _COUNT_ONLY:
        return {"rows": len(pyogrio.read_dataframe(path, layer=name, read_geometry=False))}
    df = pyogrio.read_dataframe(path, layer=name)
    df = df.drop(columns=[c for c in _RUN_COLUMNS if c in df.columns])
    out: dict = {"rows": len(df), "columns": [c for c in df.columns if c != "geometry"]}
    if "geometry" in df.columns and len(df):
        geom = df.geometry
        out["area"] = float(geom.area.sum())
        out["length"] = float(geom.length.sum())
        out["bounds"] = [float(b) for b in geom.total_bounds]
    if name in _FULL_LAYERS:
        out["records"] = _plain(json.loads(df.drop(columns="geometry", errors="ignore").to_json(orient="records")))
    else:
        stats = {}
        for c in out["columns"]:
            col = df[c]
            if col.dtype.kind in "fiu":
                stats[c] = _array_stats(col.to_numpy(dtype=float))
            else:
                stats[c] = {"distinct": sorted({str(v) for v in col})[:20]}
        out["stats"] = _plain(stats)
    return out


def gpkg_figures(path: Path) -> dict:
    import pyogrio

    layers = {name: _layer(path, name) for name, _ in pyogrio.list_layers(path)}
    con = sqlite3.connect(path)
    try:
        meta = con.execute("SELECT section, key, value, unit FROM survey_metadata").fetchall()
    finally:
        con.close()
    skip = {("survey", "exported"), ("survey", "mapper_version")}
    rows = [list(r) for r in meta if (r[0], r[1]) not in skip and r[0] != "cautions"]
    return {"layers": layers, "metadata": _plain(rows)}


def tif_figures(path: Path) -> dict:
    import rasterio

    with rasterio.open(path) as src:
        tags = src.tags()
        bands = [_array_stats(src.read(i)) for i in (1, 2)]
    return {"method": tags["method"], "cell_m": tags["cell_m"], "reason": tags["reason"],
            "params": _plain(json.loads(tags["params"])), "bands": bands}


def report_figures(survey_path: Path) -> dict:
    """Every text the report's findings (and sources) pages print, in drawing order."""
    import matplotlib
    from matplotlib.figure import Figure
    from matplotlib.text import Text

    from mapper.export import report
    from mapper.workflow import survey_file_products

    products = survey_file_products(survey_path)
    pages = {}
    with matplotlib.rc_context(report.RC):
        for name, draw in (("findings", report.draw_findings_page), ("sources", report.draw_sources_page)):
            fig = Figure(figsize=report.PAGE_SIZE_IN)
            draw(fig, products)
            texts = [t.get_text() for t in fig.findobj(Text)]
            pages[name] = _plain([t for t in texts if t.strip()])
    pages["method_text"] = report.method_text(products)
    return pages


def methods_figures(survey_path: Path) -> dict:
    """Each method of the field engine on the sample's corrected readings, and a given variogram."""
    from mapper.corrections.pipeline import correct_survey
    from mapper.field import Variogram
    from mapper.survey.store import Survey
    from mapper.workflow import build_survey_field

    with Survey.open(survey_path) as survey:
        site, corrected = survey.site, correct_survey(survey).readings
    out = {m: grid_figures(build_survey_field(site, corrected, method=m)) for m in METHODS}
    given = Variogram(model="spherical", sill=2.0e6, range=8.0, nugget=1.0e4)
    out["kriging_given_variogram"] = grid_figures(build_survey_field(site, corrected, method="kriging",
                                                                     variogram=given))
    out["physics_at_0.7m"] = grid_figures(build_survey_field(site, corrected, method="physics", height_m=0.7))
    return out


def live_figures(survey_path: Path) -> dict:
    """The app's live refit (:func:`mapper.workflow.live_products`) on every reading of the sample."""
    from mapper.survey.store import Survey
    from mapper.workflow import live_products, load_meters

    with Survey.open(survey_path) as survey:
        readings = survey.readings(kind=None)
        site, threshold, points = survey.site, survey.threshold_v_per_m, survey.plan.points
        meters = load_meters(survey)
        unit = survey.display_unit
    r = live_products(readings, site, threshold, points, meters=meters, unit=unit)
    return {
        "engine": r.engine,
        "readings": r.readings,
        "notes": list(r.notes),
        "hotspot_count": r.hotspot_count,
        "hotspots": [_plain({"id": h.id, "polarity": h.polarity, "status": h.status, "area_m2": h.area_m2,
                             "peak_v_per_m": h.peak_v_per_m, "peak_x": h.peak_x, "peak_y": h.peak_y,
                             "mean_v_per_m": h.mean_v_per_m, "reading_ids": list(h.reading_ids)})
                     for h in r.hotspots],
        "suggestions": [_plain({"label": s.label, "x": s.x, "y": s.y, "why": s.why}) for s in r.suggestions],
        "grid": grid_figures(r.grid),
    }


def collect(tmp: Path) -> dict:
    """All golden figures, computed in the folder ``tmp``."""
    from mapper.field import field_from_bytes
    from mapper.survey.store import Survey

    survey = tmp / "hall.survey"
    mapper("new", survey.name, "--site", SAMPLES / "north_hall.toml", "--spacing", "2", "--unit", "kV/m", cwd=tmp)
    mapper("import", survey.name, SAMPLES / "north_hall_readings.csv", cwd=tmp)
    live = live_figures(survey)
    grid_out = mapper("grid", survey.name, cwd=tmp).stdout
    with Survey.open(survey) as s:
        summary, data, _ = s.latest_field()
    stored = grid_figures(field_from_bytes(data))
    hotspots = _hotspots_json(mapper("hotspots", survey.name, "--json", cwd=tmp).stdout)
    mapper("export", survey.name, "out.gpkg", cwd=tmp)
    return {
        "grid_stdout": grid_out.splitlines(),
        "grid_summary": _plain(summary),
        "stored_field": stored,
        "hotspots_json": hotspots,
        "gpkg": gpkg_figures(tmp / "out.gpkg"),
        "tif": tif_figures(tmp / "out.tif"),
        "report": report_figures(survey),
        "methods": methods_figures(survey),
        "live": live,
    }


def differences(want, got, where: str = "") -> list[str]:
    """Where ``got`` differs from ``want``: floats beyond :data:`REL` / :data:`ABS`, all else exactly."""
    if isinstance(want, dict) and isinstance(got, dict):
        out = []
        if set(want) != set(got):
            out.append(f"{where}: keys {sorted(set(want) ^ set(got))} differ")
        for k in want.keys() & got.keys():
            out += differences(want[k], got[k], f"{where}.{k}")
        return out
    if isinstance(want, list) and isinstance(got, list):
        if len(want) != len(got):
            return [f"{where}: length {len(got)} != {len(want)}"]
        return [d for i, (a, b) in enumerate(zip(want, got, strict=True)) for d in differences(a, b, f"{where}[{i}]")]
    if isinstance(want, float) and isinstance(got, int | float) and not isinstance(got, bool):
        if math.isnan(want) and math.isnan(got):
            return []
        if math.isclose(want, got, rel_tol=REL, abs_tol=ABS):
            return []
        return [f"{where}: {got!r} != {want!r}"]
    if type(want) is not type(got) and not (isinstance(want, int) and isinstance(got, float) and want == got):
        return [f"{where}: {got!r} ({type(got).__name__}) != {want!r} ({type(want).__name__})"]
    return [] if want == got else [f"{where}: {got!r} != {want!r}"]


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        figures = collect(Path(tmp))
    FIXTURE.write_text(json.dumps(figures, indent=1, allow_nan=True) + "\n", encoding="utf-8")
    print(f"wrote {FIXTURE} ({FIXTURE.stat().st_size} bytes)")


if __name__ == "__main__":
    main()
