"""Field engine: from readings to a gridded field model.

Entry points: :func:`build_field` (what the CLI and app call), the estimators behind one
contract (:class:`FieldEstimator`: :class:`OrdinaryKriging`, :class:`UniversalKriging`,
:class:`RBF`, :class:`IDW`, :class:`PhysicalModel`), the variogram (:class:`Variogram`,
:func:`fit_variogram`), the result (:class:`FieldGrid` with :class:`CVStats` and its typed
:class:`FieldSettings`) and its stored form (:func:`field_to_bytes`, :func:`field_from_bytes`).
Helpers (empirical variograms, cross-validation statistics, merging repeats, checks) are
imported from their own modules.
"""

from mapper.field.build import METHODS, build_field
from mapper.field.estimator import FieldEstimator
from mapper.field.fit import VariogramFit, fit_variogram
from mapper.field.idw import IDW
from mapper.field.kriging import OrdinaryKriging, UniversalKriging
from mapper.field.model import CVStats, FieldGrid
from mapper.field.physical import PhysicalModel, SourceSeed
from mapper.field.rbf import RBF
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
    SourceSummary,
    SplitStats,
    VariogramChoice,
    VariogramFitSummary,
)
from mapper.field.storage import field_from_bytes, field_to_bytes
from mapper.field.variogram import MODELS, Variogram

__all__ = [
    "IDW",
    "METHODS",
    "MODELS",
    "RBF",
    "BorrowedStd",
    "CVStats",
    "CalibrationStats",
    "FieldEstimator",
    "FieldGrid",
    "FieldSettings",
    "IDWSettings",
    "KrigingSettings",
    "LocalScale",
    "LooSplit",
    "MethodSettings",
    "OrdinaryKriging",
    "PhysicalModel",
    "PhysicsSettings",
    "RBFSettings",
    "SourceSeed",
    "SourceSummary",
    "SplitStats",
    "UniversalKriging",
    "Variogram",
    "VariogramChoice",
    "VariogramFit",
    "VariogramFitSummary",
    "build_field",
    "field_from_bytes",
    "field_to_bytes",
    "fit_variogram",
]
