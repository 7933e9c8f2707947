"""The contract every field estimator keeps (kriging, universal kriging, RBF, IDW, the physical model).

The pattern of scikit-learn and verde: the constructor stores its settings as given, under the
same names; ``fit`` checks them and learns from the readings, keeping what it learned in
attributes whose names end in ``_``; ``predict`` and ``loo`` use only those, and raise
:class:`~mapper.errors.NotFittedError` before ``fit``. So an estimator can be built from its
settings, inspected and copied, and a caller can tell a fitted one at a glance.
"""

from __future__ import annotations

import inspect
from typing import Protocol, runtime_checkable

import numpy as np

from mapper.errors import NotFittedError


@runtime_checkable
class FieldEstimator(Protocol):
    """What :func:`~mapper.field.build.build_field` needs of a method."""

    def fit(self, xy, values):  # pragma: no cover - protocol
        """Learn from readings at ``xy`` (n, 2) metres, ``values`` (n,) V/m; returns self."""

    def predict(self, targets) -> tuple[np.ndarray, np.ndarray]:  # pragma: no cover - protocol
        """Estimate and standard deviation at ``targets`` (m, 2) metres, V/m (std NaN if none)."""

    def loo(self, at=None) -> tuple[np.ndarray, np.ndarray | None]:  # pragma: no cover - protocol
        """Leave-one-out errors (estimate minus reading, V/m) and their std (or None)."""


def fitted_attributes(estimator) -> list[str]:
    """Names of an estimator's learned attributes (ending in ``_``, not private)."""
    return [k for k in vars(estimator) if k.endswith("_") and not k.startswith("_")]


def check_fitted(estimator, what: str) -> None:
    """Raise :class:`NotFittedError` unless ``estimator.fit`` has run.

    Parameters
    ----------
    estimator : object
        The estimator.
    what : str
        The method that needs the fit, e.g. ``"predict"``.
    """
    if not fitted_attributes(estimator):
        name = type(estimator).__name__
        raise NotFittedError(f"{name} is not fitted: call {name}.fit(xy, values) before {what}")


def settings(estimator) -> dict:
    """The constructor's settings read back from the estimator (same names as its parameters)."""
    params = inspect.signature(type(estimator).__init__).parameters
    return {name: getattr(estimator, name) for name in params if name != "self"}


__all__ = ["FieldEstimator", "check_fitted", "fitted_attributes", "settings"]
