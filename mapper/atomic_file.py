"""Write an output file atomically: a temporary file in the same folder, renamed into place."""

from __future__ import annotations

import contextlib
import errno
import os
from collections.abc import Iterator
from pathlib import Path

from mapper.errors import MapperError

#: Marker in the names of temporary files; a leftover of a killed run carries it.
PART_MARK = ".part-"


def _temp_name(path: Path) -> Path:
    return path.with_name(f".{path.stem}{PART_MARK}{os.getpid()}{path.suffix}")


def clean_leftovers(path: Path) -> None:
    """Remove temporary files (and SQLite journals) a killed run left for ``path``."""
    prefix = f".{path.stem}{PART_MARK}"
    for old in path.parent.glob(f"{prefix}*"):
        pid = old.name[len(prefix):].split(".", 1)[0].split("-", 1)[0]
        if pid.isdigit() and int(pid) != os.getpid() and _alive(int(pid)):
            continue  # another run is writing it right now
        with contextlib.suppress(OSError):
            old.unlink()


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _fsync(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


@contextlib.contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path to write; rename it to ``path`` when the block ends cleanly.

    Readers see at ``path`` either the earlier complete file or the new complete file, never a
    partial one. On an error the temporary file is removed and ``path`` is untouched; a run killed
    part way leaves only a hidden temporary file, removed by the next write of the same output.
    ``OSError`` (full disk, file too large, read-only folder) becomes a one-line
    :class:`~mapper.errors.MapperError` naming the output.

    Parameters
    ----------
    path : str or Path
        Final name of the output.
    """
    path = Path(path)
    clean_leftovers(path)
    tmp = _temp_name(path)
    try:
        yield tmp
        _fsync(tmp)
        os.replace(tmp, path)
    except OSError as exc:
        _remove(tmp)
        raise MapperError(f"cannot write: {describe_os_error(exc)}", where=str(path)) from None
    except BaseException:
        _remove(tmp)
        raise


def _remove(tmp: Path) -> None:
    for p in (tmp, tmp.with_name(tmp.name + "-journal"), tmp.with_name(tmp.name + "-wal"),
              tmp.with_name(tmp.name + "-shm")):
        with contextlib.suppress(OSError):
            p.unlink()


def describe_os_error(exc: OSError) -> str:
    """Say in a few words what an ``OSError`` means for an output (no space, too large, ...)."""
    names = {errno.ENOSPC: "no space left on the device", errno.EFBIG: "file too large for this system",
             errno.EROFS: "read-only file system", errno.EACCES: "permission denied",
             errno.EDQUOT: "disk quota exceeded"}
    return names.get(exc.errno, exc.strerror or str(exc))


__all__ = ["PART_MARK", "atomic_path", "clean_leftovers", "describe_os_error"]
