"""``mapper import --log --track`` end to end: log readings placed by linear interpolation in time."""

import pytest

from mapper.cli.main import main
from mapper.survey.store import Survey


def test_log_placed_along_track(box_survey, tmp_path, capsys):
    track = tmp_path / "track.csv"
    track.write_text("time,x,y\n2026-01-05T10:00:00Z,1,1\n2026-01-05T10:00:10Z,9,1\n2026-01-05T10:00:20Z,9,5\n")
    log = tmp_path / "log.csv"
    log.write_text(
        "time,value,unit\n2026-01-05T10:00:05Z,1.5,kV/m\n2026-01-05T10:00:15Z,-200,V/m\n"
        "2026-01-05T10:05:00Z,3,kV/m\n"  # five minutes after the track ends: reported, not imported
    )
    assert main(["import", str(box_survey), str(log), "--log", "--track", str(track)]) == 0
    err = capsys.readouterr().err
    assert "after" in err or "end" in err
    with Survey.open(box_survey) as s:
        got = sorted((r.x, r.y, r.value_v_per_m) for r in s.readings())
    # linear interpolation in time: t=5 s is halfway from (1,1) to (9,1); t=15 s halfway to (9,5)
    assert got == [pytest.approx((5.0, 1.0, 1500.0)), pytest.approx((9.0, 3.0, -200.0))]


def test_log_needs_track(box_survey, tmp_path, capsys):
    log = tmp_path / "log.csv"
    log.write_text("time,value,unit\n2026-01-05T10:00:05Z,1.5,kV/m\n")
    assert main(["import", str(box_survey), str(log), "--log"]) == 2
    assert "--track" in capsys.readouterr().err
