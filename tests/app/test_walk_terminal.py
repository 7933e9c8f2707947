"""The app in a real terminal (a pty): readings confirmed on screen survive a SIGKILL."""

from __future__ import annotations

import fcntl
import os
import pty
import re
import select
import signal
import struct
import subprocess
import sys
import termios
import time
from pathlib import Path

from mapper.survey.store import Survey

ROOT = Path(__file__).resolve().parents[2]
# CSI sequences, OSC sequences, and single-character escapes written by the terminal driver.
_ESCAPES = re.compile(r"\x1b\[[0-9;?<>=]*[ -/]*[@-~]|\x1b\][^\x07\x1b]*(?:\x07|\x1b\\)|\x1b[@-Z\\-_]")


class Terminal:
    """A child process on a pseudo-terminal of a given size, with its screen output as text."""

    def __init__(self, argv: list[str], cols: int = 100, rows: int = 30) -> None:
        self.master, slave = pty.openpty()
        fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", rows, cols, 0, 0))
        env = dict(os.environ, TERM="xterm-256color", COLUMNS=str(cols), LINES=str(rows))
        env.pop("TEXTUAL", None)
        self.proc = subprocess.Popen(
            argv, stdin=slave, stdout=slave, stderr=slave, cwd=ROOT, env=env, start_new_session=True,
        )
        os.close(slave)
        self.raw = b""

    def read(self, timeout: float = 0.1) -> None:
        while True:
            ready, _, _ = select.select([self.master], [], [], timeout)
            if not ready:
                return
            try:
                chunk = os.read(self.master, 65536)
            except OSError:
                return
            if not chunk:
                return
            self.raw += chunk
            timeout = 0.02

    @property
    def text(self) -> str:
        return _ESCAPES.sub("", self.raw.decode("utf-8", errors="replace"))

    def wait_for(self, needle: str, timeout: float = 20.0) -> bool:
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            self.read()
            if needle in self.text:
                return True
            if self.proc.poll() is not None:
                self.read()
                return needle in self.text
        return False

    def type(self, text: str) -> None:
        os.write(self.master, text.encode())

    def kill(self) -> None:
        os.killpg(self.proc.pid, signal.SIGKILL)
        self.proc.wait(timeout=10)
        os.close(self.master)


def test_confirmed_readings_survive_sigkill(box_survey: Path):
    argv = [sys.executable, "-m", "mapper", "walk", str(box_survey), "--no-conditions"]
    term = Terminal(argv)
    try:
        assert term.wait_for("new walk, start at point A1"), term.text[-2000:]
        confirmed = []
        for value, label in (("12", "A1"), ("-3.5", "A2"), ("0.02kV/m", "A3"), ("7", "A4")):
            term.type(value + "\r")
            message = f"saved point {label} = {value.replace('kV/m', '')}"
            assert term.wait_for(message), term.text[-2000:]
            confirmed.append(label)
        term.type("44")  # typed but never entered: not a reading
        time.sleep(0.3)
    finally:
        term.kill()
    assert term.proc.returncode == -signal.SIGKILL
    with Survey.open(box_survey, write=True) as survey:  # the killed writer's lock is gone
        readings = survey.readings()
        assert [r.point for r in readings] == confirmed
        assert [(r.entered_value, r.entered_unit) for r in readings] == [
            (12.0, "V/m"), (-3.5, "V/m"), (0.02, "kV/m"), (7.0, "V/m"),
        ]
        assert survey.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
