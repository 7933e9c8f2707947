"""The entry line: accepts only what a field value can contain, so action keys never type."""

from __future__ import annotations

from textual.widgets import Input

#: Characters a field value with a unit suffix can contain: digits, sign, decimal point,
#: exponent, space, and the letters and slash of V/m, kV/m, MV/m, V/cm, kV/cm, V/in, kV/in.
ENTRY_PATTERN = r"[0-9+\-.eE kKvVmMcCiInN/]*"


class EntryLine(Input):
    """Where readings are typed. Left/right arrows belong to the map (see the main screen);
    Backspace edits, Esc clears."""

    def __init__(self, *, id: str | None = None) -> None:  # noqa: A002 - Textual's name
        super().__init__(placeholder="type a reading, Enter saves", restrict=ENTRY_PATTERN, id=id)
