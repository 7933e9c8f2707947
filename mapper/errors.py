"""The exceptions mapper raises on purpose, under one base.

- :class:`MapperError`: a problem with the user's input or files. The command line prints it as
  one line naming where it is wrong and exits 2; it never shows a traceback.
- :class:`UsageError` (and :class:`NotFittedError`): the library called the wrong way by code, a
  bug in the caller rather than a user's mistake; the command line reports it as an internal
  error (exit 3).
"""

from __future__ import annotations


class MapperException(Exception):
    """Base of every exception mapper raises on purpose."""


class MapperError(MapperException):
    """A problem with the user's input or files, reported without a traceback.

    Parameters
    ----------
    message : str
        What is wrong and what would be accepted.
    where : str, optional
        Where it is wrong: ``file``, ``file:line`` or ``file:line: column``.
    """

    def __init__(self, message: str, where: str | None = None) -> None:
        self.message = message
        self.where = where
        super().__init__(f"{where}: {message}" if where else message)


class UsageError(MapperException, RuntimeError):
    """The library was called the wrong way (a programming error, not a user's mistake)."""


class NotFittedError(UsageError):
    """An estimator's ``predict`` or ``loo`` called before its ``fit``."""


__all__ = ["MapperError", "MapperException", "NotFittedError", "UsageError"]
