"""The entry line where readings are typed.

It takes every character typed: a value that does not parse stays on the line with a message and
saves nothing (a filter that dropped characters would turn ``2,5`` into 25 or ``3O`` into 3).
Action keys are function keys, arrows and Ctrl combinations, so they never type.
"""

from __future__ import annotations

from textual.widgets import Input

#: No character filter: what is typed is what is parsed (kept for callers that pass it on).
ENTRY_PATTERN = None


class EntryLine(Input):
    """Where readings are typed. Left/right arrows belong to the map (see the main screen);
    Backspace edits, Esc clears."""

    def __init__(self, *, id: str | None = None) -> None:  # noqa: A002 - Textual's name
        super().__init__(placeholder="type a reading, Enter saves", id=id)
