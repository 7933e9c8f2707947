"""What people read: the rows and sentences the CLI, the report and the survey app show alike.

Built once here from the map features, values in the display unit (fixed-point, never scientific
notation), so a hotspot reads the same on the terminal, on paper and in the app.
"""

from __future__ import annotations

import textwrap
from collections.abc import Sequence

from mapper.units import format_field

#: Hotspot table columns: key -> header.
HOTSPOT_COLUMNS: dict[str, str] = {
    "id": "id",
    "pol": "pol",
    "polarity": "polarity",
    "status": "status",
    "area": "area m²",
    "peak": "peak",
    "peak_at": "peak at x, y (m)",
    "mean": "mean",
    "max_reading": "max reading",
    "p_max": "P max",
    "readings": "readings",
    "nearest": "nearest asset",
    "zones": "zones",
}


def hotspot_cells(h, unit: str, *, digits: int = 4) -> dict[str, str]:
    """Every column's text for one hotspot (:class:`mapper.features.Hotspot`).

    Parameters
    ----------
    h : Hotspot
        The hotspot; values in V/m, positions in site metres.
    unit : str
        Display unit of the field values.
    digits : int
        Significant digits of the field values.
    """
    def field(v: float | None) -> str:
        return "-" if v is None else format_field(v, unit, digits)

    near = "-" if h.nearest_asset is None else f"{h.nearest_asset} ({h.nearest_asset_m:.1f} m)"
    return {
        "id": str(h.id),
        "pol": "+" if h.polarity == "positive" else "−",
        "polarity": h.polarity,
        "status": h.status,
        "area": f"{h.area_m2:.1f}",
        "peak": field(h.peak_v_per_m),
        "peak_at": f"{h.peak_x:.1f}, {h.peak_y:.1f}",
        "mean": field(h.mean_v_per_m),
        "max_reading": field(h.max_reading_v_per_m),
        "p_max": "-" if h.p_exceed_max is None else f"{h.p_exceed_max:.2f}",
        "readings": str(len(h.reading_ids)),
        "nearest": near,
        "zones": ", ".join(h.zones or ()) or "-",
    }


def hotspot_table(
    hotspots: Sequence, unit: str, columns: Sequence[str], *, wrap: dict[str, int] | None = None,
    digits: int = 4,
) -> tuple[list[str], list[list[str]]]:
    """Header and rows of a hotspot table.

    Parameters
    ----------
    hotspots : sequence of Hotspot
        In the order to show.
    unit : str
        Display unit.
    columns : sequence of str
        Keys of :data:`HOTSPOT_COLUMNS`, in order.
    wrap : dict, optional
        Column key -> width in characters: long text there is wrapped onto more lines (names are
        wrapped, never cut off).
    digits : int
        Significant digits of the field values.
    """
    unknown = [c for c in columns if c not in HOTSPOT_COLUMNS]
    if unknown:
        raise ValueError(f"unknown hotspot columns {unknown}; known: {list(HOTSPOT_COLUMNS)}")
    rows = []
    for h in hotspots:
        cells = hotspot_cells(h, unit, digits=digits)
        row = [cells[c] for c in columns]
        for c, width in (wrap or {}).items():
            if c in columns:
                i = list(columns).index(c)
                row[i] = textwrap.fill(row[i], width)
        rows.append(row)
    return [HOTSPOT_COLUMNS[c] for c in columns], rows


__all__ = ["HOTSPOT_COLUMNS", "hotspot_cells", "hotspot_table"]
