"""The hotspot list: regions at or beyond the threshold in the live map, biggest first."""

from __future__ import annotations

from collections.abc import Sequence

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static

from mapper.presentation import hotspot_table

#: Columns of the app's hotspot table (keys of :data:`mapper.presentation.HOTSPOT_COLUMNS`).
COLUMNS = ("id", "pol", "status", "peak", "area", "p_max", "nearest", "zones")


class HotspotScreen(Screen[tuple[float, float] | None]):
    """Hotspots at the current threshold; Enter goes to the point nearest the chosen peak.

    Parameters
    ----------
    hotspots : sequence
        Hotspot records from the live refit.
    threshold_label : str
        The threshold in the display unit.
    engine : str
        What made the map and found the hotspots.
    unit : str
        Display unit.
    """

    CSS_PATH = "hotspot_screen.tcss"
    BINDINGS = [Binding("escape,f10", "close", "Back to the map")]

    def __init__(self, hotspots: Sequence, threshold_label: str, engine: str, unit: str) -> None:
        super().__init__()
        self.hotspots = tuple(hotspots)
        self.threshold_label = threshold_label
        self.engine = engine
        self.unit = unit

    def compose(self) -> ComposeResult:
        yield Static(
            f"Where the field reaches {self.threshold_label} (either sign), on the live map of the corrected "
            f"readings ({self.engine}). 'mapper hotspots' and the report use the stored field model "
            "('mapper grid'), whose outlines can differ; every reading at the level is in a hotspot in both.",
            id="hotspot-title",
        )
        yield DataTable(id="hotspot-table", cursor_type="row", zebra_stripes=True)
        yield Static(
            "Enter: go to the planned point nearest the peak · Esc: back to the map"
            if self.hotspots else "No hotspot at this threshold. Esc: back to the map",
            id="hotspot-help",
        )
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        header, rows = hotspot_table(self.hotspots, self.unit, COLUMNS, digits=3)
        table.add_columns(*header)
        for row in rows:
            table.add_row(*row)
        table.focus()

    @on(DataTable.RowSelected)
    def _go(self, event: DataTable.RowSelected) -> None:
        h = self.hotspots[event.cursor_row]
        self.dismiss((float(h.peak_x), float(h.peak_y)))

    def action_close(self) -> None:
        self.dismiss(None)


__all__ = ["HotspotScreen"]
