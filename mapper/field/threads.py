"""Threads of the BLAS/LAPACK libraries that numpy and scipy load (OpenBLAS).

numpy and scipy each bring their own OpenBLAS, and each runs its dense algebra on as many threads
as there are cores. Two kinds of work suffer from that:

* stacks of small systems (one per neighbourhood, thousands per call): every member is too small
  to split, so the extra threads only wake up and wait; and the moving-neighbourhood code
  already spreads its blocks over a thread pool of its own, so the threads multiply;
* any dense algebra while another program keeps a core busy: OpenBLAS splits the work evenly, so
  each call waits for the thread that shares its core with the other program.

:func:`blas_threads` sets the thread count of every OpenBLAS loaded in the process for the
duration of a ``with`` block. The libraries are found among the shared objects mapped into the
process (``/proc/self/maps``, Linux) and called through ``ctypes``; where none is found (another
BLAS, another system) it does nothing.
"""

from __future__ import annotations

import ctypes
import os
import threading
from collections.abc import Iterator
from contextlib import contextmanager

_SETTERS = ("openblas_set_num_threads", "scipy_openblas_set_num_threads", "scipy_openblas_set_num_threads64_",
            "openblas_set_num_threads64_")
_GETTERS = ("openblas_get_num_threads", "scipy_openblas_get_num_threads", "scipy_openblas_get_num_threads64_",
            "openblas_get_num_threads64_")
_LOCK = threading.RLock()
_LIBS: list[tuple[object, object]] | None = None
_ORIGINAL: list[int] = []  # each library's thread count when first found (its default: the cores)


def _find(lib: ctypes.CDLL, names: tuple[str, ...]):
    for name in names:
        f = getattr(lib, name, None)
        if f is not None:
            return f
    return None


def _libraries() -> list[tuple[object, object]]:
    """(setter, getter) of each OpenBLAS mapped into the process (found once)."""
    global _LIBS
    if _LIBS is not None:
        return _LIBS
    import numpy  # noqa: F401  (both loaded, so both are mapped)
    import scipy.linalg  # noqa: F401

    paths: list[str] = []
    try:
        with open("/proc/self/maps", encoding="utf-8") as maps:
            for line in maps:
                path = line.split()[-1] if line.strip() else ""
                if "openblas" in os.path.basename(path).lower() and ".so" in path and path not in paths:
                    paths.append(path)
    except OSError:  # pragma: no cover - not Linux
        paths = []
    libs = []
    for path in paths:
        try:
            lib = ctypes.CDLL(path)
        except OSError:  # pragma: no cover
            continue
        setter, getter = _find(lib, _SETTERS), _find(lib, _GETTERS)
        if setter is not None and getter is not None:
            setter.argtypes, setter.restype = [ctypes.c_int], None
            getter.argtypes, getter.restype = [], ctypes.c_int
            libs.append((setter, getter))
    _ORIGINAL[:] = [int(get()) for _, get in libs]
    _LIBS = libs
    return libs


def current() -> list[int]:
    """Thread count of each OpenBLAS found (empty when none is)."""
    return [int(get()) for _, get in _libraries()]


def usable_cores() -> int:
    """Cores this process may run on (its CPU affinity where the system tells it)."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def free_cores() -> int:
    """Cores not kept busy by other programs: usable cores minus the others' load, at least 1.

    The others' load is the 1-minute load average less one (the calling thread itself). A
    heuristic of ours: the load average lags, so a core freed a moment ago still counts as busy.
    """
    cores = usable_cores()
    try:
        others = max(0.0, os.getloadavg()[0] - 1.0)
    except OSError:  # pragma: no cover
        others = 0.0
    return max(1, min(cores, round(cores - others)))


@contextmanager
def blas_threads(n: int = 1) -> Iterator[None]:
    """Run the ``with`` block with every OpenBLAS on ``n`` threads (at most its default).

    The counts found on entry are restored on exit, so a block inside another sets its own count
    for its duration. The setting is process-wide (OpenBLAS has no other), so it also holds for
    the block's worker threads.
    """
    with _LOCK:
        libs = _libraries()
        before = [int(get()) for _, get in libs]
        for (setter, _), top in zip(libs, _ORIGINAL, strict=True):
            setter(max(1, min(int(n), top)))
    try:
        yield
    finally:
        with _LOCK:
            for (setter, _), b in zip(libs, before, strict=True):
                setter(b)
