"""The reading and condition records passed from the survey file to later stages."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

#: Kinds of reading. ``field`` readings are mapped; the others support corrections.
READING_KINDS = ("field", "reference", "zero", "calibration")
#: Flag on a reading the user excluded: kept in the survey and the exports, left out of the field
#: model, the controls and the outlier check's neighbours.
EXCLUDED_FLAG = "excluded"
#: Flag set by the survey app's "doubtful" box (the reading stays in the field model).
DOUBTFUL_FLAG = "doubtful"


@dataclass(frozen=True)
class Reading:
    """One accepted meter reading, as stored.

    Attributes
    ----------
    id : int
        Row id in the survey file (stable; edits create a new id).
    x, y : float
        Position, site metres.
    value_v_per_m : float
        Raw field in V/m, physics sign convention, before corrections.
    entered_value : float
        The number as typed or imported, in ``entered_unit`` and the survey's sign convention.
    entered_unit : str
        Unit it was entered in.
    time : datetime
        When it was taken, timezone-aware UTC.
    height_m : float or None
        Meter height above the floor or ground, metres.
    meter_id : str
        Which meter took it.
    kind : str
        One of :data:`READING_KINDS`.
    point : str or None
        Planned grid point label, ``None`` for a free-position reading.
    note : str
        Free text.
    flags : tuple of str
        Markers such as ``outlier?``, ``excluded``, ``drift-extrapolated``.
    """

    id: int
    x: float
    y: float
    value_v_per_m: float
    entered_value: float
    entered_unit: str
    time: datetime
    height_m: float | None = None
    meter_id: str = "meter1"
    kind: str = "field"
    point: str | None = None
    note: str = ""
    flags: tuple[str, ...] = ()


@dataclass(frozen=True)
class CorrectedReading:
    """A field reading after corrections; what every later stage uses.

    Attributes
    ----------
    reading : Reading
        The stored reading, raw value kept.
    value_v_per_m : float
        Corrected field, V/m, physics sign convention.
    corrections : tuple of str
        Names of the corrections applied, e.g. ``("calibration", "zero", "drift")``.
    flags : tuple of str
        Flags added by the corrections (besides ``reading.flags``).
    """

    reading: Reading
    value_v_per_m: float
    corrections: tuple[str, ...] = ()
    flags: tuple[str, ...] = field(default=())


@dataclass(frozen=True)
class Conditions:
    """Ambient conditions noted during a survey.

    Attributes
    ----------
    id : int
        Row id.
    time : datetime
        When noted, UTC.
    rh_percent : float or None
        Relative humidity, percent.
    temperature_c : float or None
        Air temperature, degrees Celsius (an edge unit; kept as entered).
    note : str
        Free text (ionisers on, doors open, ...).
    """

    id: int
    time: datetime
    rh_percent: float | None
    temperature_c: float | None
    note: str = ""


@dataclass(frozen=True)
class NewReading:
    """A reading about to be stored.

    Attributes
    ----------
    x, y : float
        Position, site metres.
    entered_value : float
        The number as typed or read, in ``entered_unit`` and the survey's sign convention.
    entered_unit : str
        Unit of ``entered_value``.
    value_v_per_m : float
        The same field in V/m, physics sign convention.
    kind : str
        One of ``field``, ``reference``, ``zero``, ``calibration``.
    point : str or None
        Plan point label, or ``None`` for a free position.
    time : datetime or None
        When taken (UTC); ``None`` means now.
    height_m : float or None
        Meter height, metres.
    meter_id : str or None
        Meter; ``None`` means the survey's current meter.
    note : str
        Free text.
    flags : tuple of str
        Markers.
    """

    x: float
    y: float
    entered_value: float
    entered_unit: str
    value_v_per_m: float
    kind: str = "field"
    point: str | None = None
    time: datetime | None = None
    height_m: float | None = None
    meter_id: str | None = None
    note: str = ""
    flags: tuple[str, ...] = ()
