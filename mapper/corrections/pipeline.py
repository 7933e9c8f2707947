"""Stage 4 entry point: calibration, zero offset, drift and the outlier check in one call.

For each field reading of meter ``m`` taken at time ``t``::

    E_cal  = (E_raw - offset_m) / gain_m        (meter profile; identity without one)
    E_corr = E_cal - c_m(t)                      (zero/reference curve, see zero_drift)

Zero and reference readings are calibrated the same way before they build ``c_m``. The raw value
is kept beside the corrected one; each corrected reading names the corrections applied to it.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from mapper.corrections.meter import MeterProfile, default_profile
from mapper.corrections.outliers import (
    DEFAULT_NEIGHBOURS,
    DEFAULT_THRESHOLD,
    OUTLIER_FLAG,
    OutlierCheck,
    local_outliers,
)
from mapper.corrections.zero_drift import (
    DRIFT_EXTRAPOLATED,
    STATION_TOLERANCE_M,
    SUGGESTED_INTERVAL,
    DriftModel,
    DriftReport,
    build_drift_model,
    drift_report,
    meter_overlaps,
    station_moves,
)
from mapper.readings.model import EXCLUDED_FLAG, CorrectedReading, Reading

#: Names of corrections, in the order they are applied.
CORRECTION_NAMES = ("calibration", "zero", "drift")


@dataclass(frozen=True)
class CorrectionResult:
    """What :func:`correct` produced.

    Attributes
    ----------
    readings : tuple of CorrectedReading
        The field readings, in input order, raw value kept.
    applied : tuple of str
        Corrections applied to at least one reading, in :data:`CORRECTION_NAMES` order.
    warnings : tuple of str
        One-line warnings (overdue calibration, station moved, meters overlapping, ...).
    drift : tuple of DriftReport
        One per meter that took field or control readings, sorted by meter id.
    outliers : OutlierCheck or None
        The outlier check over the field readings not excluded (same order as those readings),
        ``None`` when not run.
    """

    readings: tuple[CorrectedReading, ...]
    applied: tuple[str, ...]
    warnings: tuple[str, ...]
    drift: tuple[DriftReport, ...]
    outliers: OutlierCheck | None = None

    def drift_for(self, meter_id: str) -> DriftReport | None:
        """The drift report of one meter, or ``None``."""
        return next((d for d in self.drift if d.meter_id == meter_id), None)

    @property
    def flagged_outliers(self) -> tuple[CorrectedReading, ...]:
        """Readings flagged for review by the outlier check."""
        return tuple(r for r in self.readings if OUTLIER_FLAG in r.flags)


def correct(
    readings: Sequence[Reading],
    meters: Mapping[str, MeterProfile],
    *,
    station_tolerance_m: float = STATION_TOLERANCE_M,
    check_outliers: bool = True,
    outlier_neighbours: int = DEFAULT_NEIGHBOURS,
    outlier_threshold: float = DEFAULT_THRESHOLD,
) -> CorrectionResult:
    """Correct a survey's field readings.

    Parameters
    ----------
    readings : sequence of Reading
        Current (not superseded) readings of all kinds; ``calibration`` readings are ignored
        here (they are fitted by ``mapper meter check``).
    meters : mapping of str to MeterProfile
        Profiles by meter id; a meter without one is taken as uncalibrated, with a warning.
    station_tolerance_m : float
        Largest distance between visits of one reference station before a warning, metres.
    check_outliers : bool
        Run the robust local outlier check on the corrected field values.
    outlier_neighbours : int
        Neighbours per reading in the outlier check.
    outlier_threshold : float
        Cut-off of the robust score.

    Returns
    -------
    CorrectionResult
        Corrected field readings in input order, corrections applied, warnings, drift reports.
    """
    warnings: list[str] = []
    meter_ids = sorted({r.meter_id for r in readings if r.kind in ("field", "zero", "reference")})
    profiles: dict[str, MeterProfile] = {}
    for meter_id in meter_ids:
        if meter_id in meters:
            profiles[meter_id] = meters[meter_id]
        else:
            profiles[meter_id] = default_profile(meter_id)
            warnings.append(
                f"meter {meter_id!r} has no profile in the survey; its readings are used "
                "uncalibrated (add it with mapper meter add, check it with mapper meter check)"
            )

    field_idx = [i for i, r in enumerate(readings) if r.kind == "field"]
    field_by_meter: dict[str, list[int]] = {m: [] for m in meter_ids}
    for i in field_idx:
        field_by_meter[readings[i].meter_id].append(i)

    corrected = np.zeros(len(readings))
    flags: dict[int, list[str]] = {i: [] for i in field_idx}
    names: dict[str, tuple[str, ...]] = {}
    models: dict[str, DriftModel] = {}
    reports: list[DriftReport] = []
    for meter_id in meter_ids:
        profile = profiles[meter_id]
        last_day = max(r.time for r in readings if r.meter_id == meter_id).date()
        due = profile.due_warning(last_day)
        if due and meter_id in meters:
            warnings.append(due)
        controls = [
            r
            for r in readings
            if r.meter_id == meter_id
            and r.kind in ("zero", "reference")
            and EXCLUDED_FLAG not in r.flags
        ]
        warnings.extend(
            station_moves([r for r in controls if r.kind == "reference"], station_tolerance_m)
        )
        model = build_drift_model(
            meter_id, controls, [profile.true_field(r.value_v_per_m) for r in controls]
        )
        models[meter_id] = model
        idx = field_by_meter[meter_id]
        c, outside = model.correction_at([readings[i].time for i in idx])
        for j, i in enumerate(idx):
            corrected[i] = profile.true_field(readings[i].value_v_per_m) - c[j]
            if model.knots and outside[j]:
                flags[i].append(DRIFT_EXTRAPOLATED)
        names[meter_id] = tuple(
            name
            for name, used in zip(
                CORRECTION_NAMES,
                (profile.calibrated, model.has_zero, model.has_reference),
                strict=True,
            )
            if used
        )
        report = drift_report(model, c, outside if model.knots else np.zeros(len(idx), bool))
        reports.append(report)
        if idx and not model.knots:
            warnings.append(
                f"meter {meter_id!r} has no zero or reference readings; its drift is not "
                f"corrected (take zero readings or revisit a reference station {SUGGESTED_INTERVAL})"
            )
        elif report.extrapolated:
            warnings.append(
                f"meter {meter_id!r}: {report.extrapolated} field readings lie outside the span of "
                f"its zero/reference readings and carry the nearest one's correction (flagged "
                f"{DRIFT_EXTRAPOLATED!r}); start and end each session with a zero or reference "
                "reading"
            )

    warnings.extend(
        meter_overlaps({m: [readings[i] for i in idx] for m, idx in field_by_meter.items()}, models)
    )

    check: OutlierCheck | None = None
    if check_outliers:
        usable = [i for i in field_idx if EXCLUDED_FLAG not in readings[i].flags]
        if usable:
            check = local_outliers(
                np.array([readings[i].x for i in usable]),
                np.array([readings[i].y for i in usable]),
                corrected[usable],
                k=outlier_neighbours,
                threshold=outlier_threshold,
            )
            for j, i in enumerate(usable):
                if check.flagged[j]:
                    flags[i].append(OUTLIER_FLAG)
            if usable and check.neighbours == 0:
                warnings.append(
                    f"only {len(usable)} field readings; the outlier check needs at least 6"
                )

    out = tuple(
        CorrectedReading(
            reading=readings[i],
            value_v_per_m=float(corrected[i]),
            corrections=names[readings[i].meter_id],
            flags=tuple(flags[i]),
        )
        for i in field_idx
    )
    applied = tuple(n for n in CORRECTION_NAMES if any(n in r.corrections for r in out))
    return CorrectionResult(out, applied, tuple(warnings), tuple(reports), check)


def load_meters(survey) -> dict[str, MeterProfile]:
    """The survey's stored meter profiles, by meter id.

    Parameters
    ----------
    survey : mapper.survey.store.Survey
        An open survey (read access is enough).

    Returns
    -------
    dict of str to MeterProfile
    """
    return {
        meter_id: MeterProfile.from_dict(data, where=f"{survey.path}: meter {meter_id!r}")
        for meter_id, data in survey.meters().items()
    }


def correct_survey(survey, **options) -> CorrectionResult:
    """Correct a survey's current readings with its stored meter profiles.

    Parameters
    ----------
    survey : mapper.survey.store.Survey
        An open survey (read access is enough).
    **options
        Passed to :func:`correct`.
    """
    return correct(survey.readings(kind=None), load_meters(survey), **options)
