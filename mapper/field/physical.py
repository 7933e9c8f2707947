"""The physical field model: charged sources over a grounded floor, a background, a residual.

Near charged objects the vertical field is not a stationary random field: it is the field of a
few charges over a grounded floor (method of images, Griffiths, Introduction to Electrodynamics,
sec. 3.2.1), sharp near them and smooth elsewhere. :class:`PhysicalModel` explains the readings as

    E(x) = sum_k Q_k g_k(x; theta_k) + b0 + b1 x + b2 y + r(x)

where ``g_k`` is the field per coulomb of a source of a given shape (a point, a line along a
conveyor, a horizontal patch over a polygon asset) at height ``h_k`` with its image, ``Q_k`` its
total charge, ``b`` a plane background (outdoors the fair-weather field) and ``r`` a residual
interpolated by ordinary kriging.

Fitting
    Candidates are the site's assets (lines, points, polygons as patches) at a few heights (or
    the asset's own ``height_m``) and a lattice of point charges. Sources are added greedily
    (the candidate that most reduces the weighted residual sum of squares, exactly by
    projection), each addition followed by nonlinear least squares over every source's
    position and height (``scipy.optimize.least_squares``, charges and background solved
    linearly inside: variable projection, Golub & Pereyra 1973). A source is kept only when it
    lowers the Bayesian information criterion (Schwarz 1978), so there are never more sources
    than the readings support. The meter's error is modelled as ``a^2 + (rho m)^2`` (a floor
    plus a share of the source field, the usual form of a meter's stated accuracy; common
    practice, no source), estimated from the residuals and used as weights in a second pass.

Uncertainty
    The parameters' covariance ``s^2 (J^T J)^-1`` (J the weighted Jacobian in every position,
    height, charge and background parameter) propagated to each node, plus the residual's
    kriging variance scaled by the local error model. Leave-one-out errors use the leverages of
    the same Jacobian (the linearised leave-one-out of nonlinear least squares) together with
    the residual kriging's closed-form leave-one-out; they are not refits.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely
from scipy.optimize import least_squares, nnls
from scipy.spatial import cKDTree
from shapely.geometry.base import BaseGeometry

from mapper.errors import MapperError
from mapper.field import checks
from mapper.field.estimator import check_fitted
from mapper.field.kriging import OrdinaryKriging
from mapper.field.repeats import MERGE_TOL_M, merge_repeats
from mapper.physics.images import unit_kernel

#: Meter height assumed for readings that carry none, metres (common practice, no source).
DEFAULT_METER_HEIGHT_M = 1.0
#: Sources are kept this far above or below the meter, metres (our own choice: closer, the
#: quadrature of a source's field at a reading right beside it is not trusted).
HEIGHT_GAP_M = 0.25
#: Highest source considered, metres (our own choice: ceiling-mounted lines in a tall hall).
MAX_SOURCE_HEIGHT_M = 6.0
#: Lowest source (a charge on or in the floor covering), metres.
MIN_SOURCE_HEIGHT_M = 0.02
#: Most sources a model may hold (our own choice, no source).
MAX_SOURCES = 8
#: Readings per source parameter needed before a source is added (our own choice).
READINGS_PER_SOURCE = 10
#: Share of each reading taken as its error before the error model is fitted (from memory).
INITIAL_SHARE = 0.05
#: Fewest distinct positions for a source search: the background plane and one source.
MIN_POSITIONS = 8
#: Most lattice candidates tried at each step (coarser lattice on large sites; our own choice).
MAX_LATTICE = 800
#: Gauss-Legendre nodes along lines and across patches are spaced at half the smallest
#: source-to-meter distance the height bounds allow, at most this many per patch side (a line
#: gets four times as many); checked against the closed form in the tests.
MAX_NODES_PER_SIDE = 24


@dataclass(frozen=True)
class SourceSeed:
    """A candidate charged object from the site.

    Attributes
    ----------
    name : str
        Asset name.
    geometry : shapely geometry
        Point, line or polygon footprint, site metres.
    height_m : float or None
        Height above the floor when known, metres; otherwise fitted within bounds.
    """

    name: str
    geometry: BaseGeometry
    height_m: float | None = None


@dataclass(frozen=True)
class Source:
    """One fitted source of the model.

    Attributes
    ----------
    kind : str
        ``point``, ``line`` or ``patch``.
    asset : str or None
        The asset it stands for; None for a source found in the residual.
    geometry : shapely geometry
        Footprint in site metres (a point for point charges).
    charge_c, charge_std_c : float
        Total charge and its standard error, coulombs.
    height_m, height_std_m : float
        Height above the floor and its standard error (0 when given), metres.
    peak_v_per_m : float
        Largest |E_z| of this source alone at the meter height, V/m (signed).
    status : str
        ``asset`` (a listed asset) or ``unlisted`` (found in the residual).
    position_std_m : float or None
        Horizontal standard error of a point source's position, metres.
    """

    kind: str
    asset: str | None
    geometry: BaseGeometry
    charge_c: float
    charge_std_c: float
    height_m: float
    height_std_m: float
    peak_v_per_m: float
    status: str
    position_std_m: float | None = None

    def to_dict(self) -> dict:
        """JSON-ready description (SI units, geometry as WKT)."""
        return {
            "kind": self.kind, "asset": self.asset, "status": self.status,
            "charge_c": self.charge_c, "charge_std_c": self.charge_std_c,
            "height_m": self.height_m, "height_std_m": self.height_std_m,
            "peak_v_per_m": self.peak_v_per_m, "position_std_m": self.position_std_m,
            "wkt": self.geometry.wkt,
        }


class _Shape:
    """A source shape with its free parameters theta (position and/or height)."""

    def __init__(self, kind, asset, xy, w, moves, fixed_h, theta0, lo, hi, geometry):
        self.kind, self.asset, self.xy, self.w = kind, asset, xy, w
        self.moves, self.fixed_h, self.geometry = moves, fixed_h, geometry
        self.theta0, self.lo, self.hi = np.asarray(theta0, float), np.asarray(lo, float), np.asarray(hi, float)

    @property
    def size(self) -> int:
        return self.theta0.shape[0]

    def nodes(self, th):
        if self.moves:
            return (self.xy[:, 0] + th[0], self.xy[:, 1] + th[1], np.full(self.w.shape, th[2]), self.w)
        h = self.fixed_h if self.fixed_h is not None else th[0]
        return self.xy[:, 0], self.xy[:, 1], np.full(self.w.shape, h), self.w

    def column(self, th, x, y, z):
        return unit_kernel(*self.nodes(th), x, y, z)

    def height(self, th) -> float:
        if self.moves:
            return float(th[2])
        return float(self.fixed_h if self.fixed_h is not None else th[0])

    def with_theta(self, th) -> _Shape:
        return _Shape(self.kind, self.asset, self.xy, self.w, self.moves, self.fixed_h, th,
                      self.lo, self.hi, self.geometry)


def _bands(z0: float, gap: float = HEIGHT_GAP_M) -> list[tuple[float, float]]:
    """Height bands a source may lie in: below and above the meter, ``gap`` away, metres."""
    out = []
    if z0 - gap > MIN_SOURCE_HEIGHT_M + 0.01:
        out.append((MIN_SOURCE_HEIGHT_M, z0 - gap))
    out.append((z0 + gap, max(MAX_SOURCE_HEIGHT_M, z0 + gap + 1.0)))
    return out


def _line_nodes(geom, step: float) -> tuple[np.ndarray, np.ndarray]:
    parts = geom.geoms if hasattr(geom, "geoms") else [geom]
    xs, ws = [], []
    for part in parts:
        c = np.asarray(part.coords)[:, :2]
        for a, b in zip(c[:-1], c[1:], strict=True):
            length = float(np.hypot(*(b - a)))
            if length <= 0:
                continue
            k = min(MAX_NODES_PER_SIDE * 4, max(4, math.ceil(length / step)))
            t, w = np.polynomial.legendre.leggauss(k)
            s = (t + 1) / 2
            xs.append(a[None, :] + s[:, None] * (b - a)[None, :])
            ws.append(w / 2 * length)
    xy, w = np.concatenate(xs), np.concatenate(ws)
    return xy, w / w.sum()


def _patch_nodes(poly, step: float) -> tuple[np.ndarray, np.ndarray]:
    rect = poly.minimum_rotated_rectangle
    c = np.asarray(rect.exterior.coords)[:4, :2]
    u, v = c[1] - c[0], c[3] - c[0]
    lu, lv = float(np.hypot(*u)), float(np.hypot(*v))
    ku = min(MAX_NODES_PER_SIDE, max(4, math.ceil(lu / step)))
    kv = min(MAX_NODES_PER_SIDE, max(4, math.ceil(lv / step)))
    tu, wu = np.polynomial.legendre.leggauss(ku)
    tv, wv = np.polynomial.legendre.leggauss(kv)
    su, sv = (tu + 1) / 2, (tv + 1) / 2
    xy = c[0] + su[None, :, None] * u + sv[:, None, None] * v
    xy = xy.reshape(-1, 2)
    w = np.outer(wv, wu).ravel()
    inside = shapely.contains_xy(poly.buffer(1e-9), xy[:, 0], xy[:, 1])
    if not inside.any():
        inside[:] = True
    return xy[inside], w[inside] / w[inside].sum()


def _seed_shapes(seed: SourceSeed, z0: float, gap: float) -> list[_Shape]:
    """Candidate shapes for one asset: at its height, or at a few heights in each band."""
    g = seed.geometry
    if g.geom_type in ("Point", "MultiPoint"):
        p = g.centroid
        kind, xy, w = "point", np.array([[p.x, p.y]]), np.array([1.0])
    elif g.geom_type in ("LineString", "MultiLineString", "LinearRing"):
        kind, (xy, w) = "line", _line_nodes(g, gap / 2)
    elif g.geom_type in ("Polygon", "MultiPolygon") and g.area > 0:
        kind = "patch"
        poly = max(g.geoms, key=lambda p: p.area) if g.geom_type == "MultiPolygon" else g
        xy, w = _patch_nodes(poly, gap / 2)
    else:
        return []
    if seed.height_m is not None:
        return [_Shape(kind, seed.name, xy, w, False, float(seed.height_m), [], [], [], g)]
    out = []
    for lo, hi in _bands(z0, gap):
        for h in np.unique(np.clip([lo + 0.05, (lo + hi) / 2, lo + 0.3 * (hi - lo)], lo, hi)):
            out.append(_Shape(kind, seed.name, xy, w, False, None, [h], [lo], [hi], g))
    return out


def _lattice(bounds, spacing: float, z0: float, gap: float) -> list[_Shape]:
    minx, miny, maxx, maxy = bounds
    heights = [h for lo, hi in _bands(z0, gap) for h in (lo + 0.5 * min(0.5, hi - lo), min(hi, lo + 1.2))]
    per_level = max(1, MAX_LATTICE // len(heights))
    step = max(spacing, math.sqrt((maxx - minx) * (maxy - miny) / per_level))
    gx = np.arange(minx + step / 2, maxx, step)
    gy = np.arange(miny + step / 2, maxy, step)
    out = []
    band_of = {h: b for b in _bands(z0, gap) for h in [h for h in heights if b[0] <= h <= b[1]]}
    margin = step
    for h in heights:
        lo, hi = band_of[h]
        for x in gx:
            for y in gy:
                out.append(_Shape("point", None, np.zeros((1, 2)), np.ones(1), True, None, [x, y, h],
                                  [minx - margin, miny - margin, lo], [maxx + margin, maxy + margin, hi],
                                  shapely.Point(x, y)))
    return out


class PhysicalModel:
    """Charged sources over a grounded floor, a plane background and a kriged residual.

    Parameters
    ----------
    seeds : sequence of SourceSeed
        The site's assets that may carry charge.
    bounds : tuple of float, optional
        (minx, miny, maxx, maxy) where unlisted sources are searched, metres; default the
        readings' extent.
    search : bool
        Search the residual for unlisted point sources.
    max_sources : int
        Most sources kept.

    Attributes
    ----------
    sources_ : tuple of Source
        Fitted sources, largest |peak| first (after :meth:`fit`).
    noise_floor_v_per_m_, noise_share_ : float
        The fitted error model ``a`` (V/m) and ``rho`` (dimensionless).
    """

    name = "physics"

    def __init__(self, seeds=(), bounds=None, *, search: bool = True, max_sources: int = MAX_SOURCES,
                 merge_tol_m: float = MERGE_TOL_M) -> None:
        # Settings stored as given (checked in fit): the estimator contract of mapper.field.estimator.
        self.seeds = seeds
        self.bounds = bounds
        self.search = search
        self.max_sources = max_sources
        self.merge_tol_m = merge_tol_m

    def _check_settings(self) -> None:
        """Refuse settings that cannot work, naming them (called by :meth:`fit`)."""
        for s in self.seeds:
            if not isinstance(s, SourceSeed):
                raise MapperError(f"seeds must be SourceSeed, got {type(s).__name__}", where="PhysicalModel")
        m = self.max_sources
        if isinstance(m, bool) or not isinstance(m, int | np.integer) or m < 1:
            raise MapperError(f"max_sources must be an integer >= 1, got {m!r}", where="PhysicalModel")

    # ------------------------------------------------------------------ fitting
    def fit(self, xy, values, heights_m=None) -> PhysicalModel:
        """Fit sources, background, error model and residual kriging.

        Parameters
        ----------
        xy : array_like, shape (n, 2)
            Reading positions, metres.
        values : array_like, shape (n,)
            Readings, V/m (physics sign, upward positive).
        heights_m : array_like, shape (n,), optional
            Each reading's meter height above the floor, metres; NaN or missing means
            :data:`DEFAULT_METER_HEIGHT_M`.

        Returns
        -------
        self
        """
        where = "PhysicalModel.fit"
        self._check_settings()
        self.__dict__.pop("beta_", None)
        xy, v = checks.readings(xy, values, where, minimum=1)
        hz = np.full(v.shape, DEFAULT_METER_HEIGHT_M) if heights_m is None else np.asarray(heights_m, float)
        if hz.shape != v.shape:
            raise MapperError(f"heights_m must have one value per reading ({v.shape[0]}), got {hz.shape}", where=where)
        hz = np.where(np.isfinite(hz), hz, DEFAULT_METER_HEIGHT_M)
        if (hz <= 0).any():
            raise MapperError(f"meter heights must be above the floor; got {float(hz.min()):g} m", where=where)
        merged = merge_repeats(xy, v, self.merge_tol_m)
        n = merged.xy.shape[0]
        if n < MIN_POSITIONS:
            raise MapperError(
                f"the physical model needs readings at {MIN_POSITIONS} or more distinct positions to "
                f"search for sources; got {n}", where=where)
        checks.not_collinear(merged.xy, where, "the physical model's background plane")
        z = np.bincount(merged.group, hz, n) / merged.counts
        self.xy_, self.values_, self.z_ = merged.xy, merged.values, z
        self.height_m_ = float(np.median(z))
        x, y = self.xy_[:, 0], self.xy_[:, 1]
        lo, hi = self.xy_.min(axis=0), self.xy_.max(axis=0)
        self.centre_ = (lo + hi) / 2
        self.scale_ = float(max(np.max(hi - lo) / 2, 1e-9))
        bounds = tuple(self.bounds) if self.bounds is not None else (lo[0], lo[1], hi[0], hi[1])
        d, _ = cKDTree(self.xy_).query(self.xy_, k=2)
        self.spacing_m_ = float(np.median(d[:, 1]))
        # A source nearer the meter plane than a quarter of the reading spacing makes a field
        # narrower than the layout can resolve: it would explain one noisy reading (our own choice).
        self.gap_m_ = max(HEIGHT_GAP_M, self.spacing_m_ / 4)
        cands = [s for seed in self.seeds for s in _seed_shapes(seed, self.height_m_, self.gap_m_)]
        if self.search:
            cands += _lattice(bounds, self.spacing_m_, self.height_m_, self.gap_m_)
        self._cands = cands
        self._gc = np.column_stack([c.column(c.theta0, x, y, z) for c in cands]) if cands else np.zeros((n, 0))
        # Each shape's column at the readings, computed once (shapes are not changed in place:
        # a refined shape is a new one); the candidates' are the columns of _gc.
        self._cols = {id(c): (c, self._gc[:, k]) for k, c in enumerate(cands)}
        floor = max(1e-6 * float(np.max(np.abs(self.values_))), 1e-9)
        self._floor = floor
        # Starting error model: a floor of 5 % of the median |reading| and 5 % of each reading
        # (a handheld meter's stated accuracy is a few per cent of reading; from memory),
        # refined from the residuals after each pass.
        sigma = np.sqrt((0.05 * float(np.median(np.abs(self.values_)))) ** 2 + floor**2
                        + (INITIAL_SHARE * self.values_) ** 2)
        shapes: list[_Shape] = []
        for _ in range(2):
            shapes = self._select(sigma, shapes)
            m_src = self._source_field(shapes, x, y, z)
            r = self.values_ - self._predict_mean(shapes, self._beta(shapes, sigma), x, y, z)
            a2, rho2 = _error_model(r, m_src, floor)
            sigma = np.sqrt(a2 + rho2 * m_src**2)
        self.noise_floor_v_per_m_, self.noise_share_ = math.sqrt(a2), math.sqrt(rho2)
        self._finish(shapes, sigma)
        del self._cols
        return self

    def _column(self, shape, x, y, z):
        """A shape's field per coulomb at its parameters, at observers ``x, y, z`` (metres);
        kept during the fit when the observers are the readings (``z`` is ``z_``)."""
        cache = self.__dict__.get("_cols")
        if cache is None or z is not self.z_:
            return shape.column(shape.theta0, x, y, z)
        hit = cache.get(id(shape))
        if hit is None or hit[0] is not shape:
            hit = cache[id(shape)] = (shape, shape.column(shape.theta0, x, y, z))
        return hit[1]

    def _design(self, shapes, x, y, z):
        b = np.column_stack([np.ones(x.shape[0]), (x - self.centre_[0]) / self.scale_,
                             (y - self.centre_[1]) / self.scale_])
        g = [self._column(s, x, y, z) for s in shapes]
        return np.column_stack([b, *g]) if g else b

    def _beta(self, shapes, sigma):
        return self._solve(self._design(shapes, self.xy_[:, 0], self.xy_[:, 1], self.z_), sigma)

    def _solve(self, design, sigma):
        """Weighted least-squares charges and background for a design at the readings."""
        a = design / sigma[:, None]
        col = np.linalg.norm(a, axis=0)
        col[col == 0] = 1.0
        coef, *_ = np.linalg.lstsq(a / col, self.values_ / sigma, rcond=None)
        return coef / col

    def _predict_mean(self, shapes, beta, x, y, z):
        return self._design(shapes, x, y, z) @ beta

    def _source_field(self, shapes, x, y, z):
        if not shapes:
            return np.zeros(x.shape[0])
        beta = self._beta(shapes, np.ones(self.values_.shape[0])) if not hasattr(self, "beta_") else self.beta_
        g = np.column_stack([self._column(s, x, y, z) for s in shapes])
        return g @ beta[3:3 + len(shapes)]

    def _refine(self, shapes, sigma, free=None, budget: int = 40):
        """Nonlinear least squares over the free sources' parameters (variable projection).

        ``free`` lists the indices of the shapes whose parameters move (default all); the
        charges and background are solved linearly at every step.
        """
        free = list(range(len(shapes))) if free is None else list(free)
        free = [k for k in free if shapes[k].size]
        if not free:
            return shapes
        th0 = np.concatenate([shapes[k].theta0 for k in free])
        lo = np.concatenate([shapes[k].lo for k in free])
        hi = np.concatenate([shapes[k].hi for k in free])
        th0 = np.clip(th0, lo + 1e-9 * (hi - lo), hi - 1e-9 * (hi - lo))
        cuts = np.cumsum([0, *[shapes[k].size for k in free]])
        x, y, z = self.xy_[:, 0], self.xy_[:, 1], self.z_
        fixed = [k for k in range(len(shapes)) if k not in free]
        base = self._design([shapes[k] for k in fixed], x, y, z) / sigma[:, None]
        target = self.values_ / sigma

        def split(th):
            out = list(shapes)
            for j, k in enumerate(free):
                out[k] = shapes[k].with_theta(th[cuts[j]:cuts[j + 1]])
            return out

        last: dict[bytes, tuple] = {}

        def solve(th):
            # The Jacobian is asked at the point whose residuals were just computed: the
            # columns and the linear solve of the last point are kept for it (same numbers).
            key = np.asarray(th, float).tobytes()
            if key in last:
                return last[key]
            g = [shapes[k].column(th[cuts[j]:cuts[j + 1]], x, y, z) for j, k in enumerate(free)]
            a = np.column_stack([base, *g])
            a[:, base.shape[1]:] /= sigma[:, None]
            col = np.linalg.norm(a, axis=0)
            col[col == 0] = 1.0
            a /= col
            coef, *_ = np.linalg.lstsq(a, target, rcond=None)
            last.clear()
            last[key] = (a, coef, coef / col, g)
            return last[key]

        def resid(th):
            a, coef, _, _ = solve(th)
            return target - a @ coef

        def jac(th):
            # Kaufman's approximation of the variable-projection Jacobian: -(I - P) dA/dtheta beta,
            # with P the projection on the design's columns (Golub & Pereyra 2003, sec. 3).
            a, _, coef, g = solve(th)
            q, _ = np.linalg.qr(a)
            out = np.empty((x.shape[0], th.shape[0]))
            for j, k in enumerate(free):
                part = th[cuts[j]:cuts[j + 1]]
                qk = coef[base.shape[1] + j]
                for i in range(part.shape[0]):
                    step = 1e-6 * max(1.0, abs(part[i]))
                    t2 = part.copy()
                    t2[i] = min(t2[i] + step, shapes[k].hi[i]) if t2[i] + step <= shapes[k].hi[i] else t2[i] - step
                    d = shapes[k].column(t2, x, y, z)  # (d - g) / dt * qk / sigma, in place
                    d -= g[j]
                    d /= t2[i] - part[i]
                    d *= qk
                    d /= sigma
                    d -= q @ (q.T @ d)
                    np.negative(d, out=out[:, cuts[j] + i])
            return out

        sol = least_squares(resid, th0, jac=jac, bounds=(lo, hi), x_scale="jac", max_nfev=budget * len(th0))
        out = split(sol.x)
        cache = self.__dict__.get("_cols")
        hit = last.get(np.asarray(sol.x, float).tobytes())
        if cache is not None and hit is not None:  # the refined shapes' columns at the readings
            for j, k in enumerate(free):
                cache[id(out[k])] = (out[k], hit[3][j])
        return out

    def _score(self, shapes, sigma) -> float:
        """Bayesian information criterion of a set of sources (weighted residuals)."""
        n = self.values_.shape[0]
        design = self._design(shapes, self.xy_[:, 0], self.xy_[:, 1], self.z_)
        r = self.values_ - design @ self._solve(design, sigma)
        # Floor: a fit cannot be better than the readings' resolution (1e-6 of the largest).
        rss = max(float(np.sum((r / sigma) ** 2)), float(np.sum((self._floor / sigma) ** 2)))
        p = 3 + sum(1 + s.size for s in shapes)
        return n * math.log(max(rss, 1e-300) / n) + p * math.log(n)

    def _select(self, sigma, start=()) -> list[_Shape]:
        """Greedy forward selection from ``start`` (refined first under the new weights)."""
        n = self.values_.shape[0]
        shapes: list[_Shape] = self._refine(list(start), sigma, budget=10) if start else []
        used_assets: set[str] = {sh.asset for sh in shapes if sh.asset is not None}
        best = self._score(shapes, sigma)
        cap = min(self.max_sources, max(0, (n - 3) // READINGS_PER_SOURCE // 2))
        full2 = _weighted_norms2(self._gc, sigma) if self._gc.shape[1] else np.zeros(0)
        while len(shapes) < cap and self._gc.shape[1]:
            a = self._design(shapes, self.xy_[:, 0], self.xy_[:, 1], self.z_) / sigma[:, None]
            q, _ = np.linalg.qr(a / np.linalg.norm(a, axis=0))
            r = self.values_ / sigma
            r = r - q @ (q.T @ r)
            gain = _gains(self._gc, sigma, q, r, full2)
            for k, c in enumerate(self._cands):
                if c.asset is not None and c.asset in used_assets:
                    gain[k] = 0.0
            k = int(np.argmax(gain))
            if gain[k] <= 0:
                break
            trial = self._refine([*shapes, self._cands[k]], sigma, free=[len(shapes)])
            score = self._score(trial, sigma)
            if score >= best - 2.0:  # BIC must drop by more than 2 ("positive" evidence, Kass & Raftery 1995)
                break
            if len(trial) > 1:
                trial = self._refine(trial, sigma, budget=10)
                score = min(score, self._score(trial, sigma))
            shapes, best = trial, score
            if self._cands[k].asset is not None:
                used_assets.add(self._cands[k].asset)
        return shapes

    def _finish(self, shapes, sigma) -> None:
        x, y, z = self.xy_[:, 0], self.xy_[:, 1], self.z_
        n = x.shape[0]
        self.shapes_ = shapes
        self.sigma_ = sigma
        self.beta_ = self._beta(shapes, sigma)
        self.resid_ = self.values_ - self._predict_mean(shapes, self.beta_, x, y, z)
        jac = self._jacobian(x, y, z) / sigma[:, None]
        p = jac.shape[1]
        dof = max(n - p, 1)
        self.s2_ = float(np.sum((self.resid_ / sigma) ** 2) / dof)
        colscale = np.linalg.norm(jac, axis=0)
        colscale[colscale == 0] = 1.0
        js = jac / colscale
        self.cov_ = self.s2_ * np.linalg.pinv(js.T @ js) / np.outer(colscale, colscale)
        q, _ = np.linalg.qr(js)
        self.leverage_ = np.clip(np.sum(q * q, axis=1), 0.0, 0.999)
        a = self.noise_floor_v_per_m_
        self.rel_ = sigma / a
        u = self.resid_ / self.rel_
        self.kriging_ = None
        self.kriging_note_ = ""
        try:
            self.kriging_ = OrdinaryKriging(neighbors=None if n <= 1000 else 32).fit(self.xy_, u)
        except (MapperError, np.linalg.LinAlgError) as exc:
            self.kriging_note_ = f"residual treated as uncorrelated noise ({getattr(exc, 'message', exc)})"
        self.sources_ = self._inventory()

    # --------------------------------------------------------------- products
    def _theta(self) -> np.ndarray:
        return np.concatenate([s.theta0 for s in self.shapes_]) if self.shapes_ else np.zeros(0)

    def _jacobian(self, x, y, z) -> np.ndarray:
        """d model / d (theta, beta) at the given observers (forward differences in theta, one
        source at a time: only that source's column changes)."""
        cols = []
        for k, sh in enumerate(self.shapes_):
            if not sh.size:
                continue
            q = self.beta_[3 + k]
            base = self._column(sh, x, y, z)
            for j in range(sh.size):
                step = 1e-5 * max(1.0, abs(sh.theta0[j]))
                t2 = sh.theta0.copy()
                t2[j] += step
                cols.append(q * (sh.column(t2, x, y, z) - base) / step)
        design = self._design(self.shapes_, x, y, z)
        return np.column_stack([*cols, design]) if cols else design

    def _rel_at(self, x, y, z) -> np.ndarray:
        a, rho = self.noise_floor_v_per_m_, self.noise_share_
        m = self._source_field(self.shapes_, x, y, z)
        return np.sqrt(1.0 + (rho * m / a) ** 2)

    def predict(self, targets, height_m: float | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Estimate and standard deviation of the vertical field at ``targets``.

        Parameters
        ----------
        targets : array_like, shape (m, 2)
            Positions, metres.
        height_m : float, optional
            Height above the floor, metres; default the readings' median meter height. The
            residual is carried unchanged to another height (our own choice: it is what the
            sources do not explain, and nothing tells how it varies with height).

        Returns
        -------
        est, std : ndarray, shape (m,)
            V/m; the standard deviation is that of a new reading there.
        """
        check_fitted(self, "predict")
        t = checks.points(targets, "PhysicalModel.predict", "targets")
        hz = self.height_m_ if height_m is None else float(height_m)
        est = np.empty(t.shape[0])
        var = np.empty(t.shape[0])
        for start in range(0, t.shape[0], 20000):
            sl = slice(start, start + 20000)
            x, y = t[sl, 0], t[sl, 1]
            z = np.full(x.shape, hz)
            jac = self._jacobian(x, y, z)
            mean = self._design(self.shapes_, x, y, z) @ self.beta_
            vp = np.einsum("ij,jk,ik->i", jac, self.cov_, jac)
            rel = self._rel_at(x, y, z)
            if self.kriging_ is not None:
                ue, us = self.kriging_.predict(t[sl])
            else:
                ue, us = np.zeros(x.shape), np.full(x.shape, self.noise_floor_v_per_m_ * math.sqrt(self.s2_))
            est[sl] = mean + rel * ue
            var[sl] = np.maximum(vp, 0) + (rel * us) ** 2
        return est, np.sqrt(var)

    def loo(self, at=None) -> tuple[np.ndarray, np.ndarray]:
        """Leave-one-out errors and standard deviations at the (merged) reading positions.

        Linearised: the parameters' leverages ``h_ii`` give the left-out error of the physical
        part, ``r_i / (1 - h_ii)``; the residual's is kriging's closed-form leave-one-out.

        Returns
        -------
        error, std : ndarray, shape (m,)
            Left-out estimate minus reading, and its standard deviation, V/m.
        """
        check_fitted(self, "loo")
        ids = np.arange(self.values_.shape[0]) if at is None else np.asarray(at, dtype=np.int64)
        h = self.leverage_[ids]
        r = self.resid_[ids]
        rel = self.rel_[ids]
        if self.kriging_ is not None:
            eu, su = self.kriging_.loo(ids)
        else:
            u = self.resid_ / self.rel_
            eu, su = -u[ids], np.full(ids.shape, self.noise_floor_v_per_m_ * math.sqrt(self.s2_))
        err = rel * eu - r * h / (1 - h)
        var = (rel * su) ** 2 + (self.sigma_[ids] ** 2) * self.s2_ * h / (1 - h)
        return err, np.sqrt(var)

    def near_sources(self, at=None) -> np.ndarray:
        """True for (merged) positions near a fitted source: within twice its height plus the
        reading spacing, horizontally (our own choice, no source)."""
        ids = np.arange(self.values_.shape[0]) if at is None else np.asarray(at, dtype=np.int64)
        near = np.zeros(ids.shape, bool)
        px, py = self.xy_[ids, 0], self.xy_[ids, 1]
        for s in self.sources_:
            reach = 2 * s.height_m + self.spacing_m_
            near |= shapely.dwithin(s.geometry, shapely.points(px, py), reach)
        return near

    def _inventory(self) -> tuple[Source, ...]:
        out = []
        nth = self._theta().shape[0]
        pos = 0
        for k, s in enumerate(self.shapes_):
            q = float(self.beta_[3 + k])
            q_std = float(math.sqrt(max(self.cov_[nth + 3 + k, nth + 3 + k], 0.0)))
            sub = slice(pos, pos + s.size)
            cov_t = self.cov_[sub, sub]
            pos += s.size
            h = s.height(s.theta0)
            if s.moves:
                geom = shapely.Point(float(s.theta0[0]), float(s.theta0[1]))
                h_std = float(math.sqrt(max(cov_t[2, 2], 0.0)))
                p_std = float(math.sqrt(max(cov_t[0, 0] + cov_t[1, 1], 0.0)))
            else:
                geom = s.geometry
                h_std = float(math.sqrt(max(cov_t[0, 0], 0.0))) if s.size else 0.0
                p_std = None
            sx, sy, _, _ = s.nodes(s.theta0)
            f = s.column(s.theta0, sx, sy, np.full(sx.shape, self.height_m_)) * q
            peak = float(f[np.argmax(np.abs(f))])
            out.append(Source(s.kind, s.asset, geom, q, q_std, h, h_std, peak,
                              "asset" if s.asset else "unlisted", p_std))
        out.sort(key=lambda s: -abs(s.peak_v_per_m))
        return tuple(out)

    def describe(self) -> dict:
        """JSON-ready parameters of the fitted model (sources, background, error model)."""
        return {
            "sources": [s.to_dict() for s in self.sources_],
            "background_v_per_m": float(self.beta_[0]),
            "background_gradient_v_per_m2": [float(self.beta_[1] / self.scale_), float(self.beta_[2] / self.scale_)],
            "noise_floor_v_per_m": self.noise_floor_v_per_m_,
            "noise_share": self.noise_share_,
            "meter_height_m": self.height_m_,
            "residual": self.kriging_.variogram_.describe() if self.kriging_ is not None else self.kriging_note_,
        }


#: A candidate whose part outside the current design's span holds less than this share of its
#: squared norm has that part computed explicitly (our own choice: below it, the difference of
#: squared norms loses more than a few digits to cancellation).
SPAN_TOL = 1e-6


def _weighted_norms2(gc: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    """Squared norms of the weighted candidate columns ``gc / sigma`` (row blocks, no full copy)."""
    out = np.zeros(gc.shape[1])
    rows = max(1, 2**21 // max(gc.shape[1], 1))
    for start in range(0, gc.shape[0], rows):
        block = gc[start:start + rows] / sigma[start:start + rows, None]
        np.square(block, out=block)
        out += block.sum(axis=0)
    return out


def _gains(gc: np.ndarray, sigma: np.ndarray, q: np.ndarray, r: np.ndarray, full2: np.ndarray) -> np.ndarray:
    """Drop of the weighted residual sum of squares from adding each candidate alone.

    With ``G = gc / sigma`` the weighted candidates, ``q`` an orthonormal basis of the weighted
    design and ``r`` the weighted residual (orthogonal to ``q``), the projection of candidate
    ``k`` off the design is ``g_k = G_k - q q^T G_k``; its gain is ``(g_k^T r)^2 / ||g_k||^2``
    (the exact least-squares drop of adding one column). Both are formed from ``q^T G``
    (design columns x candidates) without the projected copy of ``G``: ``g_k^T r = G_k^T r -
    (q^T G_k)^T (q^T r)`` and ``||g_k||^2 = ||G_k||^2 - ||q^T G_k||^2`` (Pythagoras). Candidates
    almost in the design's span, where the difference cancels, are projected explicitly.

    Parameters
    ----------
    gc : ndarray, shape (n, m)
        Candidate columns at the readings, V/m per C.
    sigma : ndarray, shape (n,)
        Reading errors, V/m.
    q : ndarray, shape (n, p)
        Orthonormal basis of the weighted design.
    r : ndarray, shape (n,)
        Weighted residual (dimensionless).
    full2 : ndarray, shape (m,)
        ``||G_k||^2`` (:func:`_weighted_norms2`).

    Returns
    -------
    ndarray, shape (m,)
        Gains (dimensionless); 0 for candidates in the design's span.
    """
    qs = q / sigma[:, None]
    qg = qs.T @ gc
    num = gc.T @ (r / sigma) - qg.T @ (q.T @ r)
    norm2 = full2 - np.einsum("ij,ij->j", qg, qg)
    close = np.flatnonzero(norm2 <= SPAN_TOL * full2)
    if close.size:
        g = gc[:, close] / sigma[:, None]
        g -= q @ (q.T @ g)
        norm2[close] = np.einsum("ij,ij->j", g, g)
        num[close] = g.T @ r
    return np.where(norm2 > 1e-12 * np.max(norm2 + 1e-300), num**2 / np.maximum(norm2, 1e-300), 0.0)


def _error_model(r: np.ndarray, m: np.ndarray, floor: float) -> tuple[float, float]:
    """Fit ``r^2 ~ a^2 + rho^2 m^2`` by non-negative least squares; ``a >= floor`` (V/m)."""
    a = np.column_stack([np.ones(r.shape[0]), m * m])
    scale = np.maximum(np.abs(a).max(axis=0), 1e-300)
    coef, _ = nnls(a / scale, r * r)
    a2, rho2 = coef / scale
    a2 = max(float(a2), floor * floor)
    return a2, min(float(rho2), 0.25)


def seeds_from_site(site) -> tuple[SourceSeed, ...]:
    """Every asset of a site as a candidate source, with its ``height_m`` where given."""
    return tuple(SourceSeed(a.name, a.geometry, getattr(a, "height_m", None)) for a in site.assets)


__all__ = ["DEFAULT_METER_HEIGHT_M", "PhysicalModel", "Source", "SourceSeed", "seeds_from_site"]
