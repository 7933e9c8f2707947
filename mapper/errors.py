"""The one exception type the command line turns into a one-line message."""

from __future__ import annotations


class MapperError(Exception):
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
