"""Meter profiles: identity, specified distance, unit, calibration state and due date.

Calibration convention used throughout :mod:`mapper.corrections`::

    E_read = gain * E_true + offset        so        E_true = (E_read - offset) / gain

``gain`` is dimensionless and ``offset`` is in V/m, both in the physics sign convention; they are
what :func:`mapper.corrections.calibration.fit_calibration` estimates from a parallel-plate check
(meter reading regressed on the known plate field).
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass, fields, replace
from datetime import date
from typing import Any

from mapper.errors import MapperError
from mapper.units import INCH_M, canonical_unit

#: Distance from the surface at which ESD field meters are commonly specified: 1 in = 0.0254 m
#: (common practice, no single source; see REFERENCE-VALUES).
DEFAULT_DISTANCE_M = INCH_M

#: Version of the JSON layout written by :meth:`MeterProfile.to_dict`.
PROFILE_FORMAT = 1


@dataclass(frozen=True)
class MeterProfile:
    """A field meter used in a survey.

    Attributes
    ----------
    id : str
        Short name the readings refer to (``Reading.meter_id``).
    description : str
        Make-free description, e.g. ``"handheld, 20 kV/in range"``.
    serial : str
        Serial number, as printed on the meter.
    distance_m : float
        Distance from the surface at which the meter's reading is specified, metres
        (commonly 0.0254 m; common practice).
    unit : str
        Unit the meter displays, one of :data:`mapper.units.FIELD_UNITS`.
    calibration_date : datetime.date or None
        Date of the last calibration or check.
    due_date : datetime.date or None
        Date the next calibration is due.
    gain : float
        Dimensionless gain, ``E_read = gain * E_true + offset``; 1 when not calibrated.
    offset_v_per_m : float
        Offset in V/m (physics sign convention); 0 when not calibrated.
    gain_se : float or None
        Standard error of ``gain`` from the fit, dimensionless.
    offset_se_v_per_m : float or None
        Standard error of ``offset_v_per_m``, V/m.
    r_squared : float or None
        Coefficient of determination of the calibration fit.
    fit_points : int
        Number of plate readings in the calibration fit (0 when never fitted).
    calibration_source : str
        Where the calibration came from, e.g. the check file name.
    """

    id: str
    description: str = ""
    serial: str = ""
    distance_m: float = DEFAULT_DISTANCE_M
    unit: str = "V/m"
    calibration_date: date | None = None
    due_date: date | None = None
    gain: float = 1.0
    offset_v_per_m: float = 0.0
    gain_se: float | None = None
    offset_se_v_per_m: float | None = None
    r_squared: float | None = None
    fit_points: int = 0
    calibration_source: str = ""

    def __post_init__(self) -> None:
        if not self.id or not self.id.strip():
            raise MapperError("meter id is empty; give a short name such as 'meter1'")
        if any(ch.isspace() for ch in self.id):
            raise MapperError(f"meter id {self.id!r} contains spaces; use e.g. 'meter-1'")
        if not (math.isfinite(self.distance_m) and self.distance_m > 0):
            raise MapperError(
                f"meter {self.id!r}: distance {self.distance_m} m must be a positive number of "
                "metres (commonly 0.0254 m)"
            )
        object.__setattr__(self, "unit", canonical_unit(self.unit))
        if not (math.isfinite(self.gain) and self.gain > 0):
            raise MapperError(
                f"meter {self.id!r}: gain {self.gain} must be a positive finite number "
                "(1 for an uncalibrated meter)"
            )
        if not math.isfinite(self.offset_v_per_m):
            raise MapperError(f"meter {self.id!r}: offset {self.offset_v_per_m} V/m is not finite")
        if (
            self.calibration_date is not None
            and self.due_date is not None
            and self.due_date < self.calibration_date
        ):
            raise MapperError(
                f"meter {self.id!r}: due date {self.due_date} is before calibration date "
                f"{self.calibration_date}"
            )

    @property
    def calibrated(self) -> bool:
        """True when the profile carries a gain or offset other than the identity."""
        return self.gain != 1.0 or self.offset_v_per_m != 0.0

    def true_field(self, read_v_per_m: float) -> float:
        """Apply the calibration: ``(E_read - offset) / gain``.

        Parameters
        ----------
        read_v_per_m : float
            Field as read by this meter, V/m.

        Returns
        -------
        float
            Calibrated field, V/m.
        """
        return (read_v_per_m - self.offset_v_per_m) / self.gain

    def overdue(self, on_date: date) -> bool:
        """Whether the calibration is overdue on ``on_date`` (due date strictly before it).

        A meter with no due date is not reported overdue; :meth:`due_warning` says so instead.

        Parameters
        ----------
        on_date : datetime.date
            The day of the survey.
        """
        return self.due_date is not None and self.due_date < on_date

    def due_warning(self, on_date: date) -> str | None:
        """A one-line warning when the calibration is overdue or its due date unknown."""
        if self.due_date is None:
            return (
                f"meter {self.id!r} has no calibration due date; record it with the meter's "
                "certificate"
            )
        if self.overdue(on_date):
            days = (on_date - self.due_date).days
            return (
                f"meter {self.id!r} calibration was due on {self.due_date.isoformat()} "
                f"({days} days before {on_date.isoformat()}); readings are doubtful until it is "
                "recalibrated or checked (mapper meter check)"
            )
        return None

    def with_fit(
        self,
        gain: float,
        offset_v_per_m: float,
        gain_se: float | None,
        offset_se_v_per_m: float | None,
        r_squared: float | None,
        fit_points: int,
        on_date: date,
        source: str = "",
    ) -> MeterProfile:
        """Return a copy carrying a new calibration fit dated ``on_date``.

        Parameters
        ----------
        gain : float
            Dimensionless gain.
        offset_v_per_m : float
            Offset, V/m.
        gain_se, offset_se_v_per_m : float or None
            Standard errors (dimensionless and V/m).
        r_squared : float or None
            Coefficient of determination.
        fit_points : int
            Number of readings in the fit.
        on_date : datetime.date
            Date of the check; becomes ``calibration_date``. The due date is kept.
        source : str
            Where the fit came from, e.g. the file name.
        """
        return replace(
            self,
            gain=gain,
            offset_v_per_m=offset_v_per_m,
            gain_se=gain_se,
            offset_se_v_per_m=offset_se_v_per_m,
            r_squared=r_squared,
            fit_points=fit_points,
            calibration_date=on_date,
            due_date=self.due_date if self.due_date is None or self.due_date >= on_date else None,
            calibration_source=source,
        )

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready dict (dates as ISO 8601 text), with a ``format`` version key."""
        out: dict[str, Any] = {"format": PROFILE_FORMAT}
        for key, value in asdict(self).items():
            out[key] = value.isoformat() if isinstance(value, date) else value
        return out

    def to_json(self) -> str:
        """The profile as compact JSON text (the ``meters`` table blob)."""
        return json.dumps(self.to_dict(), sort_keys=True)

    @classmethod
    def from_dict(cls, data: dict[str, Any], where: str | None = None) -> MeterProfile:
        """Build a profile from :meth:`to_dict` output.

        Parameters
        ----------
        data : dict
            Keys as written by :meth:`to_dict`; unknown keys are refused so a typo is not lost.
        where : str, optional
            Where the data came from, for error messages.
        """
        if not isinstance(data, dict):
            raise MapperError("meter profile must be a JSON object", where=where)
        version = data.get("format", PROFILE_FORMAT)
        if version != PROFILE_FORMAT:
            raise MapperError(
                f"meter profile format {version!r} is not supported; expected {PROFILE_FORMAT}",
                where=where,
            )
        known = {f.name: f for f in fields(cls)}
        unknown = sorted(set(data) - set(known) - {"format"})
        if unknown:
            raise MapperError(
                f"unknown meter profile keys {', '.join(unknown)}; accepted: {', '.join(known)}",
                where=where,
            )
        if "id" not in data:
            raise MapperError("meter profile has no 'id'", where=where)
        kwargs: dict[str, Any] = {}
        try:
            for key, value in data.items():
                if key == "format":
                    continue
                if key in ("calibration_date", "due_date"):
                    kwargs[key] = None if value in (None, "") else date.fromisoformat(str(value))
                elif key in ("distance_m", "gain", "offset_v_per_m"):
                    kwargs[key] = float(value)
                elif key in ("gain_se", "offset_se_v_per_m", "r_squared"):
                    kwargs[key] = None if value is None else float(value)
                elif key == "fit_points":
                    kwargs[key] = int(value)
                else:
                    kwargs[key] = str(value)
        except (TypeError, ValueError) as exc:
            raise MapperError(f"meter profile key {key!r}: {exc}", where=where) from None
        try:
            return cls(**kwargs)
        except MapperError as exc:
            raise MapperError(exc.message, where=where) from None

    @classmethod
    def from_json(cls, text: str, where: str | None = None) -> MeterProfile:
        """Inverse of :meth:`to_json`."""
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise MapperError(f"meter profile is not valid JSON: {exc}", where=where) from None
        return cls.from_dict(data, where=where)


def default_profile(meter_id: str) -> MeterProfile:
    """An uncalibrated profile (gain 1, offset 0) for a meter the survey does not describe."""
    return MeterProfile(id=meter_id, description="no profile recorded")
