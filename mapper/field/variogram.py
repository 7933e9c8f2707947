"""Variogram models with nugget and geometric anisotropy.

Conventions (shared by every method in :mod:`mapper.field`):

* ``sill`` is the partial sill above the nugget, (V/m)^2.
* ``range`` is the range of the spherical model and the *practical* range of the exponential,
  gaussian and Matérn models: the lag where the correlation falls to exp(-3) (about 5 %, i.e.
  95 % of the sill is reached), along the major axis, metres.
* ``angle`` is the azimuth of the major axis, degrees counter-clockwise from +x; ``ratio`` is
  major range / minor range (>= 1).
* The nugget is a discontinuity at the origin: gamma(0) = 0 and gamma(h) >= nugget for h > 0.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from functools import lru_cache

import numpy as np

from mapper.errors import MapperError
from mapper.field.checks import choose, positive

#: Models accepted by :class:`Variogram`.
MODELS = ("spherical", "exponential", "gaussian", "matern", "linear")
#: Models with a sill (and therefore a covariance).
BOUNDED = ("spherical", "exponential", "gaussian", "matern")
_WHERE = "Variogram"
_E3 = float(np.exp(-3.0))


def _matern_corr_unit(u: np.ndarray, nu: float) -> np.ndarray:
    """Matérn correlation 2^(1-nu)/Gamma(nu) u^nu K_nu(u) for scaled lag ``u`` >= 0."""
    from scipy.special import gammaln, kv  # the Matérn model only: loaded when used

    u = np.asarray(u, dtype=float)
    out = np.ones_like(u)
    pos = u > 0
    up = u[pos]
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        val = np.exp((1.0 - nu) * np.log(2.0) - gammaln(nu) + nu * np.log(up)) * kv(nu, up)
    val = np.where(np.isfinite(val), val, 0.0)
    out[pos] = np.clip(val, 0.0, 1.0)
    return out


@lru_cache(maxsize=64)
def matern_practical_factor(nu: float) -> float:
    """Scaled lag where the Matérn correlation of smoothness ``nu`` equals exp(-3).

    The Matérn length scale is ``range / matern_practical_factor(nu)``; for nu = 0.5 the factor
    is exactly 3, so the Matérn model then equals the exponential model.
    """
    if nu == 0.5:
        return 3.0
    from scipy.optimize import brentq

    return float(brentq(lambda s: _matern_corr_unit(np.array([s]), nu)[0] - _E3, 1e-6, 200.0))


@dataclass(frozen=True)
class Variogram:
    """A variogram model with nugget and geometric anisotropy.

    Parameters
    ----------
    model : str
        One of :data:`MODELS`.
    sill : float, optional
        Partial sill above the nugget, (V/m)^2; required for bounded models.
    range : float, optional
        Range (spherical) or practical range (exponential, gaussian, matern) along the major
        axis, metres; required for bounded models.
    nugget : float
        Nugget, (V/m)^2, >= 0.
    angle : float
        Azimuth of the major axis, degrees counter-clockwise from +x.
    ratio : float
        Major range / minor range, >= 1.
    nu : float
        Matérn smoothness (0.5 = exponential; large = gaussian-like); used by ``matern`` only.
    slope : float, optional
        Slope of the linear model, (V/m)^2 per metre; required for ``linear``.
    """

    model: str
    sill: float | None = None
    range: float | None = None
    nugget: float = 0.0
    angle: float = 0.0
    ratio: float = 1.0
    nu: float = 1.5
    slope: float | None = None

    def __post_init__(self) -> None:
        model = choose(self.model, MODELS, "variogram model", _WHERE)
        object.__setattr__(self, "model", model)
        object.__setattr__(self, "nugget", positive(self.nugget, "nugget", _WHERE, allow_zero=True))
        try:
            angle = float(self.angle)
        except (TypeError, ValueError):
            raise MapperError(f"angle must be a number of degrees, got {self.angle!r}", where=_WHERE) from None
        if not np.isfinite(angle):
            raise MapperError(f"angle must be finite degrees, got {self.angle!r}", where=_WHERE)
        object.__setattr__(self, "angle", angle)
        ratio = positive(self.ratio, "anisotropy ratio", _WHERE)
        if ratio < 1.0:
            raise MapperError(
                f"anisotropy ratio is major/minor range and must be >= 1, got {ratio!r} "
                "(swap the axes: add 90 degrees to the angle and use 1/ratio)",
                where=_WHERE,
            )
        object.__setattr__(self, "ratio", ratio)
        if model == "linear":
            object.__setattr__(self, "slope", positive(self.slope, "slope of the linear model", _WHERE))
            object.__setattr__(self, "sill", None)
            object.__setattr__(self, "range", None)
        else:
            object.__setattr__(self, "sill", positive(self.sill, f"sill of the {model} model", _WHERE))
            object.__setattr__(self, "range", positive(self.range, f"range of the {model} model", _WHERE))
            object.__setattr__(self, "slope", None)
        nu = positive(self.nu, "Matérn smoothness nu", _WHERE)
        if nu > 20.0:
            raise MapperError(f"Matérn smoothness nu must be in (0, 20], got {nu!r}", where=_WHERE)
        object.__setattr__(self, "nu", nu)

    # ----------------------------------------------------------------------------- properties
    @property
    def bounded(self) -> bool:
        """True when the model has a sill (a covariance exists)."""
        return self.model in BOUNDED

    @property
    def total_sill(self) -> float:
        """Nugget + partial sill, (V/m)^2 (the variance far from data); inf for linear."""
        return float(self.nugget + self.sill) if self.bounded else float("inf")

    # ----------------------------------------------------------------------------- geometry
    def transform(self, xy: np.ndarray) -> np.ndarray:
        """Map positions so that Euclidean distance equals the anisotropic lag.

        Rotates by ``-angle`` so the major axis lies along x and stretches the minor axis by
        ``ratio``; distances are then in major-axis metres.
        """
        xy = np.asarray(xy, dtype=float)
        if self.ratio == 1.0:
            return xy
        a = np.deg2rad(self.angle)
        c, s = np.cos(a), np.sin(a)
        u = xy[..., 0] * c + xy[..., 1] * s
        v = (-xy[..., 0] * s + xy[..., 1] * c) * self.ratio
        return np.stack([u, v], axis=-1)

    def lags(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Anisotropic lag distances between every row of ``a`` and ``b``, metres."""
        from scipy.spatial.distance import cdist

        return cdist(self.transform(a), self.transform(b))

    # ----------------------------------------------------------------------------- values
    def _exponent_into(self, h: np.ndarray) -> np.ndarray:
        """The exponent of the exponential or gaussian correlation, in the memory of ``h``.

        ``-3 h / range`` or ``-3 (h / range)^2`` (practical range: correlation 0.05 at ``range``).
        """
        if self.model == "gaussian":
            h *= h
            h *= -3.0 / (self.range * self.range)
        else:
            h *= -3.0 / self.range
        return h

    def correlation(self, h: np.ndarray) -> np.ndarray:
        """Correlation of the structured part at anisotropic lag ``h`` (metres); bounded only."""
        h = np.asarray(h, dtype=float)
        if self.model in ("exponential", "gaussian"):
            return np.exp(self._exponent_into(h.copy()))
        r = h / self.range
        if self.model == "spherical":
            rc = np.minimum(r, 1.0)
            return 1.0 - rc * (1.5 - 0.5 * rc * rc)
        if self.model == "matern":
            return _matern_corr_unit(r * matern_practical_factor(self.nu), self.nu)
        raise MapperError("the linear model has no correlation function", where=_WHERE)

    def structured(self, h: np.ndarray) -> np.ndarray:
        """Semivariance without the nugget at lag ``h`` (metres), (V/m)^2."""
        h = np.asarray(h, dtype=float)
        if self.model == "linear":
            return self.slope * h
        return self.sill * (1.0 - self.correlation(h))

    def __call__(self, h: np.ndarray) -> np.ndarray:
        """Semivariance gamma(h) at anisotropic lag ``h`` (metres), nugget included for h > 0."""
        h = np.asarray(h, dtype=float)
        g = self.structured(h)
        if self.nugget:  # structured(0) is 0 for every model, so only the nugget needs masking
            g = np.where(h > 0, g + self.nugget, 0.0)
        return g

    def semivariance_into(self, h: np.ndarray) -> np.ndarray:
        """gamma(h) computed in the memory of ``h`` (which is overwritten), for the hot loops."""
        if self.model not in ("exponential", "gaussian"):
            return self(h)
        zero = h <= 0 if self.nugget else None
        np.exp(self._exponent_into(h), out=h)
        h *= -self.sill
        h += self.sill + self.nugget
        if zero is not None:
            np.copyto(h, 0.0, where=zero)
        return h

    def covariance_into(
        self, h: np.ndarray, *, with_nugget: bool, zero: tuple[np.ndarray, np.ndarray] | None = None
    ) -> np.ndarray:
        """Covariance at lags ``h`` computed in the memory of ``h`` (overwritten); nugget at h = 0.

        ``zero`` optionally lists the (row, column) indices where ``h`` is 0 (found beforehand),
        which saves a pass over ``h`` looking for them.
        """
        nugget = with_nugget and self.nugget > 0
        if nugget and zero is None:
            zero = np.nonzero(h <= 0)
        if self.model in ("exponential", "gaussian") and self.sill > 0:
            # sill * exp(x) as exp(x + ln sill): one pass fewer over the block.
            self._exponent_into(h)
            h += np.log(self.sill)
            np.exp(h, out=h)
        else:
            h = self.sill * self.correlation(h)
        if nugget:
            h[zero] += self.nugget
        return h

    def covariance(self, h: np.ndarray) -> np.ndarray:
        """Covariance C(h) = total sill - gamma(h), (V/m)^2; bounded models only."""
        if not self.bounded:
            raise MapperError("the linear model has no covariance", where=_WHERE)
        h = np.asarray(h, dtype=float)
        return self.sill * self.correlation(h) + np.where(h > 0, 0.0, self.nugget)

    # ----------------------------------------------------------------------------- storage
    def to_dict(self) -> dict:
        """JSON-ready description; :meth:`from_dict` restores it."""
        d = asdict(self)
        if self.model == "linear":
            d.pop("sill")
            d.pop("range")
            d.pop("nu")
        else:
            d.pop("slope")
            if self.model != "matern":
                d.pop("nu")
        return d

    @classmethod
    def from_dict(cls, d: dict) -> Variogram:
        """Rebuild a variogram from :meth:`to_dict` output."""
        if not isinstance(d, dict) or "model" not in d:
            raise MapperError(f"a variogram needs a dict with a 'model' key, got {d!r}", where=_WHERE)
        known = {"model", "sill", "range", "nugget", "angle", "ratio", "nu", "slope"}
        extra = set(d) - known
        if extra:
            raise MapperError(
                f"unknown variogram key(s) {sorted(extra)}; accepted: {sorted(known)}", where=_WHERE
            )
        return cls(**d)

    def describe(self) -> str:
        """One line for reports, e.g. ``exponential sill 10 range 20 m nugget 0``."""
        if self.model == "linear":
            core = f"linear slope {self.slope:.4g} (V/m)^2/m"
        else:
            core = f"{self.model} sill {self.sill:.4g} (V/m)^2 range {self.range:.4g} m"
            if self.model == "matern":
                core += f" nu {self.nu:.3g}"
        core += f" nugget {self.nugget:.4g} (V/m)^2"
        if self.ratio != 1.0:
            core += f" anisotropy {self.ratio:.3g}:1 at {self.angle:.4g} deg"
        return core
