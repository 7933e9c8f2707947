"""Live meter input over a serial line, with a pseudo-terminal pair standing in for the meter."""

from __future__ import annotations

import os
import threading
import tty
from collections.abc import Iterator
from datetime import UTC, datetime

import pytest

from mapper.errors import MapperError
from mapper.readings.serial_meter import SerialMeterReader, parse_meter_line


@pytest.fixture
def pty_pair() -> Iterator[tuple[int, str]]:
    """The master end (we write as the meter) and the slave device path (the reader opens it)."""
    master, slave = os.openpty()
    tty.setraw(master)
    path = os.ttyname(slave)
    yield master, path
    os.close(master)
    os.close(slave)


def test_lines_from_device_are_parsed_in_order(pty_pair: tuple[int, str]) -> None:
    master, path = pty_pair
    stamp = datetime(2024, 5, 2, 9, 0, tzinfo=UTC)
    with SerialMeterReader(path, default_unit="V/in", timeout_s=0.2, clock=lambda: stamp) as meter:
        os.write(master, b"-1.23 kV/m\r\n+0125\r\n\r\nE=2.1kV/m\rOVER\n12.")
        got = [meter.read_line() for _ in range(4)]
        assert meter.read_line() is None  # "12." has no line ending yet: kept, not lost
        os.write(master, b"5 V/m\n")
        last = meter.read_line()
    assert [(g.value, g.unit, g.value_v_per_m) for g in got[:3]] == [
        (-1.23, "kV/m", pytest.approx(-1230.0)),
        (125.0, "V/in", pytest.approx(125 / 0.0254)),  # no unit: the meter's display unit
        (2.1, "kV/m", pytest.approx(2100.0)),
    ]
    assert got[3].error is not None and not got[3].ok and got[3].raw == "OVER"
    assert last is not None and last.value == 12.5 and last.time == stamp


def test_stream_stops_when_asked(pty_pair: tuple[int, str]) -> None:
    master, path = pty_pair
    stop = threading.Event()
    received = []
    with SerialMeterReader(path, default_unit="V/m", timeout_s=0.05) as meter:
        os.write(master, b"10\n20\n30\n")
        for line in meter.lines(stop):
            received.append(line.value)
            if len(received) == 3:
                stop.set()
    assert received == [10.0, 20.0, 30.0]


def test_open_failure_is_a_clear_error(tmp_path) -> None:
    with pytest.raises(MapperError, match="cannot open serial port .*check the cable"):
        SerialMeterReader(str(tmp_path / "no-such-device")).open()


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("", "no reading"),
        ("ERR", "no reading"),
        ("1.2 mV/m", "millivolt"),
        ("5 MV/m", "dielectric"),
    ],
)
def test_bad_lines(text: str, fragment: str) -> None:
    with pytest.raises(MapperError, match=fragment):
        parse_meter_line(text, "V/m")


def test_atmospheric_meter_sign() -> None:
    assert parse_meter_line("120 V/m", sign="atmospheric")[2] == -120.0
