"""The hotspot list: regions at or beyond the threshold in the live map, biggest first."""

from __future__ import annotations

from collections.abc import Callable, Sequence

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static


def _get(h, name: str, default=None):
    return h.get(name, default) if isinstance(h, dict) else getattr(h, name, default)


def hotspot_rows(hotspots: Sequence, fmt: Callable[[float], str], unit: str) -> list[tuple[str, ...]]:
    """Table rows: id, sign, status, peak, area, P(exceed), nearest asset, zones."""
    rows = []
    for h in hotspots:
        area = _get(h, "area_m2")
        p = _get(h, "p_exceed_max")
        asset, dist = _get(h, "nearest_asset"), _get(h, "nearest_asset_m")
        rows.append((
            str(_get(h, "id")),
            "+" if _get(h, "polarity") == "positive" else "−",
            str(_get(h, "status", "-")),
            fmt(_get(h, "peak_v_per_m")),
            f"{area:.1f} m²" if area is not None else "-",
            f"{p:.2f}" if p is not None else "-",
            f"{asset} ({dist:.1f} m)" if asset else "-",
            ", ".join(_get(h, "zones", ()) or ()) or "-",
        ))
    return rows


class HotspotScreen(Screen[tuple[float, float] | None]):
    """Hotspots at the current threshold; Enter goes to the point nearest the chosen peak.

    Parameters
    ----------
    hotspots : sequence
        Hotspot records from the live refit.
    fmt : callable
        Formats a V/m value for display.
    threshold_label : str
        The threshold in the display unit.
    engine : str
        What made the map and found the hotspots.
    unit : str
        Display unit.
    """

    CSS_PATH = "hotspot_screen.tcss"
    BINDINGS = [Binding("escape,f10", "close", "Back to the map")]

    def __init__(self, hotspots: Sequence, fmt: Callable[[float], str], threshold_label: str, engine: str,
                 unit: str) -> None:
        super().__init__()
        self.hotspots = tuple(hotspots)
        self.fmt = fmt
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
        table.add_columns("id", "sign", "status", "peak", "area", "P(exceed)", "nearest asset", "zones")
        for row in hotspot_rows(self.hotspots, self.fmt, self.unit):
            table.add_row(*row)
        table.focus()

    @on(DataTable.RowSelected)
    def _go(self, event: DataTable.RowSelected) -> None:
        h = self.hotspots[event.cursor_row]
        self.dismiss((float(_get(h, "peak_x")), float(_get(h, "peak_y"))))

    def action_close(self) -> None:
        self.dismiss(None)


__all__ = ["HotspotScreen", "hotspot_rows"]
