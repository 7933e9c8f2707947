"""A full disk or a file-size limit: one line naming the file and the real cause (issue 15).

Two real limits of the operating system, no mocks: the process's file-size limit
(``RLIMIT_FSIZE``, POSIX ``setrlimit``; writes past it fail with ``EFBIG`` once ``SIGXFSZ`` is
ignored) in a child process, and a small ``tmpfs`` (writes fail with ``ENOSPC``), which needs the
right to mount and is skipped, saying so, without it. Each run checks the survey is byte for byte
what it was and that no output appeared under its final name.
"""

from __future__ import annotations

import contextlib
import os
import resource
import shutil
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from mapper.cli.main import main
from tests.conftest import ROOT

READINGS = "x,y,value,unit\n" + "".join(
    f"{x},{y},{(x * 37 + y * 11) % 50 + 5},V/m\n" for x in (1, 3, 5, 7, 9) for y in (1, 3, 5)
)
#: Many readings with long notes: enough to grow the survey's write-ahead log past the limits below.
MANY = "x,y,value,unit,note\n" + "".join(f"{1 + i % 9},{1 + i % 5},{i % 50 + 5},V/m,note {i:05d} {'n' * 60}\n"
                                          for i in range(3000))


@pytest.fixture
def survey(box_survey: Path, tmp_path: Path) -> Path:
    """The box survey with 15 readings, its write-ahead log folded into the file."""
    (tmp_path / "good.csv").write_text(READINGS)
    assert main(["import", str(box_survey), str(tmp_path / "good.csv")]) == 0
    (tmp_path / "many.csv").write_text(MANY)
    return box_survey


def mapper_limited(limit: int | None, *argv: object) -> subprocess.CompletedProcess:
    """Run ``mapper`` in a child whose files may grow to ``limit`` bytes (``None``: no limit)."""

    def limit_files() -> None:
        if limit is not None:
            signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
            resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    env = {**os.environ, "PYTHONDONTWRITEBYTECODE": "1"}  # no byte-code cache cut short by the limit
    env.pop("MAPPER_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "mapper", *map(str, argv)], capture_output=True, text=True,
                          preexec_fn=limit_files, env=env, cwd=ROOT, timeout=300)


def error_line(result: subprocess.CompletedProcess) -> str:
    lines = [line for line in result.stderr.splitlines() if not line.startswith("mapper: warning: ")]
    assert result.returncode == 2, result.stderr
    assert len(lines) == 1 and lines[0].startswith("mapper: error: "), result.stderr
    assert "Traceback" not in result.stderr and "internal error" not in result.stderr, result.stderr
    return lines[0]


def state(survey: Path) -> bytes:
    """The survey's bytes and those of its write-ahead log (the -shm index is derived data SQLite
    rebuilds, and an empty -wal is the same as none; sqlite.org/walformat.html)."""
    wal = Path(f"{survey}-wal")
    return survey.read_bytes() + (wal.read_bytes() if wal.exists() else b"")


# --------------------------------------------------------------------------- file-size limit
def test_import_over_the_file_size_limit(survey, tmp_path):
    before = state(survey)
    line = error_line(mapper_limited(40_000, "import", survey, tmp_path / "many.csv"))
    assert str(survey) in line and "file too large" in line and "ulimit -f" in line, line
    assert "damaged" not in line
    assert state(survey) == before


@pytest.mark.parametrize(("command", "limit"), [("export", 100_000), ("report", 40_000)])
def test_output_over_the_file_size_limit(survey, tmp_path, command, limit):
    out = tmp_path / ("out.gpkg" if command == "export" else "out.pdf")
    before = state(survey)
    line = error_line(mapper_limited(limit, command, survey, out, "--method", "idw"))
    assert str(out) in line and "file too large" in line, line
    assert not out.exists() and not out.with_suffix(".tif").exists()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []  # no temporary left
    assert state(survey) == before


def test_intact_survey_under_a_limit_below_its_shared_memory_file(survey):
    # SQLite's WAL index (-shm) grows in 32 KiB regions (sqlite.org/walformat.html); a 20 000-byte
    # limit stops it being made, which is no damage to the survey
    before = state(survey)
    line = error_line(mapper_limited(20_000, "info", survey))
    assert "damaged" not in line and ".recover" not in line, line
    assert str(survey) in line and "file too large" in line, line
    assert state(survey) == before


# --------------------------------------------------------------------------- a full device
@pytest.fixture
def small_disk(tmp_path: Path):
    """A 1 MiB tmpfs mounted on ``tmp_path/disk`` (needs the right to mount)."""
    disk = tmp_path / "disk"
    disk.mkdir()
    if shutil.which("mount") is None:
        pytest.skip("no mount command: the full-disk cases need a small tmpfs")
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1M", "tmpfs", str(disk)], capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs for the full-disk cases: {done.stderr.strip()}")
    try:
        yield disk
    finally:
        with contextlib.suppress(OSError):
            subprocess.run(["umount", str(disk)], check=False)


def fill(disk: Path, leave: int) -> None:
    """Fill the device with one file until ``leave`` bytes stay free."""
    stat = os.statvfs(disk)
    (disk / "filler").write_bytes(b"\0" * max(0, stat.f_bavail * stat.f_frsize - leave))


def test_import_to_a_full_disk(small_disk, survey, tmp_path):
    copy = small_disk / "box.survey"
    shutil.copy(survey, copy)
    fill(small_disk, 64 * 1024)
    before = state(copy)
    line = error_line(mapper_limited(None, "import", copy, tmp_path / "many.csv"))
    assert str(copy) in line and "no space left on the device" in line, line
    assert "damaged" not in line and "disk I/O error" not in line
    assert state(copy) == before


@pytest.mark.parametrize("command", ["export", "report", "export --csv"])
def test_output_to_a_full_disk(small_disk, survey, command):
    out = small_disk / ("out.pdf" if command == "report" else "out.gpkg")
    args = [command.split()[0], survey, out, "--method", "idw"]
    if command == "export --csv":  # the GeoPackage fits elsewhere; the CSV meets the full disk
        out = small_disk / "out.csv"
        args[2] = survey.parent / "out.gpkg"
        args += ["--csv", out]
    fill(small_disk, 0 if command == "export --csv" else 32 * 1024)
    before = state(survey)
    line = error_line(mapper_limited(None, *args))
    assert str(out) in line and "no space left on the device" in line, line
    assert "Failed to commit" not in line and "inconsistent stream state" not in line
    assert sorted(p.name for p in small_disk.iterdir()) == ["filler"]
    assert state(survey) == before
