"""Reading a user's text file whole, with a one-line error when it is not UTF-8 text."""

from __future__ import annotations

import io
from pathlib import Path

from mapper.errors import MapperError


def read_utf8(path: str | Path, what: str = "file") -> str:
    """The text of a UTF-8 file (a leading byte-order mark is dropped).

    Parameters
    ----------
    path : str or Path
        The file.
    what : str
        What the file is, for the message (e.g. ``"calibration file"``).

    Raises
    ------
    MapperError
        When the file cannot be read or is not UTF-8 text (a binary file, a spreadsheet saved
        as UTF-16 or a legacy code page), naming the line of the first bad byte.
    """
    path = Path(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise MapperError(f"cannot read {what}: {exc.strerror}", where=str(path)) from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        hint = " (e.g. 'CSV UTF-8' in a spreadsheet)" if path.suffix.lower() == ".csv" else ""
        raise MapperError(
            f"{what} is not UTF-8 text ({exc.reason} at byte {exc.start}); save it as UTF-8{hint}",
            where=f"{path}:{line}",
        ) from None


def open_utf8(path: str | Path, what: str = "file") -> io.StringIO:
    """:func:`read_utf8` as a text stream for :mod:`csv` (newlines kept as written)."""
    return io.StringIO(read_utf8(path, what), newline="")
