"""Meter logs placed on walked tracks by time; CSV, GPX and NMEA tracks; point times."""

from __future__ import annotations

from datetime import UTC, date, datetime, timedelta, timezone
from pathlib import Path

import gpxpy
import gpxpy.gpx
import pynmea2
import pytest

from mapper.errors import MapperError
from mapper.readings.log_match import match_log_to_track, read_meter_log
from mapper.readings.tracks import (
    read_gpx,
    read_nmea,
    read_point_times,
    read_track,
    read_track_csv,
    track_from_point_times,
)

T0 = datetime(2024, 5, 2, 9, 0, 0, tzinfo=UTC)


def _write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _iso(seconds: float) -> str:
    return (T0 + timedelta(seconds=seconds)).isoformat().replace("+00:00", "Z")


def test_log_placed_by_linear_interpolation_in_time(tmp_path: Path) -> None:
    # Track: (0,0) at 0 s, (10,0) at 10 s, (10,6) at 16 s, then a 60 s gap, (0,6) at 76 s.
    track = _write(
        tmp_path,
        "walk.csv",
        f"time,x,y\n{_iso(0)},0,0\n{_iso(10)},10,0\n{_iso(16)},10,6\n{_iso(76)},0,6\n",
    )
    log = _write(
        tmp_path,
        "log.csv",
        "time,value,unit\n"
        f"{_iso(2.5)},120,V/m\n"  # 1/4 of the first leg -> (2.5, 0)
        f"{_iso(13)},1.5,kV/m\n"  # halfway up the second leg -> (10, 3)
        f"{_iso(16)},40,V/in\n"  # exactly on a fix -> (10, 6)
        f"{_iso(46)},99,V/m\n"  # 30 s from both ends of the gap: not placed
        f"{_iso(70)},98,V/m\n"  # 6 s before (0,6): 54/60 of the way -> (1, 6)
        f"{_iso(80)},97,V/m\n"  # 4 s after the track ends: held at (0, 6)
        f"{_iso(95)},96,V/m\n",  # 19 s after the end: not placed
    )
    entries = read_meter_log(log)
    assert [e.line for e in entries] == [2, 3, 4, 5, 6, 7, 8]
    assert entries[2].value_v_per_m == pytest.approx(40 / 0.0254)  # international inch
    result = match_log_to_track(entries, read_track(track), tolerance_s=10.0)
    positions = [(p.entry.line, round(p.x, 9), round(p.y, 9)) for p in result.placed]
    assert positions == [
        (2, 2.5, 0.0),
        (3, 10.0, 3.0),
        (4, 10.0, 6.0),
        (6, 1.0, 6.0),
        (7, 0.0, 6.0),
    ]
    assert [u.entry.line for u in result.unplaced] == [5, 8]
    assert "60 s gap in the track (09:00:16 to 09:01:16)" in result.unplaced[0].reason
    assert "after the track ends" in result.unplaced[1].reason
    assert result.report()[0].startswith("5 log readings placed, 2 not placed")
    assert not result.lonlat


def test_log_out_of_time_order_names_the_line(tmp_path: Path) -> None:
    log = _write(tmp_path, "log.csv", f"{_iso(0)},1\n{_iso(10)},2\n{_iso(5)},3\n")
    with pytest.raises(MapperError, match="earlier than line 2's .*must be in time order") as info:
        read_meter_log(log, default_unit="V/m")
    assert info.value.where == f"{log}:3"


@pytest.mark.parametrize(
    ("text", "where", "fragment"),
    [
        ("time,value\nyesterday,1\n", ":2: time", "not an ISO 8601 time"),
        ("time,value\n2024-05-02T09:00:00Z,abc\n", ":2: value", "not a field value"),
        ("time,value\n2024-05-02T09:00:00Z,12\n", ":2: value", "has no unit"),
        ("time,reading\n2024-05-02T09:00:00Z,12\n", ":1", "no 'value' column"),
        ("2024-05-02T09:00:00Z,12,V/m,x\n", ":1", "4 fields; a log line is time"),
        ("time,value,unit\n2024-05-02T09:00:00Z,5,MV/m\n", ":2: value", "dielectric strength"),
    ],
)
def test_bad_logs(tmp_path: Path, text: str, where: str, fragment: str) -> None:
    with pytest.raises(MapperError, match=fragment) as info:
        read_meter_log(_write(tmp_path, "log.csv", text))
    assert info.value.where.endswith(where)


def test_log_time_zone_and_sign(tmp_path: Path) -> None:
    # 11:00:05+02:00 is 09:00:05 UTC; atmospheric sign flips the value to the physics convention.
    log = _write(
        tmp_path, "log.csv", "2024-05-02T11:00:05+02:00,150,V/m\n2024-05-02 09:00:06,1,kV/m\n"
    )
    entries = read_meter_log(log, sign="atmospheric")
    assert entries[0].time == T0 + timedelta(seconds=5)
    assert entries[1].time == T0 + timedelta(seconds=6)  # no offset: read as UTC
    assert [e.value_v_per_m for e in entries] == [-150.0, -1000.0]
    cest = timezone(timedelta(hours=2))
    local = read_meter_log(
        _write(tmp_path, "l2.csv", "2024-05-02 11:00:06,1,kV/m\n"), naive_tz=cest
    )
    assert local[0].time == T0 + timedelta(seconds=6)


def test_nothing_placed_suggests_time_zones(tmp_path: Path) -> None:
    track = read_track_csv(_write(tmp_path, "t.csv", f"time,x,y\n{_iso(0)},0,0\n{_iso(60)},1,0\n"))
    log = read_meter_log(_write(tmp_path, "l.csv", f"{_iso(7200)},5,V/m\n"))
    result = match_log_to_track(log, track)
    assert not result.placed and "check both files' time zones" in result.warnings[0]


def test_track_out_of_order_and_bad_columns(tmp_path: Path) -> None:
    path = _write(tmp_path, "t.csv", f"time,x,y\n{_iso(10)},0,0\n{_iso(5)},1,0\n")
    with pytest.raises(MapperError, match="earlier than the previous position") as info:
        read_track_csv(path)
    assert info.value.where == f"{path}:3"
    with pytest.raises(MapperError, match="expected columns time,x,y"):
        read_track_csv(_write(tmp_path, "u.csv", "time,e,n\n"))
    with pytest.raises(MapperError, match="not a WGS 84 position"):
        read_track_csv(_write(tmp_path, "v.csv", f"time,lon,lat\n{_iso(0)},9.1,148.7\n"))


def test_gpx_track_is_lonlat_in_time_order(tmp_path: Path) -> None:
    gpx = gpxpy.gpx.GPX()
    trk = gpxpy.gpx.GPXTrack()
    seg = gpxpy.gpx.GPXTrackSegment()
    for i in range(3):
        seg.points.append(
            gpxpy.gpx.GPXTrackPoint(
                48.7654 + 1e-5 * i, 9.1234 + 2e-5 * i, time=T0 + timedelta(seconds=2 * i)
            )
        )
    trk.segments.append(seg)
    gpx.tracks.append(trk)
    path = _write(tmp_path, "walk.gpx", gpx.to_xml())
    track = read_track(path)
    assert track.lonlat and len(track.fixes) == 3
    assert (track.fixes[1].x, track.fixes[1].y) == pytest.approx((9.12342, 48.76541))
    assert track.fixes[2].time == T0 + timedelta(seconds=4)
    log = read_meter_log(_write(tmp_path, "l.csv", f"{_iso(3)},7,V/m\n"))
    placed = match_log_to_track(log, track).placed[0]
    assert (placed.x, placed.y) == pytest.approx((9.12343, 48.765415))  # halfway, 2 s to 4 s
    with pytest.raises(MapperError, match="not a readable GPX"):
        read_gpx(_write(tmp_path, "bad.gpx", "<gpx><trk>"))


def test_nmea_published_example_and_generated_sentences(tmp_path: Path) -> None:
    # The widely reproduced RMC example: 12:35:19 UTC on 23 March 1994 at 48 deg 07.038' N,
    # 11 deg 31.000' E, i.e. 48.1173 N, 11.516667 E (ddmm.mmm: degrees + minutes / 60).
    example = "$GPRMC,123519,A,4807.038,N,01131.000,E,022.4,084.4,230394,003.1,W*6A"
    second = pynmea2.RMC(
        "GP",
        "RMC",
        ("123521", "A", "4807.040", "N", "01131.010", "E", "1.0", "84.4", "230394", "3.1", "W"),
    )
    void = pynmea2.RMC("GP", "RMC", ("123522", "V", "", "", "", "", "", "", "230394", "", ""))
    text = "\n".join([example, "$GPRMC,garbage*00", str(second), str(void), "noise"]) + "\n"
    track = read_nmea(_write(tmp_path, "walk.nmea", text))
    assert track.lonlat and track.skipped == 3 and len(track.fixes) == 2
    first = track.fixes[0]
    assert first.time == datetime(1994, 3, 23, 12, 35, 19, tzinfo=UTC)
    assert (first.x, first.y) == pytest.approx((11 + 31.0 / 60, 48 + 7.038 / 60))
    assert track.fixes[1].where.endswith(":3")


def test_nmea_gga_only_needs_a_date(tmp_path: Path) -> None:
    gga = [
        pynmea2.GGA(
            "GP",
            "GGA",
            (
                hms,
                "4807.038",
                "N",
                "01131.000",
                "E",
                "1",
                "08",
                "0.9",
                "545.4",
                "M",
                "46.9",
                "M",
                "",
                "",
            ),
        )
        for hms in ("235959", "000001")
    ]
    path = _write(tmp_path, "walk.nmea", "\n".join(str(m) for m in gga) + "\n")
    with pytest.raises(MapperError, match="give the survey date"):
        read_nmea(path)
    track = read_nmea(path, on_date=date(2024, 5, 2))
    assert [f.time for f in track.fixes] == [
        datetime(2024, 5, 2, 23, 59, 59, tzinfo=UTC),
        datetime(2024, 5, 3, 0, 0, 1, tzinfo=UTC),  # rolled over midnight
    ]


def test_point_times_make_a_track_through_planned_points(tmp_path: Path) -> None:
    plan = {"A1": (0.0, 0.0), "A2": (2.0, 0.0), "A3": (4.0, 0.0)}
    visits = read_point_times(
        _write(tmp_path, "pts.csv", f"time,point\n{_iso(0)},A1\n{_iso(20)},A2\n{_iso(40)},A3\n")
    )
    track = track_from_point_times(visits, plan, "pts.csv")
    log = read_meter_log(
        _write(tmp_path, "l.csv", f"{_iso(2)},1,V/m\n{_iso(10)},2,V/m\n{_iso(39)},3,V/m\n")
    )
    result = match_log_to_track(log, track, tolerance_s=15.0, snap_s=3.0)
    got = [(p.point, round(p.x, 9), round(p.y, 9)) for p in result.placed]
    assert got == [("A1", 0.0, 0.0), (None, 1.0, 0.0), ("A3", 4.0, 0.0)]
    with pytest.raises(MapperError, match="grid point 'B9' is not in the plan") as info:
        track_from_point_times(
            read_point_times(_write(tmp_path, "p2.csv", f"time,point\n{_iso(0)},B9\n")),
            plan,
            "p2.csv",
        )
    assert info.value.where == "p2.csv:2"
    with pytest.raises(MapperError, match="point times must be in time order"):
        read_point_times(_write(tmp_path, "p3.csv", f"time,point\n{_iso(9)},A1\n{_iso(1)},A2\n"))
