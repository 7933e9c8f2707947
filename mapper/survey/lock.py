"""One writer per survey: an advisory lock that dies with the process holding it."""

from __future__ import annotations

import errno
import fcntl
import os
from pathlib import Path

from mapper.atomic_file import describe_os_error, space_problem
from mapper.errors import MapperError


class WriterLock:
    """Exclusive ``flock`` on ``<survey>.lock``.

    The kernel drops a ``flock`` when its holder exits, however it exits (SIGKILL included), so
    a lock file left behind never blocks the next writer. Readers take no lock.

    Parameters
    ----------
    survey_path : Path
        The survey file.
    """

    def __init__(self, survey_path: Path) -> None:
        self.path = Path(str(survey_path) + ".lock")
        self._fd: int | None = None

    def acquire(self) -> None:
        """Take the lock or raise a one-line refusal naming the holder."""
        try:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as exc:
            raise self._refusal(exc) from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = os.pread(fd, 64, 0).decode(errors="replace").strip() or "another process"
            os.close(fd)
            raise MapperError(
                f"survey is open for writing by {holder}; close it there first (reading is still allowed)",
                where=str(self.path.with_suffix("")),
            ) from None
        try:
            os.ftruncate(fd, 0)
            os.pwrite(fd, f"process {os.getpid()}".encode(), 0)
        except OSError as exc:
            os.close(fd)
            raise self._refusal(exc) from None
        self._fd = fd

    def _refusal(self, exc: OSError) -> MapperError:
        cause = space_problem(self.path) if exc.errno in (errno.ENOSPC, errno.EFBIG) else None
        return MapperError(f"cannot take the writer lock {self.path.name}: {cause or describe_os_error(exc)}",
                           where=str(self.path.with_suffix("")))

    def release(self) -> None:
        """Release the lock (the file stays; it is harmless)."""
        if self._fd is not None:
            fcntl.flock(self._fd, fcntl.LOCK_UN)
            os.close(self._fd)
            self._fd = None
