"""Field engine: the methods (one estimator contract, :mod:`mapper.field.estimator`), variograms,
cross-validation and the gridded field model that :func:`build_field` assembles."""

from mapper.field.build import METHODS, build_field
from mapper.field.crossval import cv_stats
from mapper.field.empirical import EmpiricalVariogram, empirical_variogram
from mapper.field.estimator import FieldEstimator
from mapper.field.fit import VariogramFit, fit_model, fit_variogram
from mapper.field.idw import IDW
from mapper.field.kriging import OrdinaryKriging, UniversalKriging
from mapper.field.model import CVStats, FieldGrid
from mapper.field.physical import PhysicalModel, SourceSeed
from mapper.field.rbf import RBF
from mapper.field.repeats import MergedReadings, merge_repeats
from mapper.field.storage import field_from_bytes, field_to_bytes
from mapper.field.variogram import MODELS, Variogram

__all__ = [
    "IDW",
    "METHODS",
    "MODELS",
    "RBF",
    "CVStats",
    "EmpiricalVariogram",
    "FieldEstimator",
    "FieldGrid",
    "MergedReadings",
    "OrdinaryKriging",
    "PhysicalModel",
    "SourceSeed",
    "UniversalKriging",
    "Variogram",
    "VariogramFit",
    "build_field",
    "cv_stats",
    "empirical_variogram",
    "field_from_bytes",
    "field_to_bytes",
    "fit_model",
    "fit_variogram",
    "merge_repeats",
]
