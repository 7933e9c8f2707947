"""Cross-validation statistics from leave-one-out errors."""

from __future__ import annotations

import numpy as np

from mapper.field.model import CVStats


def cv_stats(method: str, error: np.ndarray, std: np.ndarray | None = None) -> CVStats:
    """Summarise leave-one-out errors.

    Parameters
    ----------
    method : str
        Method name.
    error : ndarray, shape (n,)
        Left-out estimate minus reading, V/m.
    std : ndarray, shape (n,), optional
        Predicted standard deviation of each left-out estimate, V/m (kriging). RBF and IDW give
        none; :func:`mapper.field.build.build_field` fills their standardised errors from the
        calibrated kriging standard deviation (:mod:`mapper.field.uncertainty`), whose RMS is 1
        by construction.

    Returns
    -------
    CVStats
    """
    e = np.asarray(error, dtype=float)
    ms = rs = None
    if std is not None:
        s = np.asarray(std, dtype=float)
        ok = s > 0
        if ok.any():
            zs = e[ok] / s[ok]
            ms, rs = float(np.mean(zs)), float(np.sqrt(np.mean(zs**2)))
    return CVStats(
        method=method,
        n=int(e.shape[0]),
        rmse_v_per_m=float(np.sqrt(np.mean(e**2))),
        mae_v_per_m=float(np.mean(np.abs(e))),
        mean_error_v_per_m=float(np.mean(e)),
        mean_standardized=ms,
        rms_standardized=rs,
    )
