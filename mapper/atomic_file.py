"""Write an output file atomically: a temporary file in the same folder, renamed into place."""

from __future__ import annotations

import contextlib
import errno
import os
import resource
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
        cause = space_problem(tmp) if exc.errno in (errno.ENOSPC, errno.EFBIG) else None
        _remove(tmp)
        raise MapperError(f"cannot write: {cause or describe_os_error(exc)}", where=str(path)) from None
    except MapperError:
        _remove(tmp)
        raise
    except Exception:
        # a library that writes through its own I/O (GDAL, SQLite, a PDF or PNG stream) reports a
        # full disk in its own words ("Failed to commit transaction", "inconsistent stream state")
        cause = space_problem(tmp)
        _remove(tmp)
        if cause is None:
            raise
        raise MapperError(f"cannot write: {cause}", where=str(path)) from None
    except BaseException:
        _remove(tmp)
        raise


def _remove(tmp: Path) -> None:
    for p in (tmp, tmp.with_name(tmp.name + "-journal"), tmp.with_name(tmp.name + "-wal"),
              tmp.with_name(tmp.name + "-shm")):
        with contextlib.suppress(OSError):
            p.unlink()


#: Free space below which a failed write is put down to a full device, bytes (our own choice).
LOW_SPACE_BYTES = 1 << 20


def space_problem(path: str | Path) -> str | None:
    """Why writing ``path`` (and files beside it) may have failed for lack of room, or ``None``.

    Looks at the process's file-size limit (``ulimit -f``) against the sizes of ``path`` and its
    SQLite companions, then at the free space of the device holding it. Call it right after a
    write failed, before removing what was written, so the device is as full as the write left it.
    """
    path = Path(path)
    soft, _ = resource.getrlimit(resource.RLIMIT_FSIZE)
    if soft != resource.RLIM_INFINITY:
        sizes = [_size(p) for p in (path, *(path.with_name(path.name + s) for s in ("-journal", "-wal", "-shm")))]
        if max(sizes) + LOW_SPACE_BYTES >= soft:
            return f"file too large: this process may write files of at most {soft} bytes (ulimit -f)"
    try:
        stat = os.statvfs(path.parent)
    except OSError:
        return None
    free = stat.f_bavail * stat.f_frsize
    if free < LOW_SPACE_BYTES:
        return f"no space left on the device ({free // 1024} KiB free)"
    return None


def _size(path: Path) -> int:
    try:
        return path.stat().st_size
    except OSError:
        return 0


def describe_os_error(exc: OSError) -> str:
    """Say in a few words what an ``OSError`` means for an output (no space, too large, ...)."""
    names = {errno.ENOSPC: "no space left on the device", errno.EFBIG: "file too large for this system",
             errno.EROFS: "read-only file system", errno.EACCES: "permission denied",
             errno.EDQUOT: "disk quota exceeded"}
    return names.get(exc.errno, exc.strerror or str(exc))


__all__ = ["PART_MARK", "atomic_path", "clean_leftovers", "describe_os_error", "space_problem"]
