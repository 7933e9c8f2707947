"""What a run tells the user, as data: remarks, warnings and the reason there is no map.

Light on purpose (no numerical imports), so every command can collect its messages as notes and
the demo can show them exactly as the commands do.
"""

from __future__ import annotations

from dataclasses import dataclass

#: Levels of a :class:`Note`.
NOTE_LEVELS = ("remark", "warning", "reason")


@dataclass(frozen=True)
class Note:
    """Something a run has to tell the user.

    Attributes
    ----------
    level : str
        ``remark`` (how the result was made: printed to stdout), ``warning`` (something to check:
        stderr) or ``reason`` (why there is no field model: shown where the map would be).
    text : str
        The sentence.
    """

    level: str
    text: str

    def __post_init__(self) -> None:
        if self.level not in NOTE_LEVELS:
            raise ValueError(f"note level {self.level!r} is not one of {NOTE_LEVELS}")

    def __str__(self) -> str:
        return self.text


__all__ = ["NOTE_LEVELS", "Note"]
