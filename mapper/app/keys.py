"""The main screen's keys, in one table shared by the footer, the help screen and the docs.

Action keys are function keys, arrows, page keys and a few Ctrl combinations, so they never
collide with typing a reading; the entry line accepts only characters a field value can hold.
"""

from __future__ import annotations

from textual.binding import Binding

#: (key, action, footer label, help text). ``priority`` bindings beat the entry line's own keys.
KEYS: tuple[tuple[str, str, str, str], ...] = (
    ("f1", "help", "Help", "this help"),
    ("f2", "jump", "Go", "go to a point by its label (e.g. C4)"),
    ("f3", "suggested", "Sugg", "go to the next suggested point"),
    ("f4", "free", "Free", "free-position reading: enter x, y or move the cursor (F4 again: back to grid)"),
    ("f5", "conditions", "RH", "record conditions: relative humidity % and temperature °C"),
    ("f6", "edit", "Edit", "edit a reading here: its value, note or 'doubtful' flag (or note the place)"),
    ("f7", "arm('reference')", "Ref", "the next value is a reference-station reading"),
    ("f8", "arm('zero')", "Zero", "the next value is a zero reading (meter on the grounded plate)"),
    ("f9", "layer", "Map", "switch map: readings / field estimate / standard deviation"),
    ("f10", "hotspots", "Hot", "list the hotspots at the current threshold"),
    ("f12", "settings", "Set", "change threshold and display unit"),
    ("ctrl+z", "undo", "Undo", "undo the last reading (kept in the file, marked undone)"),
    ("ctrl+q", "app.quit", "Quit", "quit (every saved reading is already on disk)"),
)

#: Keys without a footer entry, listed on the help screen.
OTHER_KEYS: tuple[tuple[str, str], ...] = (
    ("0-9 . - + e", "type a value; a unit suffix such as kV/m or V/in overrides the display unit"),
    ("Enter", "save the value at the current point and move to the next point to do"),
    ("Esc", "clear the entry line and cancel a reference/zero entry"),
    ("← → ↑ ↓", "neighbouring grid point (in free-position mode: nudge the cursor)"),
    ("PgDn / PgUp", "next / previous point still to do, in walking order"),
    ("mouse click", "go to the nearest point (in free-position mode: place the cursor)"),
)

MOVE_BINDINGS = [
    Binding("up", "move('up')", "", show=False, priority=True),
    Binding("down", "move('down')", "", show=False, priority=True),
    Binding("left", "move('left')", "", show=False, priority=True),
    Binding("right", "move('right')", "", show=False, priority=True),
    Binding("pagedown", "unvisited(1)", "Next to do", show=False, priority=True),
    Binding("pageup", "unvisited(-1)", "Prev to do", show=False, priority=True),
    Binding("escape", "clear", "", show=False),
]


def bindings() -> list[Binding]:
    """Bindings of the main screen."""
    shown = [
        Binding(key, action, label, priority=True, tooltip=text)
        for key, action, label, text in KEYS
    ]
    return shown + MOVE_BINDINGS


def key_name(key: str) -> str:
    """How a key is written on screen: ``F1``, ``Ctrl+Z``."""
    return "+".join(part.capitalize() if len(part) > 2 else part.upper() for part in key.split("+"))
