"""``mapper meter add/list/check`` and the log import helpers, on a real survey file."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from mapper.cli import main as cli_main
from mapper.corrections.meter import MeterProfile
from mapper.corrections.pipeline import correct
from mapper.errors import MapperError
from mapper.readings.log_match import import_meter_log
from mapper.survey.store import Survey


@pytest.fixture
def run(monkeypatch):
    """Call ``mapper`` in-process with the meter command registered."""
    if "cmd_meter" not in cli_main.COMMANDS:
        monkeypatch.setattr(cli_main, "COMMANDS", (*cli_main.COMMANDS, "cmd_meter"))

    def call(*argv: str) -> int:
        return cli_main.main([str(a) for a in argv])

    return call


def _plates(tmp_path: Path, gain: float, offset: float) -> Path:
    # Made-up check: 1 in gap, plate voltages -1 kV .. +1 kV, meter with known gain and offset,
    # readings in V/in with a small alternating error.
    lines = ["plate_voltage_v,gap,reading,unit"]
    for i, volts in enumerate((-1000, -500, 0, 500, 1000, 250)):
        field = volts / 0.0254
        read = gain * field + offset + (-1) ** i * 15.0
        lines.append(f"{volts},1 in,{read * 0.0254:.4f},V/in")
    path = tmp_path / "plates.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_meter_check_stores_fit_and_correct_applies_it(
    run, box_survey: Path, tmp_path: Path, capsys
) -> None:
    gain, offset = 1.08, 120.0
    assert run("meter", "add", box_survey, "meter1", "--serial", "SN-1", "--due", "2030-01-01") == 0
    assert (
        run(
            "meter",
            "check",
            box_survey,
            "meter1",
            _plates(tmp_path, gain, offset),
            "--date",
            "2024-05-02",
        )
        == 0
    )
    out, err = capsys.readouterr()
    assert "known E = V/d" in out and "R^2" in out and "stored for meter meter1" in out
    assert "reads +8.0 % of the true field" in err
    with Survey.open(box_survey) as survey:
        stored = MeterProfile.from_dict(survey.meters()["meter1"])
        assert any(kind == "meter check" for _, kind, _ in survey.events())
    assert stored.serial == "SN-1" and stored.fit_points == 6
    assert stored.calibration_date.isoformat() == "2024-05-02"
    assert abs(stored.gain - gain) < 3 * stored.gain_se
    assert abs(stored.offset_v_per_m - offset) < 3 * stored.offset_se_v_per_m
    # The stored profile is what correct() applies: a raw reading maps back to the true field.
    from tests.corrections.helpers import reading

    true = np.array([1000.0, 2000.0, 3000.0])
    readings = [reading(i, gain * v + offset, float(i), x=float(i)) for i, v in enumerate(true)]
    result = correct(readings, {"meter1": stored}, check_outliers=False)
    np.testing.assert_allclose([r.value_v_per_m for r in result.readings], true, rtol=0.01)
    assert result.applied == ("calibration",)


def test_meter_check_refuses_one_field_and_unknown_meter(
    run, box_survey: Path, tmp_path: Path, capsys
) -> None:
    one = tmp_path / "one.csv"
    one.write_text(
        "plate_voltage_v,gap_m,reading\n1000,0.025,40.1 kV/m\n1000,0.025,40.2 kV/m\n1000,0.025,39.9 kV/m\n"
    )
    assert run("meter", "check", box_survey, "meter1", one) == 2
    err = capsys.readouterr().err
    assert (
        err.count("\n") == 1
        and "at least 3 distinct plate fields, got 1" in err
        and "one.csv" in err
    )
    assert run("meter", "check", box_survey, "nope", one) == 2
    assert "no meter 'nope' in the survey" in capsys.readouterr().err
    zero_gap = tmp_path / "gap.csv"
    zero_gap.write_text("plate_voltage_v,gap_m,reading\n0,0.025,0 V/m\n1000,0,1 kV/m\n")
    assert run("meter", "check", box_survey, "meter1", zero_gap) == 2
    assert "gap.csv:3: gap_m: gap '0' is not positive" in capsys.readouterr().err
    with Survey.open(box_survey) as survey:  # nothing stored by the failed checks
        assert MeterProfile.from_dict(survey.meters()["meter1"]).gain == 1.0


def test_meter_add_and_list(run, box_survey: Path, capsys) -> None:
    assert (
        run(
            "meter",
            "add",
            box_survey,
            "m2",
            "--distance",
            "25 mm",
            "--unit",
            "V/in",
            "--due",
            "2020-01-01",
        )
        == 0
    )
    err = capsys.readouterr().err
    assert "calibration was due on 2020-01-01" in err
    assert run("meter", "list", box_survey) == 0
    out = capsys.readouterr().out
    assert "m2" in out and "25 mm" in out and "OVERDUE" in out and "meter1" in out
    assert run("meter", "list", box_survey, "--json") == 0
    listed = {m["id"]: m for m in json.loads(capsys.readouterr().out)}
    assert listed["m2"]["distance_m"] == pytest.approx(0.025) and listed["m2"]["unit"] == "V/in"
    assert run("meter", "add", box_survey, "bad id", "--gain", "1") == 2
    assert "contains spaces" in capsys.readouterr().err


def test_import_meter_log_on_box_site(box_survey: Path, tmp_path: Path) -> None:
    track = tmp_path / "walk.csv"
    track.write_text(
        "time,x,y\n2024-05-02T09:00:00Z,1,1\n2024-05-02T09:00:10Z,9,1\n2024-05-02T09:00:20Z,9,5\n"
        "2024-05-02T09:00:30Z,12,5\n"
    )
    log = tmp_path / "log.csv"
    log.write_text(
        "time,value\n2024-05-02T09:00:05Z,1.2 kV/m\n2024-05-02T09:00:15Z,900 V/m\n"
        "2024-05-02T09:00:29Z,5 V/m\n2024-05-02T09:05:00Z,7 V/m\n"
    )
    with Survey.open(box_survey, write=True) as survey:
        plan = {p.label: (p.x, p.y) for p in survey.plan.points}
        result = import_meter_log(log, track, survey.site, plan, sign=survey.sign_convention)
        stored = survey.add_readings(result.readings, source=log.name)
    assert [(r.x, r.y) for r in stored] == [(5.0, 1.0), (9.0, 3.0)]
    assert stored[0].value_v_per_m == 1200.0 and stored[0].note == "log log.csv"
    assert [u.entry.line for u in result.outside] == [4]  # (11.7, 5) is outside the 10 x 6 m box
    assert [u.entry.line for u in result.match.unplaced] == [5]
    assert any("outside the site outline" in line for line in result.report())


def test_point_times_log_import(box_survey: Path, tmp_path: Path) -> None:
    with Survey.open(box_survey, write=True) as survey:
        points = survey.plan.points[:3]
        plan = {p.label: (p.x, p.y) for p in survey.plan.points}
        times = tmp_path / "points.csv"
        times.write_text(
            "time,point\n"
            + "".join(f"2024-05-02T09:00:{10 * i:02d}Z,{p.label}\n" for i, p in enumerate(points))
        )
        log = tmp_path / "log.csv"
        log.write_text("2024-05-02T09:00:01Z,10,V/m\n2024-05-02T09:00:21Z,30,V/m\n")
        result = import_meter_log(log, times, survey.site, plan, tolerance_s=10)
    assert [r.point for r in result.readings] == [points[0].label, points[2].label]
    assert [(r.x, r.y) for r in result.readings] == [
        (points[0].x, points[0].y),
        (points[2].x, points[2].y),
    ]
    with pytest.raises(MapperError, match="point times need the survey's plan"):
        from mapper.readings.tracks import read_positions

        read_positions(times)
