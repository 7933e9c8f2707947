"""Builders of made-up readings for the corrections tests."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

from mapper.readings.model import Reading

T0 = datetime(2024, 5, 2, 9, 0, 0, tzinfo=UTC)


def reading(
    rid: int,
    value: float,
    minutes: float,
    x: float = 0.0,
    y: float = 0.0,
    kind: str = "field",
    meter: str = "meter1",
    point: str | None = None,
    flags: tuple[str, ...] = (),
) -> Reading:
    """A reading of ``value`` V/m taken ``minutes`` after 09:00 UTC on 2024-05-02."""
    return Reading(
        id=rid,
        x=x,
        y=y,
        value_v_per_m=value,
        entered_value=value,
        entered_unit="V/m",
        time=T0 + timedelta(minutes=minutes),
        meter_id=meter,
        kind=kind,
        point=point,
        flags=flags,
    )
