"""A standard deviation for methods that give none (RBF, IDW), calibrated by cross-validation.

The shape of the uncertainty comes from ordinary kriging fitted to the same readings: its standard
deviation grows away from the readings and with the variogram's roughness. Its level comes from the
chosen method's own leave-one-out errors: the kriging standard deviation is multiplied by

    s = sqrt(mean((e_i / sigma_i)^2))

where e_i is the chosen method's leave-one-out error at reading i and sigma_i the kriging standard
deviation of the same left-out prediction (positive even with a zero nugget, where the kriging
standard deviation *at* a reading is zero). The standardised leave-one-out errors e_i / (s sigma_i)
then have RMS 1 by construction; their mean and the share within +-1.96 stay informative checks.
Only the kriging standard deviation's shape matters: multiplying the variogram by a constant
multiplies every sigma_i and the grid's standard deviation alike, and s cancels it.

This is a pragmatic calibration (our own combination of the kriging standard deviation and the
usual cross-validation diagnostics, no published source): it assumes the chosen method's errors
vary over the site as kriging's do.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from mapper.errors import MapperError

#: Fewest usable leave-one-out errors a scale is calibrated from. With n errors the scale's
#: relative standard error is about 1 / sqrt(2 n) (chi-square with n degrees of freedom), 22 %
#: at 10 (our own choice, no source).
MIN_CALIBRATION_POINTS = 10
#: Leave-one-out errors around a place that set its local scale (our own choice, no source).
LOCAL_NEIGHBOURS = 12
#: Weight of the site-wide scale in each local one, in readings' worth (our own choice): with
#: 12 neighbours and a prior of 3, a place whose neighbours all predict perfectly keeps
#: sqrt(3 / 15) = 45 % of the site-wide scale.
LOCAL_PRIOR = 3.0
#: Two-sided 95 % quantile of the standard normal distribution.
Z95 = 1.959963984540054


@dataclass(frozen=True)
class StdCalibration:
    """Scale that turns a reference standard deviation into the chosen method's.

    Attributes
    ----------
    scale : float
        Factor s (dimensionless, > 0 and finite) when ``ok``; NaN otherwise.
    n : int
        Leave-one-out errors used (those with a positive, finite reference standard deviation).
    mean_standardized : float or None
        Mean of e_i / (s sigma_i) (about 0 when the method is unbiased).
    rms_standardized : float or None
        RMS of e_i / (s sigma_i): 1 by construction when ``ok``.
    within_95 : float or None
        Share of the standardised errors within +-1.96 (about 0.95 for normal errors).
    note : str
        Why no scale could be calibrated (empty when ``ok``).
    """

    scale: float
    n: int
    mean_standardized: float | None = None
    rms_standardized: float | None = None
    within_95: float | None = None
    note: str = ""

    @property
    def ok(self) -> bool:
        """True when the scale is usable."""
        return bool(np.isfinite(self.scale) and self.scale > 0)


def calibrate_std(
    errors, reference_std, *, min_points: int = MIN_CALIBRATION_POINTS, atol_v_per_m: float = 0.0,
) -> StdCalibration:
    """Scale a reference standard deviation so that leave-one-out errors have standardised RMS 1.

    Parameters
    ----------
    errors : array_like, shape (m,)
        Leave-one-out errors of the chosen method (left-out estimate minus reading), V/m.
    reference_std : array_like, shape (m,)
        Reference (kriging) standard deviation of the same left-out predictions, V/m. Positions
        where it is not positive and finite are left out of the calibration.
    min_points : int
        Fewest usable positions accepted.
    atol_v_per_m : float
        Errors whose RMS is at or below this count as all zero (rounding noise of a method that
        reproduces the readings exactly), V/m.

    Returns
    -------
    StdCalibration
        ``scale`` is NaN and ``note`` says why when no scale can be calibrated (too few usable
        positions, or all errors zero, which would claim a certain map).
    """
    e = np.asarray(errors, dtype=float).ravel()
    s = np.asarray(reference_std, dtype=float).ravel()
    if e.shape != s.shape:
        raise MapperError(
            f"errors ({e.shape[0]}) and reference standard deviations ({s.shape[0]}) must have one value "
            "per left-out position",
            where="calibrate_std",
        )
    use = np.isfinite(e) & np.isfinite(s) & (s > 0)
    n = int(use.sum())
    if n < min_points:
        return StdCalibration(
            float("nan"), n,
            note=f"{n} leave-one-out position(s) with a positive kriging standard deviation; "
                 f"at least {min_points} are needed to calibrate a scale",
        )
    u = e[use] / s[use]
    scale = float(np.sqrt(np.mean(u * u)))
    if not (np.isfinite(scale) and scale > 0) or float(np.sqrt(np.mean(e[use] ** 2))) <= atol_v_per_m:
        return StdCalibration(
            float("nan"), n,
            note="the leave-one-out errors are all zero, so no scale can be calibrated "
                 "(a zero standard deviation would claim a certain map)",
        )
    z = u / scale
    return StdCalibration(
        scale=scale,
        n=n,
        mean_standardized=float(np.mean(z)),
        rms_standardized=float(np.sqrt(np.mean(z * z))),
        within_95=float(np.mean(np.abs(z) <= Z95)),
    )


def local_scale(at_xy, u, targets, global_scale: float, *, leave_self_out: bool = False,
                k: int = LOCAL_NEIGHBOURS, prior: float = LOCAL_PRIOR) -> np.ndarray:
    """Scale of the standardised errors near each target, shrunk toward the site-wide one.

    ``l(t)^2 = (sum of u_j^2 over the k positions nearest t + prior * S^2) / (k + prior)``:
    a quiet corner whose nearby readings are predicted well gets a small scale, a place near a
    charged object that the method smooths gets a large one, instead of one factor everywhere.

    Parameters
    ----------
    at_xy : array_like, shape (m, 2)
        Left-out positions, metres.
    u : array_like, shape (m,)
        Their leave-one-out errors divided by the reference standard deviation (dimensionless).
    targets : array_like, shape (t, 2)
        Where the scale is wanted, metres.
    global_scale : float
        S, the site-wide RMS of ``u``.
    leave_self_out : bool
        ``targets`` are ``at_xy`` themselves: leave each one's own error out of its scale.

    Returns
    -------
    ndarray, shape (t,)
        Local scale (dimensionless, > 0).
    """
    at_xy = np.asarray(at_xy, float)
    u2 = np.asarray(u, float) ** 2
    m = at_xy.shape[0]
    kk = min(k, m - 1 if leave_self_out else m)
    if kk < 1:
        return np.full(np.asarray(targets).shape[0], global_scale)
    _, idx = cKDTree(at_xy).query(np.asarray(targets, float), k=kk + (1 if leave_self_out else 0))
    idx = idx.reshape(idx.shape[0], -1)
    if leave_self_out:
        idx = idx[:, 1:]
    return np.sqrt((u2[idx].sum(axis=1) + prior * global_scale**2) / (kk + prior))
