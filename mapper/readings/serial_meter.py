"""Live meter input: a meter that sends one reading per line over a serial port (pyserial).

Each line carries a number and, usually, a unit: ``-1.23 kV/m``, ``+0125 V/in``, ``E=2.1kV/m``,
``2.1,kV/m``. Anything before the number is ignored; a line without a unit takes the meter's
display unit. A line that cannot be read is handed on with its error so the entry line can show
it; the stream does not stop.

Typical use from a worker thread of the terminal app::

    with SerialMeterReader("/dev/ttyUSB0", default_unit="V/in") as meter:
        for line in meter.lines(stop_event):
            ...  # hand line to the UI with call_from_thread
"""

from __future__ import annotations

import re
import threading
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from mapper.errors import MapperError
from mapper.units import parse_field, to_physics_sign

#: Longest line accepted before the buffer is dropped as garbage, bytes.
MAX_LINE_BYTES = 256

_NUMBER_UNIT = re.compile(
    r"(?P<num>[+-]?\s*(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*"
    r"(?P<unit>[A-Za-z]+\s*/\s*[A-Za-z]+)?"
)


@dataclass(frozen=True)
class MeterLine:
    """One line received from the meter.

    Attributes
    ----------
    time : datetime
        When the line was received, UTC.
    raw : str
        The text of the line, without its line ending.
    value : float or None
        The number as sent.
    unit : str or None
        Its unit.
    value_v_per_m : float or None
        The field in V/m, physics sign convention.
    error : str or None
        Why the line could not be read; ``None`` for a good reading.
    """

    time: datetime
    raw: str
    value: float | None = None
    unit: str | None = None
    value_v_per_m: float | None = None
    error: str | None = None

    @property
    def ok(self) -> bool:
        """True for a line that gave a reading."""
        return self.error is None


def parse_meter_line(
    text: str, default_unit: str | None = None, sign: str = "physics"
) -> tuple[float, str, float]:
    """Parse one line sent by a meter.

    Parameters
    ----------
    text : str
        The line, e.g. ``"-1.23 kV/m"`` or ``"E=2.1kV/m"``.
    default_unit : str, optional
        Unit when the line has none.
    sign : str
        Sign convention of the meter (``physics`` or ``atmospheric``).

    Returns
    -------
    value : float
        Number as sent.
    unit : str
        Canonical unit.
    value_v_per_m : float
        Field in V/m, physics sign convention, checked against the breakdown of air.
    """
    stripped = text.strip()
    match = _NUMBER_UNIT.search(stripped.replace(",", " "))
    if not stripped or match is None:
        raise MapperError(
            f"no reading in {stripped!r}; expected a number and unit like '-1.2 kV/m'"
        )
    number = match.group("num").replace(" ", "")
    unit = match.group("unit")
    unit = unit.replace(" ", "") if unit else None
    if unit and unit.startswith("mV"):
        raise MapperError(
            f"{unit!r} (millivolt) is not an accepted field unit; expected V/m, kV/m, V/in, ..."
        )
    value, unit_name, si = parse_field(f"{number} {unit}" if unit else number, default_unit)
    return value, unit_name, to_physics_sign(si, sign)


class SerialMeterReader:
    """Read readings line by line from a serial port.

    Parameters
    ----------
    port : str
        Device or pyserial URL, e.g. ``/dev/ttyUSB0``, ``COM3``, ``loop://``.
    baudrate : int
        Line speed, baud.
    default_unit : str, optional
        Unit of lines without one (the meter's display unit).
    sign : str
        Sign convention of the meter.
    timeout_s : float
        How long one read waits for data, seconds; bounds how quickly :meth:`lines` notices
        its stop event.
    clock : callable, optional
        Returns the current UTC time (for tests).
    port_factory : callable, optional
        Opens the port; defaults to :func:`serial.serial_for_url`.
    """

    def __init__(
        self,
        port: str,
        baudrate: int = 9600,
        default_unit: str | None = None,
        sign: str = "physics",
        timeout_s: float = 0.2,
        clock: Callable[[], datetime] | None = None,
        port_factory: Callable[..., Any] | None = None,
    ) -> None:
        self.port = port
        self.baudrate = baudrate
        self.default_unit = default_unit
        self.sign = sign
        self.timeout_s = timeout_s
        self._clock = clock or (lambda: datetime.now(UTC))
        self._factory = port_factory
        self._serial: Any = None
        self._buffer = b""

    def open(self) -> SerialMeterReader:
        """Open the port; a port that cannot be opened is a :class:`MapperError`."""
        import serial

        factory = self._factory or serial.serial_for_url
        try:
            self._serial = factory(self.port, baudrate=self.baudrate, timeout=self.timeout_s)
        except (serial.SerialException, OSError, ValueError) as exc:
            raise MapperError(
                f"cannot open serial port {self.port!r}: {exc}; check the cable, the port name "
                "and that no other program holds it"
            ) from None
        return self

    def close(self) -> None:
        """Close the port (safe to call twice)."""
        if self._serial is not None:
            self._serial.close()
            self._serial = None

    def __enter__(self) -> SerialMeterReader:
        return self.open()

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _parse(self, raw: bytes) -> MeterLine:
        text = raw.decode("ascii", errors="replace").strip()
        now = self._clock()
        try:
            value, unit, si = parse_meter_line(text, self.default_unit, self.sign)
        except MapperError as exc:
            return MeterLine(now, text, error=exc.message)
        return MeterLine(now, text, value, unit, si)

    def _take_line(self) -> bytes | None:
        for i, byte in enumerate(self._buffer):
            if byte in b"\r\n":
                line, self._buffer = self._buffer[:i], self._buffer[i + 1 :]
                return line
        return None

    def read_line(self) -> MeterLine | None:
        """Wait up to about ``timeout_s`` for one complete non-empty line.

        Returns
        -------
        MeterLine or None
            The parsed line, or ``None`` when no complete line arrived in time (a partial line
            is kept for the next call).
        """
        if self._serial is None:
            raise MapperError(f"serial port {self.port!r} is not open")
        while True:
            line = self._take_line()
            while line is not None:
                if line.strip():
                    return self._parse(line)
                line = self._take_line()
            chunk = self._serial.read(max(1, self._serial.in_waiting))
            if not chunk:
                return None
            self._buffer += chunk
            if len(self._buffer) > MAX_LINE_BYTES and not any(
                end in self._buffer for end in (b"\r", b"\n")
            ):
                dropped, self._buffer = self._buffer, b""
                return MeterLine(
                    self._clock(),
                    dropped[:40].decode("ascii", errors="replace"),
                    error=f"no line ending in {len(dropped)} bytes; check the baud rate",
                )

    def lines(self, stop: threading.Event | None = None) -> Iterator[MeterLine]:
        """Yield lines until ``stop`` is set (checked at least every ``timeout_s``)."""
        while stop is None or not stop.is_set():
            line = self.read_line()
            if line is not None:
                yield line
