"""The map legend: colour ramp with values in the display unit, and the drawn symbols."""

from __future__ import annotations

import numpy as np
from rich.color import Color
from rich.style import Style
from rich.text import Text
from textual.widgets import Static

from mapper.app.palette import FEATURE_COLOURS, diverging, sequential
from mapper.units import format_field

#: Width of the colour ramp, cells.
RAMP_CELLS = 21


def _swatch(text: Text, colour: str, label: str) -> None:
    text.append("■ ", Style(color=Color.parse(colour)))
    text.append(label)


def legend_text(layer: str, scale_v_per_m: float, unit: str, threshold_v_per_m: float) -> Text:
    """Legend lines for a map layer.

    Parameters
    ----------
    layer : str
        ``readings``, ``estimate`` or ``std``.
    scale_v_per_m : float
        Full-colour magnitude, V/m.
    unit : str
        Display unit. Signed values are in the survey's sign convention (the map colours them
        the same way), so red is positive as the meter reads.
    threshold_v_per_m : float
        Action level, V/m (marked on the ramp of the signed layers).
    """
    text = Text()
    if layer == "std":
        values = np.linspace(0.0, scale_v_per_m, RAMP_CELLS)
        colours = sequential(values, scale_v_per_m)
        left, right = "0", format_field(scale_v_per_m, unit, 3)
    else:
        values = np.linspace(-scale_v_per_m, scale_v_per_m, RAMP_CELLS)
        colours = diverging(values, scale_v_per_m)
        left = format_field(-scale_v_per_m, unit, 3)
        right = format_field(scale_v_per_m, unit, 3)
    for c in colours:
        text.append("█", Style(color=Color.from_rgb(*map(int, c))))
    text.append("\n")
    if layer == "std":
        text.append(f"{left:<{RAMP_CELLS // 2}}{right:>{RAMP_CELLS - RAMP_CELLS // 2}}\n")
    else:
        mid = RAMP_CELLS // 2
        text.append(f"{left:<{mid}}0{right:>{RAMP_CELLS - mid - 1}}\n")
        if threshold_v_per_m <= scale_v_per_m:  # the map's scale is never below the threshold
            k = int(round(mid * threshold_v_per_m / scale_v_per_m))
            marks = [" "] * RAMP_CELLS
            marks[mid - k] = "▲"
            marks[mid + k] = "▲"
            text.append("".join(marks) + "\n")
    _swatch(text, FEATURE_COLOURS["current"], "here  ")
    _swatch(text, FEATURE_COLOURS["unvisited"], "to do  ")
    _swatch(text, FEATURE_COLOURS["suggested"], "suggested\n")
    if layer == "readings":
        text.append("points: colour of their mean\n")
    else:
        _swatch(text, FEATURE_COLOURS["visited"], "measured  ")
        _swatch(text, FEATURE_COLOURS["free"], "free position\n")
    _swatch(text, FEATURE_COLOURS["outline"], "outline ")
    _swatch(text, FEATURE_COLOURS["asset"], "asset ")
    _swatch(text, FEATURE_COLOURS["zone"], "zone")
    return text


class Legend(Static):
    """The legend beside the map."""
