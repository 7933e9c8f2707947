"""Meter profiles: JSON round trip, validation and the overdue check."""

from __future__ import annotations

import json
from datetime import date

import pytest

from mapper.corrections.meter import DEFAULT_DISTANCE_M, MeterProfile, default_profile
from mapper.errors import MapperError


def _profile() -> MeterProfile:
    return MeterProfile(
        id="m-7",
        description="handheld field meter",
        serial="SN 0042",
        unit="v/in",
        calibration_date=date(2024, 1, 10),
        due_date=date(2025, 1, 10),
        gain=1.04,
        offset_v_per_m=-12.5,
        gain_se=0.003,
        offset_se_v_per_m=1.1,
        r_squared=0.9998,
        fit_points=9,
        calibration_source="plates.csv",
    )


def test_default_distance_is_one_inch() -> None:
    # 1 in = 0.0254 m exactly (international inch, 1959); ESD field meters are commonly
    # specified at 1 in (common practice, no source).
    assert DEFAULT_DISTANCE_M == 0.0254
    assert MeterProfile(id="a").distance_m == 0.0254


def test_json_round_trip_keeps_every_field() -> None:
    profile = _profile()
    assert profile.unit == "V/in"  # canonical spelling
    blob = profile.to_json()
    data = json.loads(blob)
    assert data["calibration_date"] == "2024-01-10" and data["format"] == 1
    assert MeterProfile.from_json(blob) == profile
    assert MeterProfile.from_dict(profile.to_dict()) == profile


def test_overdue_is_strictly_after_due_date() -> None:
    profile = _profile()
    assert not profile.overdue(date(2025, 1, 10))
    assert profile.overdue(date(2025, 1, 11))
    assert profile.due_warning(date(2024, 6, 1)) is None
    message = profile.due_warning(date(2025, 2, 9))
    assert message is not None and "2025-01-10" in message and "30 days" in message
    assert "no calibration due date" in default_profile("x").due_warning(date(2024, 1, 1))


def test_calibration_convention() -> None:
    # E_read = gain * E_true + offset  ->  E_true = (E_read - offset) / gain
    profile = _profile()
    e_true = 1234.0
    assert profile.true_field(1.04 * e_true - 12.5) == pytest.approx(e_true)
    assert profile.calibrated and not default_profile("x").calibrated


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        ({"id": ""}, "meter id is empty"),
        ({"id": "my meter"}, "contains spaces"),
        ({"id": "a", "gain": 0.0}, "gain 0.0 must be a positive"),
        ({"id": "a", "distance_m": 0.0}, "distance 0.0 m must be a positive"),
        ({"id": "a", "unit": "V/ft"}, "unknown field unit"),
        (
            {"id": "a", "calibration_date": date(2024, 2, 1), "due_date": date(2024, 1, 1)},
            "before calibration date",
        ),
    ],
)
def test_bad_profiles_refused(kwargs: dict, fragment: str) -> None:
    with pytest.raises(MapperError, match=fragment):
        MeterProfile(**kwargs)


def test_from_dict_refuses_unknown_keys_and_bad_dates() -> None:
    data = _profile().to_dict()
    with pytest.raises(MapperError, match="unknown meter profile keys gian") as info:
        MeterProfile.from_dict({**data, "gian": 2.0}, where="survey meters table")
    assert info.value.where == "survey meters table"
    with pytest.raises(MapperError, match="due_date"):
        MeterProfile.from_dict({**data, "due_date": "10/01/2025"})
    with pytest.raises(MapperError, match="not valid JSON"):
        MeterProfile.from_json("{")


def test_with_fit_returns_new_dated_profile() -> None:
    old = MeterProfile(id="a", due_date=date(2025, 1, 1))
    new = old.with_fit(1.1, 3.0, 0.01, 0.5, 0.999, 6, date(2024, 3, 1), "p.csv")
    assert (new.gain, new.offset_v_per_m, new.calibration_date) == (1.1, 3.0, date(2024, 3, 1))
    assert new.due_date == date(2025, 1, 1) and old.gain == 1.0
