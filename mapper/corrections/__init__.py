"""Stage 4: corrections -- meter calibration, zero offset, drift and the outlier check.

:func:`correct` turns stored readings into the corrected field values every later stage uses.
"""

from mapper.corrections.calibration import (
    CalibrationFit,
    PlateReading,
    check_meter_file,
    fit_calibration,
    plate_field,
    read_calibration_csv,
)
from mapper.corrections.meter import DEFAULT_DISTANCE_M, MeterProfile, default_profile
from mapper.corrections.outliers import OUTLIER_FLAG, OutlierCheck, local_outliers
from mapper.corrections.pipeline import CorrectionResult, correct, correct_survey
from mapper.corrections.zero_drift import (
    DRIFT_EXTRAPOLATED,
    DriftKnot,
    DriftModel,
    DriftReport,
    build_drift_model,
    drift_report,
    meter_overlaps,
    piecewise_linear,
    station_moves,
    tie_station_levels,
)

__all__ = [
    "DEFAULT_DISTANCE_M",
    "DRIFT_EXTRAPOLATED",
    "OUTLIER_FLAG",
    "CalibrationFit",
    "CorrectionResult",
    "DriftKnot",
    "DriftModel",
    "DriftReport",
    "MeterProfile",
    "OutlierCheck",
    "PlateReading",
    "build_drift_model",
    "check_meter_file",
    "correct",
    "correct_survey",
    "default_profile",
    "drift_report",
    "fit_calibration",
    "local_outliers",
    "meter_overlaps",
    "piecewise_linear",
    "plate_field",
    "read_calibration_csv",
    "station_moves",
    "tie_station_levels",
]
