"""The map legend: colour ramp with values in the display unit, and the drawn symbols."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from rich.color import Color
from rich.style import Style
from rich.text import Text
from textual.reactive import reactive, var
from textual.widgets import Static

from mapper.app.palette import FEATURE_COLOURS, sequential
from mapper.app.raster import LAYER_TITLES
from mapper.features import colour_scale as cs
from mapper.units import format_field

#: Width of the uncertainty ramp, cells.
RAMP_CELLS = 21


def _swatch(text: Text, colour: str, label: str) -> None:
    text.append("■ ", Style(color=Color.parse(colour)))
    text.append(label)


def _block(text: Text, colour: str, width: int = 1) -> None:
    text.append("█" * width, Style(color=Color.parse(colour)))


def legend_text(layer: str, scale_v_per_m: float, unit: str, threshold_v_per_m: float) -> Text:
    """Legend lines for a map layer: every colour the map can show, with its meaning.

    Parameters
    ----------
    layer : str
        ``readings``, ``estimate`` or ``std``.
    scale_v_per_m : float
        Full-colour magnitude of the ``std`` layer, V/m (unused for the signed layers, whose
        colours are the action-level scale of :mod:`mapper.features.colour_scale`).
    unit : str
        Display unit. Signed values are in the survey's sign convention (the map colours them
        the same way), so red is positive as the meter reads.
    threshold_v_per_m : float
        Action level, V/m: the signed layers' band edges are fixed multiples of it.
    """
    text = Text()
    if layer == "std":
        values = np.linspace(0.0, scale_v_per_m, RAMP_CELLS)
        for c in sequential(values, scale_v_per_m):
            text.append("█", Style(color=Color.from_rgb(*map(int, c))))
        left, right = "0", format_field(scale_v_per_m, unit, 3)
        text.append(f"\n{left:<{RAMP_CELLS // 2}}{right:>{RAMP_CELLS - RAMP_CELLS // 2}}\n")
        text.append("uncertainty of a new reading\n")
    else:
        rows = cs.legend_rows(threshold_v_per_m, unit)  # most positive first
        n = len(cs.EDGE_MULTIPLES)
        for colour, _ in reversed(rows):
            _block(text, colour, 2)
        width = 2 * len(rows)
        top = format_field(cs.EDGE_MULTIPLES[-1] * threshold_v_per_m, unit, 3)
        mid = width // 2
        text.append(f"\n{'-' + top:<{mid - 1}}0{top:>{width - mid}}\n")
        marks = [" "] * width
        k = cs.ACTION_BAND
        marks[2 * (n - k)] = "▲"
        marks[2 * (n + k)] = "▲"
        text.append("".join(marks) + "\n")
        text.append(f"▲ action level ±{format_field(threshold_v_per_m, unit, 4)}\n")
        multiples = " ".join(f"{m:g}" for m in cs.EDGE_MULTIPLES)
        text.append(f"steps at ±{multiples} ×\n")
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
    _swatch(text, FEATURE_COLOURS["zone"], "zone\n")
    _swatch(text, FEATURE_COLOURS["inside"], "site, not mapped yet ")
    _swatch(text, FEATURE_COLOURS["outside"], "outside")
    return text


@dataclass(frozen=True)
class LegendKey:
    """What the legend explains.

    Attributes
    ----------
    layer : str
        Layer drawn.
    wanted : str
        Layer chosen (F9); differs from ``layer`` while the map needs more readings.
    scale_v_per_m : float
        The drawn layer's colour scale, V/m.
    unit : str
        Display unit.
    threshold_v_per_m : float
        Action level, V/m.
    """

    layer: str
    wanted: str
    scale_v_per_m: float
    unit: str
    threshold_v_per_m: float


class Legend(Static):
    """The legend beside the map: its title, the colours of the layer drawn and the symbols."""

    key: reactive[LegendKey | None] = var(None)

    def watch_key(self, key: LegendKey | None) -> None:
        if key is None:
            self.update("")
            return
        title = f"map: {LAYER_TITLES[key.layer]} (F9)"
        if key.layer != key.wanted:
            title += f"\n{LAYER_TITLES[key.wanted]}: needs more readings"
        self.update(Text(title + "\n", style="bold")
                    + legend_text(key.layer, key.scale_v_per_m, key.unit, key.threshold_v_per_m))
