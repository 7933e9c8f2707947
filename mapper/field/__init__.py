"""Field engine: from readings to a gridded field model.

Entry points: :func:`build_field` (what the CLI and app call), the estimators behind one
contract (:class:`FieldEstimator`: :class:`OrdinaryKriging`, :class:`UniversalKriging`,
:class:`RBF`, :class:`IDW`, :class:`PhysicalModel`), the variogram (:class:`Variogram`,
:func:`fit_variogram`), the result (:class:`FieldGrid` with :class:`CVStats` and its typed
:class:`FieldSettings`) and its stored form (:func:`field_to_bytes`, :func:`field_from_bytes`).
Helpers (empirical variograms, cross-validation statistics, merging repeats, checks) are
imported from their own modules.

The names below are imported on first use (PEP 562), so importing one submodule does not load
the whole package.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from mapper.lazy import lazy_exports

_WHERE = {
    "METHODS": "mapper.field.build",
    "build_field": "mapper.field.build",
    "FieldEstimator": "mapper.field.estimator",
    "VariogramFit": "mapper.field.fit",
    "fit_variogram": "mapper.field.fit",
    "IDW": "mapper.field.idw",
    "OrdinaryKriging": "mapper.field.kriging",
    "UniversalKriging": "mapper.field.kriging",
    "CVStats": "mapper.field.model",
    "FieldGrid": "mapper.field.model",
    "PhysicalModel": "mapper.field.physical",
    "SourceSeed": "mapper.field.physical",
    "RBF": "mapper.field.rbf",
    "BorrowedStd": "mapper.field.settings",
    "CalibrationStats": "mapper.field.settings",
    "FieldSettings": "mapper.field.settings",
    "IDWSettings": "mapper.field.settings",
    "KrigingSettings": "mapper.field.settings",
    "LocalScale": "mapper.field.settings",
    "LooSplit": "mapper.field.settings",
    "MethodSettings": "mapper.field.settings",
    "PhysicsSettings": "mapper.field.settings",
    "RBFSettings": "mapper.field.settings",
    "SourceSummary": "mapper.field.settings",
    "SplitStats": "mapper.field.settings",
    "VariogramChoice": "mapper.field.settings",
    "VariogramFitSummary": "mapper.field.settings",
    "field_from_bytes": "mapper.field.storage",
    "field_to_bytes": "mapper.field.storage",
    "MODELS": "mapper.field.variogram",
    "Variogram": "mapper.field.variogram",
}

__all__ = sorted(_WHERE)

if TYPE_CHECKING:  # for type checkers and editors: the eager form
    from mapper.field.build import METHODS, build_field  # noqa: F401
    from mapper.field.estimator import FieldEstimator  # noqa: F401
    from mapper.field.fit import VariogramFit, fit_variogram  # noqa: F401
    from mapper.field.idw import IDW  # noqa: F401
    from mapper.field.kriging import OrdinaryKriging, UniversalKriging  # noqa: F401
    from mapper.field.model import CVStats, FieldGrid  # noqa: F401
    from mapper.field.physical import PhysicalModel, SourceSeed  # noqa: F401
    from mapper.field.rbf import RBF  # noqa: F401
    from mapper.field.settings import (  # noqa: F401
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
        SourceSummary,
        SplitStats,
        VariogramChoice,
        VariogramFitSummary,
    )
    from mapper.field.storage import field_from_bytes, field_to_bytes  # noqa: F401
    from mapper.field.variogram import MODELS, Variogram  # noqa: F401


__getattr__, __dir__ = lazy_exports(__name__, _WHERE)
