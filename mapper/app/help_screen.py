"""The help screen: every key, what the map shows, and the usual cautions."""

from __future__ import annotations

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from mapper.app.keys import KEYS, OTHER_KEYS, key_name
from mapper.app.session import DRY_AIR_RH_PERCENT

CAUTION = (
    "Cautions: charged objects can discharge into people and equipment; where flammable gases, "
    "vapours or dusts may be present follow the site's hazardous-area rules and local codes, use "
    "only meters approved for that area, and stop work when lightning is near. The action levels "
    "shown are defaults; the site's ESD control plan decides."
)


def help_table() -> Table:
    """All keys as a two-column table."""
    table = Table(show_header=True, header_style="bold", box=None, pad_edge=False, expand=True)
    table.add_column("key", no_wrap=True)
    table.add_column("does")
    for key, text in OTHER_KEYS:
        table.add_row(key, text)
    for key, _, _, text in KEYS:
        table.add_row(key_name(key), text)
    return table


class HelpScreen(ModalScreen[None]):
    """Keys and conventions; any of Esc, F1 or q closes it."""

    CSS_PATH = "help_screen.tcss"
    BINDINGS = [
        Binding("escape,f1,q", "close", "Close"),
    ]

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help"):
            yield Static(Text("mapper walk: keys", style="bold"), id="help-title")
            yield Static(help_table(), id="help-keys")
            yield Static(
                "Readings are saved to the survey file before the status line says 'saved'. "
                "Undo and edits keep the old value in the file, marked as replaced. "
                f"Relative humidity below {DRY_AIR_RH_PERCENT:g} % is flagged: charging rises "
                "sharply in dry air. The live map uses the readings corrected for calibration, zero "
                "and drift, as the exports do; the final map is 'mapper grid'.",
                id="help-notes",
            )
            yield Static(CAUTION, id="help-caution")
            yield Static("Esc or F1 closes this help.", id="help-close")

    def action_close(self) -> None:
        self.dismiss(None)
