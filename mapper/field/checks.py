"""Input checks shared by every field method; messages quote what was received."""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np

from mapper.errors import MapperError


def choose(value: str, accepted: Iterable[str], what: str, where: str) -> str:
    """Return ``value`` if it is one of ``accepted``, else raise one uniform message.

    Parameters
    ----------
    value : str
        The option given.
    accepted : iterable of str
        The accepted options.
    what : str
        Name of the option, for the message.
    where : str
        Where it was given (function or command option).
    """
    accepted = tuple(accepted)
    if not isinstance(value, str) or value.lower() not in accepted:
        raise MapperError(
            f"unknown {what} {value!r}; accepted: {', '.join(accepted)}", where=where
        )
    return value.lower()


def positive(value: float | None, what: str, where: str, *, allow_zero: bool = False) -> float:
    """Return ``value`` as float if finite and positive (or zero when allowed)."""
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise MapperError(f"{what} must be a number, got {value!r}", where=where) from None
    if not np.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
        bound = ">= 0" if allow_zero else "> 0"
        raise MapperError(f"{what} must be finite and {bound}, got {value!r}", where=where)
    return v


def points(xy, where: str, name: str = "xy") -> np.ndarray:
    """Return ``xy`` as a float (n, 2) array of finite coordinates, metres."""
    arr = np.asarray(xy, dtype=float)
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise MapperError(f"{name} must be an (n, 2) array of metres, got shape {arr.shape}", where=where)
    bad = ~np.isfinite(arr).all(axis=1)
    if bad.any():
        raise MapperError(
            f"{name} has {int(bad.sum())} non-finite coordinate row(s), first at index "
            f"{int(np.flatnonzero(bad)[0])}; only finite metres are accepted",
            where=where,
        )
    return arr


def readings(xy, values, where: str, *, minimum: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Return checked positions (n, 2) m and values (n,) V/m, at least ``minimum`` of them."""
    xy = points(xy, where)
    z = np.asarray(values, dtype=float)
    if z.ndim != 1 or z.shape[0] != xy.shape[0]:
        raise MapperError(
            f"values must be a 1-D array matching xy's {xy.shape[0]} rows, got shape {z.shape}",
            where=where,
        )
    bad = ~np.isfinite(z)
    if bad.any():
        raise MapperError(
            f"values has {int(bad.sum())} NaN or infinite reading(s), first at index "
            f"{int(np.flatnonzero(bad)[0])}; drop or correct them first",
            where=where,
        )
    if z.shape[0] < minimum:
        raise MapperError(
            f"needs at least {minimum} readings, got {z.shape[0]}", where=where
        )
    return xy, z


def not_collinear(xy: np.ndarray, where: str, why: str) -> None:
    """Raise if all positions lie on one line (a linear trend or plane is then undetermined).

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Positions, metres.
    where : str
        Caller, for the message.
    why : str
        The method that needs a plane, for the message.
    """
    if xy.shape[0] < 3:
        raise MapperError(
            f"{why} needs at least 3 positions not on one line, got {xy.shape[0]}", where=where
        )
    centred = xy - xy.mean(axis=0)
    s = np.linalg.svd(centred, compute_uv=False)
    if s[0] == 0 or s[1] <= 1e-9 * s[0]:
        raise MapperError(
            f"{why} needs positions that are not all on one line; the {xy.shape[0]} positions "
            "given are collinear (add readings off the line or use method 'kriging' or 'idw')",
            where=where,
        )
