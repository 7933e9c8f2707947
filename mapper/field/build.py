"""From readings and a site outline to a :class:`FieldGrid`: the call the CLI and app make."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import shapely
from scipy.spatial import cKDTree

from mapper.errors import MapperError
from mapper.field import checks
from mapper.field.crossval import cv_stats
from mapper.field.empirical import EmpiricalVariogram, empirical_variograms
from mapper.field.fit import VariogramFit, default_n_lags, fit_model, fit_variogram
from mapper.field.idw import IDW
from mapper.field.kriging import OrdinaryKriging, UniversalKriging
from mapper.field.model import CVStats, FieldGrid
from mapper.field.physical import MIN_POSITIONS as PHYSICS_MIN_POSITIONS
from mapper.field.physical import PhysicalModel, SourceSeed
from mapper.field.rbf import RBF, _cv_subset
from mapper.field.repeats import merge_repeats
from mapper.field.settings import (
    BorrowedStd,
    CalibrationStats,
    FieldSettings,
    IDWSettings,
    KrigingSettings,
    LocalScale,
    LooSplit,
    MethodSettings,
    PhysicsSettings,
    RBFSettings,
    SplitStats,
    VariogramChoice,
    VariogramFitSummary,
)
from mapper.field.threads import blas_threads, free_cores
from mapper.field.uncertainty import LOCAL_NEIGHBOURS, LOCAL_PRIOR, calibrate_std, local_scale
from mapper.field.variogram import Variogram
from mapper.nice import nice_ceiling

#: Methods accepted by :func:`build_field`.
METHODS = ("auto", "kriging", "universal", "rbf", "idw", "physics")
#: Default grid is capped at this many nodes (cell widened to fit).
MAX_NODES = 250_000
#: A grid asked for with more nodes than this is refused.
HARD_MAX_NODES = 4_000_000
#: Nodes of the terminal app's fast-path grid (about 100 x 60).
FAST_NODES = 6_000
#: Moving neighbourhood size when one is needed and none was given.
DEFAULT_NEIGHBORS = 32
#: A kriging candidate within this fraction of the best LOO RMSE is preferred, since it also
#: gives a standard deviation (common practice, no source).
KRIGING_PREFERENCE = 0.02
_FIT_MODELS = ("exponential", "spherical", "gaussian")
#: Positions left out in turn when the fitted variogram models are compared (fixed-seed subset).
VARIOGRAM_CHOICE_POSITIONS = 500
#: Methods that give no standard deviation of their own; theirs is calibrated kriging's
#: (:mod:`mapper.field.uncertainty`).
NO_STD_METHODS = ("rbf", "idw")
_WHERE = "build_field"




def _threads_for(est) -> int:
    """OpenBLAS threads for an estimator's fit, predict and leave-one-out.

    Only the global kriging solves (one n x n factorisation, triangular solves with many
    right-hand sides) gain from a second thread, and only on a core no other program keeps busy
    (:func:`mapper.field.threads.free_cores`). Everything else is stacks of small systems or
    tall, narrow least squares, where the extra threads cost more than they bring: the physical
    model's fit of 20 000 readings took 29 s on 2 threads and 9 s on 1, measured
    (benchmarks/README.md).
    """
    return free_cores() if isinstance(est, OrdinaryKriging | UniversalKriging) and est.neighbors is None else 1


def data_spacing(xy: np.ndarray) -> float:
    """Median distance from each position to its nearest other position, metres."""
    if xy.shape[0] < 2:
        return 0.0
    d, _ = cKDTree(xy).query(xy, k=2)
    return float(np.median(d[:, 1]))


def default_cell(xy: np.ndarray, bounds: tuple[float, float, float, float], max_nodes: int) -> float:
    """Cell size: a third of the data spacing, widened to keep the grid under ``max_nodes``.

    A third of the spacing resolves what the readings can show (common practice, no source).
    """
    w, h = bounds[2] - bounds[0], bounds[3] - bounds[1]
    spacing = data_spacing(xy)
    cell = spacing / 3.0 if spacing > 0 else max(w, h) / 100.0
    cell = max(cell, math.sqrt(w * h / max_nodes))
    cell = nice_ceiling(cell)
    while math.ceil(w / cell) * math.ceil(h / cell) > max_nodes:
        cell = nice_ceiling(cell * 1.01)
    return cell


def grid_axes(bounds: tuple[float, float, float, float], cell_m: float) -> tuple[np.ndarray, np.ndarray]:
    """Cell-centre coordinates covering ``bounds`` (minx, miny, maxx, maxy), metres."""
    nx = max(1, math.ceil((bounds[2] - bounds[0]) / cell_m - 1e-9))
    ny = max(1, math.ceil((bounds[3] - bounds[1]) / cell_m - 1e-9))
    return bounds[0] + cell_m * (np.arange(nx) + 0.5), bounds[1] + cell_m * (np.arange(ny) + 0.5)


def _plane_residuals(xy: np.ndarray, z: np.ndarray) -> np.ndarray:
    a = np.column_stack([np.ones(xy.shape[0]), xy - xy.mean(axis=0)])
    coef, *_ = np.linalg.lstsq(a, z, rcond=None)
    return z - a @ coef


def _empirical(merged, kinds) -> dict[str, EmpiricalVariogram]:
    """The empirical variogram each kriging kind fits its models to, found in one pass over the pairs.

    Ordinary kriging fits the readings, universal kriging their residuals from a plane; both come
    from the same pairs (:func:`mapper.field.empirical.empirical_variograms`), exactly as
    :func:`mapper.field.fit.fit_variogram` would bin each alone.
    """
    kinds = [k for k in kinds if k in ("kriging", "universal")]
    if not kinds:
        return {}
    cols = [merged.values if k == "kriging" else _plane_residuals(merged.xy, merged.values) for k in kinds]
    emps = empirical_variograms(merged.xy, cols, n_lags=default_n_lags(merged.xy.shape[0]))
    return dict(zip(kinds, emps, strict=True))


def _fit(xy: np.ndarray, z: np.ndarray, values: np.ndarray, kind: str, fast: bool,
         emp: EmpiricalVariogram | None = None) -> tuple[VariogramFit, dict | None]:
    """Fit the variogram models to ``z`` and keep the one whose kriging predicts best.

    Each of :data:`_FIT_MODELS` is fitted to the empirical variogram of ``z`` (the readings, or
    their residuals from a plane for universal kriging); the one kept gives the lowest
    leave-one-out RMSE of ``kind`` kriging of ``values`` with the :data:`DEFAULT_NEIGHBORS`
    nearest readings, on up to :data:`VARIOGRAM_CHOICE_POSITIONS` positions. Cross-validation is
    the usual way to compare variogram models (Isaaks & Srivastava 1989, ch. 15 "Cross
    validation"; Cressie 1993, sec. 2.6; chapter and section from memory); the goodness of fit to the binned
    semivariance cannot see the behaviour below
    the first lag bin (the data spacing), which decides how kriging weights the nearest readings.
    The fast path fits the exponential model only. ``emp``, the empirical variogram of ``z`` when
    already found (:func:`_empirical`), is shared by all the model fits; otherwise it is found
    here, once. Returns the fit and a record of the choice.
    """
    if fast:
        return fit_variogram(xy, z, "exponential", max_pairs=200_000), None
    if emp is None:
        emp = empirical_variograms(xy, [z], n_lags=default_n_lags(xy.shape[0]))[0]
    fits = [fit_model(emp, m) for m in _FIT_MODELS]
    n = xy.shape[0]
    at = _cv_subset(n, VARIOGRAM_CHOICE_POSITIONS)
    nb = DEFAULT_NEIGHBORS if n > DEFAULT_NEIGHBORS + 1 else None
    cls = OrdinaryKriging if kind == "kriging" else UniversalKriging
    rmse = {}
    for f in fits:
        try:
            err, _ = cls(variogram=f.variogram, neighbors=nb).fit(xy, values).loo(at)
            r = float(np.sqrt(np.mean(err**2)))
        except (MapperError, np.linalg.LinAlgError):
            r = math.inf
        rmse[f.variogram.model] = r if math.isfinite(r) else math.inf
    if all(math.isinf(r) for r in rmse.values()):
        best, by = max(fits, key=lambda f: f.r2), "largest R² (no model could be cross-validated)"
    else:
        best = min(fits, key=lambda f: (rmse[f.variogram.model], -f.r2))
        by = (f"lowest leave-one-out RMSE of {'ordinary' if kind == 'kriging' else 'universal'} kriging, "
              f"{nb or 'all'} nearest readings, {at.shape[0]} positions")
    choice = {
        "by": by,
        "loo_rmse_v_per_m": {m: (r if math.isfinite(r) else None) for m, r in rmse.items()},
        "r2": {f.variogram.model: f.r2 for f in fits},
    }
    return best, choice


def _kriging_setup(kind, merged, variogram, neighbors, n_targets, cell, spacing, fast, emp=None):
    """Build an unfitted kriging estimator and its settings (variogram and neighbourhood).

    ``emp``: the empirical variogram to fit the models to, when already found (:func:`_empirical`).
    """
    n = merged.xy.shape[0]
    fit = choice = None
    if variogram is None:
        z = merged.values if kind == "kriging" else _plane_residuals(merged.xy, merged.values)
        fit, choice = _fit(merged.xy, z, merged.values, kind, fast, emp)
        variogram = fit.variogram
    if neighbors is None:
        small = n <= DEFAULT_NEIGHBORS or (not fast and n <= 3000 and n * n * max(n_targets, 1) <= 3e10)
        neighbors = None if small else DEFAULT_NEIGHBORS
    cls = OrdinaryKriging if kind == "kriging" else UniversalKriging
    est = cls(variogram=variogram, neighbors=neighbors)
    settings = KrigingSettings(
        variogram=variogram,
        variogram_text=variogram.describe(),
        variogram_fit=None if fit is None else VariogramFitSummary.of(fit),
        variogram_choice=None if choice is None else VariogramChoice.from_dict(choice),
        neighbors=neighbors,
        nugget_as_error=False,
        drift="linear" if kind == "universal" else None,
    )
    return est, settings


def _reference_kriging(candidates, kinds, xy, z, merged, variogram, neighbors, n_targets, cell, spacing, fast, at, loo):
    """Ordinary kriging behind the calibrated standard deviation, and its leave-one-out std.

    The ``auto`` candidate is reused (not fitted twice); otherwise one is fitted here, exactly as
    ``method="kriging"`` would be. Returns (estimator, settings, loo_std), or a note saying why not.
    """
    if merged.xy.shape[0] < 3:
        return "fewer than 3 distinct positions leave nothing to cross-validate"
    if "kriging" in candidates:
        est, settings = candidates["kriging"]
        return est, settings, loo["kriging"][1]
    if "kriging" in kinds:  # tried and skipped; the reason already says why
        return "ordinary kriging could not be fitted"
    try:
        est, settings = _kriging_setup("kriging", merged, variogram, neighbors, n_targets, cell, spacing, fast)
        with blas_threads(_threads_for(est)):
            est.fit(xy, z)
            return est, settings, est.loo(at)[1]
    except MapperError as exc:
        return f"ordinary kriging could not be fitted ({exc.message})"


def _calibrated_std(chosen, ref, chosen_loo, chosen_cv, targets, at_xy):
    """Kriging std scaled to the chosen method's leave-one-out errors (see :mod:`.uncertainty`).

    Returns the std at ``targets`` (NaN when no calibration is possible), where it comes from
    (:class:`BorrowedStd`), the chosen method's CV statistics with standardised errors filled in (or None), and
    a phrase for the reason text.
    """
    nan = np.full(targets.shape[0], np.nan)
    if isinstance(ref, str):
        note = ref
    elif chosen_loo is None:
        note = "fewer than 3 distinct positions leave nothing to cross-validate"
    else:
        kr, ksettings, loo_std = ref
        # Relative to the readings' spread, 1e-9 is far above the rounding noise of an exact
        # reproduction (RBF on a plane: LOO errors ~1e-16 of the spread, measured) and far below
        # any real meter's resolution (our own choice).
        cal = calibrate_std(chosen_loo[0], loo_std, atol_v_per_m=1e-9 * float(np.ptp(kr.values_)))
        note = cal.note
        if cal.ok:
            with blas_threads(_threads_for(kr)):
                _, ks = kr.predict(targets)
            # Local level: the scale near each node from the nearby leave-one-out errors, then
            # one factor c so that the standardised errors have RMS 1 again (by construction).
            e, sd = np.asarray(chosen_loo[0], float), np.asarray(loo_std, float)
            ok = np.isfinite(e) & np.isfinite(sd) & (sd > 0)
            u = e[ok] / sd[ok]
            l_at = local_scale(at_xy[ok], u, at_xy[ok], cal.scale, leave_self_out=True)
            zl = u / l_at
            c = float(np.sqrt(np.mean(zl**2)))
            zl = zl / c
            local = c * local_scale(at_xy[ok], u, targets, cal.scale)
            cal = dataclasses.replace(cal, mean_standardized=float(np.mean(zl)), rms_standardized=1.0,
                                      within_95=float(np.mean(np.abs(zl) <= 1.959963984540054)))
            source = (
                f"ordinary kriging standard deviation scaled by s = {cal.scale:.3g} so that {chosen}'s "
                f"leave-one-out standardized errors have RMS 1 (by construction, over {cal.n} positions; "
                f"their mean is {cal.mean_standardized:+.3f} and {cal.within_95:.0%} lie within +-1.96, "
                "about 0 and 95 % when the uncertainty is honest), set locally from the nearest "
                f"{LOCAL_NEIGHBOURS} leave-one-out errors (factor {float(local.min()):.2g}-{float(local.max()):.2g})"
            )
            borrowed = BorrowedStd(
                source=source,
                scale=cal.scale,
                calibration=CalibrationStats(n=cal.n, mean_standardized=cal.mean_standardized,
                                             rms_standardized=cal.rms_standardized, within_95=cal.within_95),
                reference=ksettings,
                local=LocalScale(neighbours=LOCAL_NEIGHBOURS, prior=LOCAL_PRIOR, c=c,
                                 min_factor=float(local.min()), max_factor=float(local.max())),
            )
            cv = None
            if chosen_cv is not None:
                cv = dataclasses.replace(chosen_cv, mean_standardized=cal.mean_standardized,
                                         rms_standardized=cal.rms_standardized)
            text = (f"standard deviation from calibrated kriging: ordinary kriging's scaled locally "
                    f"(site-wide s = {cal.scale:.3g}, from the nearest {LOCAL_NEIGHBOURS} leave-one-out errors) "
                    f"so that {chosen}'s standardised leave-one-out errors have RMS 1 (by construction)")
            return local * ks, borrowed, cv, text
    return nan, BorrowedStd(source=f"none: {note}", scale=None), None, f"no standard deviation: {note}"


def _loo_split(est: PhysicalModel, at: np.ndarray, err: np.ndarray, std: np.ndarray) -> LooSplit:
    """Leave-one-out statistics for readings near the fitted sources and for the rest."""
    near = est.near_sources(at)
    out = {}
    for name, mask in (("near_sources", near), ("quiet", ~near)):
        ok = mask & (std > 0)
        zz = err[ok] / std[ok]
        out[name] = SplitStats(
            n=int(mask.sum()),
            rmse_v_per_m=float(np.sqrt(np.mean(err[mask] ** 2))) if mask.any() else None,
            rms_standardized=float(np.sqrt(np.mean(zz**2))) if zz.size else None,
            mean_standardized=float(np.mean(zz)) if zz.size else None,
        )
    return LooSplit(**out)


@dataclasses.dataclass(frozen=True)
class _Nodes:
    """The grid: axes, the nodes inside the outline and their positions (step 1 of build_field)."""

    gx: np.ndarray
    gy: np.ndarray
    inside: np.ndarray
    targets: np.ndarray
    cell: float
    bounds: tuple[float, float, float, float]


def _check_inputs(xy, values, outline, method, neighbors, variogram, fast, heights_m, height_m):
    """Refuse what cannot work, naming it; returns the checked readings and heights."""
    xy, z = checks.readings(xy, values, _WHERE, minimum=1)
    if variogram is not None and not isinstance(variogram, Variogram):
        raise MapperError(f"variogram must be a Variogram, got {type(variogram).__name__}", where=_WHERE)
    if not isinstance(outline, shapely.Polygon | shapely.MultiPolygon) or outline.is_empty or outline.area <= 0:
        raise MapperError(
            f"outline must be a non-empty shapely Polygon or MultiPolygon in site metres, got {outline!r:.80}",
            where=_WHERE,
        )
    if neighbors is not None and (isinstance(neighbors, bool) or int(neighbors) < 3):
        raise MapperError(f"neighbors must be an integer >= 3, got {neighbors!r}", where=_WHERE)
    if height_m is not None:
        height_m = checks.positive(height_m, "prediction height height_m (metres above the floor)", _WHERE)
        if method not in ("physics", "auto"):
            raise MapperError(
                f"a field at another height needs the physical model (method physics); method {method} "
                "interpolates at the meter's height only", where=_WHERE)
        if fast:
            raise MapperError("the fast path cannot predict at another height", where=_WHERE)
    if heights_m is not None:
        heights_m = np.asarray(heights_m, dtype=float)
        if heights_m.shape != z.shape:
            raise MapperError(f"heights_m must have one value per reading ({z.shape[0]}), "
                              f"got shape {heights_m.shape}", where=_WHERE)
    return xy, z, heights_m, height_m


def _grid(outline, positions: np.ndarray, cell_m: float | None, fast: bool) -> _Nodes:
    """Step 1: the grid over the outline (cell from the data spacing unless given, metres)."""
    bounds = tuple(float(b) for b in outline.bounds)
    if cell_m is None:
        cell = default_cell(positions, bounds, FAST_NODES if fast else MAX_NODES)
    else:
        cell = checks.positive(cell_m, "cell size cell_m (metres)", _WHERE)
        count = math.ceil((bounds[2] - bounds[0]) / cell) * math.ceil((bounds[3] - bounds[1]) / cell)
        if count > HARD_MAX_NODES:
            raise MapperError(
                f"cell {cell:g} m gives {count} grid nodes over the outline; at most "
                f"{HARD_MAX_NODES} are accepted (use a larger cell)",
                where=_WHERE,
            )
    gx, gy = grid_axes(bounds, cell)
    mx, my = np.meshgrid(gx, gy)
    inside = shapely.contains_xy(outline, mx, my)
    targets = np.column_stack([mx[inside], my[inside]])
    if targets.shape[0] == 0:
        raise MapperError(
            f"cell {cell:g} m leaves no grid node inside the site outline "
            f"({bounds[2] - bounds[0]:.3g} m x {bounds[3] - bounds[1]:.3g} m); use a smaller cell",
            where=_WHERE,
        )
    return _Nodes(gx, gy, inside, targets, cell, bounds)


def _candidate_kinds(method: str, fast: bool, n: int, height_m: float | None) -> list[str]:
    """Step 2a: which methods compete."""
    if method == "auto" and height_m is not None:
        return ["physics"]
    if method == "auto":
        kinds = ["kriging"] if fast else ["kriging", "universal", "rbf", "idw"]
        if not fast and n >= PHYSICS_MIN_POSITIONS:
            kinds.append("physics")
        return kinds
    return [method]


def _candidates(kinds, method, fast, xy, z, merged, variogram, neighbors, nodes: _Nodes, spacing, seeds,
                heights_m) -> tuple[dict[str, tuple[object, MethodSettings]], list[str]]:
    """Step 2b: each candidate fitted (for ``auto``, one that cannot be fitted is skipped and noted)."""
    n = merged.xy.shape[0]
    notes: list[str] = []
    candidates: dict[str, tuple[object, MethodSettings]] = {}
    emps = {}
    if variogram is None and not fast and n >= 2:
        try:
            emps = _empirical(merged, kinds)
        except MapperError:  # each kind then meets (and notes) the same error in its own fit
            emps = {}
    for kind in kinds:
        try:
            if kind in ("kriging", "universal"):
                est, settings = _kriging_setup(kind, merged, variogram, neighbors, nodes.targets.shape[0],
                                               nodes.cell, spacing, fast, emps.get(kind))
            elif kind == "rbf":
                nb = neighbors if neighbors is not None else (None if n <= 1000 else 64)
                est, settings = RBF(neighbors=nb), RBFSettings(kernel="thin_plate_spline", neighbors=nb)
            elif kind == "physics":
                est = PhysicalModel(seeds or (), bounds=nodes.bounds).fit(xy, z, heights_m)
                settings = PhysicsSettings.from_description(est.describe())
            else:
                nb = neighbors if neighbors is not None else 16
                est, settings = IDW(neighbors=nb), IDWSettings(power=2.0, neighbors=nb)
            if kind != "physics":
                with blas_threads(_threads_for(est)):
                    est.fit(xy, z)
        except MapperError as exc:
            if method != "auto":
                raise
            notes.append(f"{kind} skipped: {exc.message}")
            continue
        if kind == "rbf":
            settings = dataclasses.replace(settings, smoothing=est.smoothing_)
        candidates[kind] = (est, settings)
    if not candidates and fast and method == "auto":
        # Early in a walk there are too few pairs for a variogram: the app still gets a map.
        est = IDW().fit(xy, z)
        candidates["idw"] = (est, IDWSettings(power=2.0, neighbors=est.neighbors))
    if not candidates:
        raise MapperError("no method could be fitted: " + "; ".join(notes), where=_WHERE)
    return candidates, notes


def _cross_validate(candidates, at: np.ndarray, n: int) -> tuple[dict, list[CVStats]]:
    """Step 3: leave-one-out errors of every candidate at the same positions ``at`` (of ``n``)."""
    table: list[CVStats] = []
    loo: dict[str, tuple[np.ndarray, np.ndarray | None]] = {}
    if n >= 3:
        for kind, (est, _) in candidates.items():
            with blas_threads(_threads_for(est)):
                loo[kind] = est.loo(at)
            table.append(cv_stats(kind, *loo[kind]))
    return loo, table


def _select(candidates, table: list[CVStats], method: str, fast: bool) -> tuple[str, str]:
    """Step 4: the chosen method and why (lowest leave-one-out RMSE, kriging preferred when close)."""
    if len(candidates) == 1:
        chosen = next(iter(candidates))
        if fast and method == "auto":
            name = "ordinary kriging" if chosen == "kriging" else "inverse-distance weighting"
            return chosen, f"fast path: {name} without method comparison"
        return chosen, f"method {chosen} requested"
    best = min(table, key=lambda c: c.rmse_v_per_m)
    chosen = best.method
    reason = f"{chosen}: lowest leave-one-out RMSE {best.rmse_v_per_m:.4g} V/m"
    if chosen in ("rbf", "idw"):
        krig = [c for c in table if c.method in ("kriging", "universal")]
        if krig:
            kb = min(krig, key=lambda c: c.rmse_v_per_m)
            if kb.rmse_v_per_m <= best.rmse_v_per_m * (1 + KRIGING_PREFERENCE):
                chosen = kb.method
                reason = (
                    f"{chosen}: leave-one-out RMSE {kb.rmse_v_per_m:.4g} V/m, within "
                    f"{KRIGING_PREFERENCE:.0%} of {best.method} ({best.rmse_v_per_m:.4g} V/m) and it "
                    "also gives a standard deviation"
                )
    others = ", ".join(f"{c.method} {c.rmse_v_per_m:.4g}" for c in table if c.method != chosen)
    return chosen, reason + f" (others: {others} V/m)"


def _assemble(nodes: _Nodes, est: np.ndarray, std: np.ndarray, chosen: str, settings: FieldSettings, cv, table,
              reason: str) -> FieldGrid:
    """Step 6: the estimate and std onto the full grid (NaN outside the outline)."""
    shape = (nodes.gy.shape[0], nodes.gx.shape[0])
    estimate = np.full(shape, np.nan)
    sd = np.full(shape, np.nan)
    estimate[nodes.inside] = est
    sd[nodes.inside] = std
    return FieldGrid(x=nodes.gx, y=nodes.gy, estimate=estimate, std=sd, method=chosen, settings=settings,
                     cv=cv, cv_table=tuple(table), reason=reason)


def build_field(
    xy,
    values,
    outline,
    *,
    method: str = "auto",
    cell_m: float | None = None,
    neighbors: int | None = None,
    variogram: Variogram | None = None,
    fast: bool = False,
    heights_m=None,
    seeds: tuple[SourceSeed, ...] | None = None,
    height_m: float | None = None,
) -> FieldGrid:
    """Interpolate readings onto a grid over the site outline.

    Parameters
    ----------
    xy : array_like, shape (n, 2)
        Reading positions, site metres.
    values : array_like, shape (n,)
        Readings, V/m.
    outline : shapely Polygon or MultiPolygon
        Site outline, site metres; estimates are NaN outside it.
    method : str
        ``auto`` (lowest leave-one-out RMSE, see :data:`KRIGING_PREFERENCE`), ``kriging``
        (ordinary), ``universal`` (linear drift), ``rbf`` (thin-plate spline) or ``idw``.
    cell_m : float, optional
        Grid cell, metres; default from the data spacing, capped to :data:`MAX_NODES` nodes.
    neighbors : int, optional
        Moving neighbourhood size; default global for small problems, else 32 (kriging),
        64 (RBF), 16 (IDW).
    variogram : Variogram, optional
        Used as is (no fitting) by the kriging methods.
    fast : bool
        Terminal app path: about 100 x 60 nodes, ordinary kriging (for ``auto``), cheap
        variogram fit, moving neighbourhood, no method comparison.
    heights_m : array_like, shape (n,), optional
        Each reading's meter height above the floor, metres (NaN: unknown); used by
        ``physics``.
    seeds : tuple of SourceSeed, optional
        The site's assets as candidate charged objects (``physics``).
    height_m : float, optional
        Predict the field at this height above the floor instead of the meter's, metres;
        only the ``physics`` method can (the others know nothing of height).

    Returns
    -------
    FieldGrid
        For ``rbf`` and ``idw``, which give no standard deviation of their own, ``std`` is
        ordinary kriging's (the ``auto`` candidate, or one fitted here) scaled so that the
        method's leave-one-out standardised errors have RMS 1 (:mod:`mapper.field.uncertainty`);
        ``settings.std.source`` says so and ``settings.std.scale`` holds the factor, and the
        chosen method's ``cv`` carries the standardised errors after scaling (RMS 1 by
        construction; the mean stays informative). Where kriging cannot be fitted ``std`` stays
        NaN and ``settings.std.source`` and ``reason`` say why.

    Notes
    -----
    Named steps: the grid (:func:`_grid`), the candidates (:func:`_candidate_kinds`,
    :func:`_candidates`), cross-validation (:func:`_cross_validate`), selection (:func:`_select`),
    calibration of a borrowed standard deviation (:func:`_calibrated_std`), assembly
    (:func:`_assemble`).
    """
    # One BLAS thread, but for the global kriging solves (:func:`_threads_for`).
    with blas_threads(1):
        method = checks.choose(method, METHODS, "method", _WHERE)
        xy, z, heights_m, height_m = _check_inputs(xy, values, outline, method, neighbors, variogram, fast,
                                                   heights_m, height_m)
        merged = merge_repeats(xy, z)
        nodes = _grid(outline, merged.xy, cell_m, fast)
        spacing = data_spacing(merged.xy)
        kinds = _candidate_kinds(method, fast, merged.xy.shape[0], height_m)
        candidates, notes = _candidates(kinds, method, fast, xy, z, merged, variogram, neighbors, nodes, spacing,
                                        seeds, heights_m)
        at = _cv_subset(merged.xy.shape[0], 300 if fast else 2000)
        loo, table = _cross_validate(candidates, at, merged.xy.shape[0])
        chosen, reason = _select(candidates, table, method, fast)
        if notes:
            reason += "; " + "; ".join(notes)
        est, method_settings = candidates[chosen]
        if chosen == "physics":
            e, s = est.predict(nodes.targets, height_m)
            method_settings = dataclasses.replace(
                method_settings, prediction_height_m=est.height_m_ if height_m is None else height_m,
                loo_split=_loo_split(est, at, *loo["physics"]) if "physics" in loo else None)
            if height_m is not None:
                reason += f"; field predicted at {height_m:g} m above the floor (readings at {est.height_m_:g} m)"
        else:
            with blas_threads(_threads_for(est)):
                e, s = est.predict(nodes.targets)
        by_kind = {c.method: c for c in table}
        borrowed = None
        if chosen in NO_STD_METHODS:
            # calibrate: the borrowed, locally scaled kriging standard deviation
            ref = _reference_kriging(candidates, kinds, xy, z, merged, variogram, neighbors, nodes.targets.shape[0],
                                     nodes.cell, spacing, fast, at, loo)
            s, borrowed, cv_chosen, text = _calibrated_std(chosen, ref, loo.get(chosen), by_kind.get(chosen),
                                                           nodes.targets, merged.xy[at])
            reason += "; " + text
            if cv_chosen is not None:
                by_kind[chosen] = cv_chosen
                table = [cv_chosen if c.method == chosen else c for c in table]
        settings = FieldSettings(
            estimator=method_settings,
            cell_m=nodes.cell,
            n_readings=int(xy.shape[0]),
            n_positions=int(merged.xy.shape[0]),
            repeatability_v_per_m=merged.repeatability_v_per_m,
            data_spacing_m=spacing,
            fast=bool(fast),
            std=borrowed,
        )
        return _assemble(nodes, e, s, chosen, settings, by_kind.get(chosen), table, reason)
