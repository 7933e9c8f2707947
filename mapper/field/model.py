"""The field model handed from the field engine to map features and exports."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from mapper.field.settings import FieldSettings


@dataclass(frozen=True)
class CVStats:
    """Leave-one-out cross-validation statistics of one method.

    Attributes
    ----------
    method : str
        Method name.
    n : int
        Number of (merged) data positions left out in turn.
    rmse_v_per_m, mae_v_per_m, mean_error_v_per_m : float
        Root-mean-square, mean absolute and mean error of the left-out predictions, V/m.
    mean_standardized, rms_standardized : float or None
        Mean and RMS of errors divided by the predicted standard deviation; about 0 and 1 when
        the uncertainty is honest. For RBF and IDW, whose standard deviation is calibrated
        kriging's (``FieldGrid.settings.std``), the RMS is 1 by construction.
    """

    method: str
    n: int
    rmse_v_per_m: float
    mae_v_per_m: float
    mean_error_v_per_m: float
    mean_standardized: float | None = None
    rms_standardized: float | None = None


@dataclass(frozen=True)
class FieldGrid:
    """An interpolated field on a regular grid of cell centres.

    Attributes
    ----------
    x : ndarray, shape (nx,)
        Cell-centre x coordinates, site metres, increasing.
    y : ndarray, shape (ny,)
        Cell-centre y coordinates, site metres, increasing.
    estimate : ndarray, shape (ny, nx)
        Field estimate, V/m (physics sign convention); NaN outside the site outline.
    std : ndarray, shape (ny, nx)
        Standard deviation of the estimate, V/m; NaN outside the site or where the method gives none.
    method : str
        ``kriging``, ``universal``, ``rbf``, ``idw`` or ``physics`` (``difference`` for the
        difference of two surveys, which has no settings).
    settings : FieldSettings or None
        What the model was built with (variogram, kernel, smoothing, neighbours, sources ...);
        :meth:`FieldSettings.to_dict` is its JSON form. None for a grid not made by
        :func:`~mapper.field.build.build_field`.
    cv : CVStats or None
        Leave-one-out statistics of the chosen method.
    cv_table : tuple of CVStats
        Statistics of every method compared (``auto``).
    reason : str
        Why this method was chosen.
    """

    x: np.ndarray
    y: np.ndarray
    estimate: np.ndarray
    std: np.ndarray
    method: str
    settings: FieldSettings | None = None
    cv: CVStats | None = None
    cv_table: tuple[CVStats, ...] = ()
    reason: str = ""

    @property
    def cell_m(self) -> float:
        """Grid spacing, metres."""
        return float(self.x[1] - self.x[0]) if len(self.x) > 1 else float(self.y[1] - self.y[0])

    @property
    def inside(self) -> np.ndarray:
        """Boolean mask (ny, nx) of cells inside the site."""
        return np.isfinite(self.estimate)
