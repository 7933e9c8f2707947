"""The report's optional history page: the site's archived surveys over time (``mapper report --db``).

Top left, the largest |E| of each survey (measured or mapped, whichever is larger) against the
action level; top right, the hotspot area in total and per zone; below, each zone's pass/fail
and each place's status (new, recurring, cleared) survey by survey. The report's own survey is
marked when the archive holds it.
"""

from __future__ import annotations

from datetime import datetime

from matplotlib.figure import Figure

from mapper.archive.history import History
from mapper.units import from_si
from mapper.workflow import Products

STATUS_MARK = {"new": "new", "recurring": "recurring", "cleared": "cleared", None: "–"}


def _when(step) -> datetime | None:
    return datetime.fromisoformat(step.started_utc) if step.started_utc else None


def draw_history_page(fig: Figure, products: Products, history: History, current: int | None = None) -> None:
    """Draw the history page.

    Parameters
    ----------
    fig : Figure
        A blank page.
    products : Products
        The report's survey (display unit, name).
    history : History
        The site's history from the archive.
    current : int, optional
        Archive id of the report's survey, marked on the page.
    """
    unit = products.display_unit
    steps = [s for s in history.surveys if _when(s) is not None]
    fig.text(0.04, 0.965, f"{history.site}: history of the site's surveys", fontsize=15, fontweight="bold",
             va="top")
    fig.text(0.04, 0.925, f"{len(history.surveys)} surveys in the archive  ·  largest |E| is the larger of "
             "the largest reading and the map's peak  ·  values in " + unit, fontsize=9, va="top", color="#333333")
    times = [_when(s) for s in steps]
    ax = fig.add_axes((0.06, 0.52, 0.42, 0.34))
    largest = [from_si(s.max_abs_v_per_m, unit) if s.max_abs_v_per_m is not None else float("nan") for s in steps]
    measured = [from_si(s.max_abs_reading_v_per_m, unit) if s.max_abs_reading_v_per_m is not None else float("nan")
                for s in steps]
    ax.plot(times, largest, marker="o", color="#b2182b", label="largest |E|")
    ax.plot(times, measured, marker="s", linestyle="--", color="#444444", label="largest |reading|")
    ax.plot(times, [from_si(s.threshold_v_per_m, unit) for s in steps], color="#2166ac", linestyle=":",
            label="action level")
    for s, t, v in zip(steps, times, largest, strict=True):
        if s.survey_id == current:
            ax.annotate("this survey", (t, v), textcoords="offset points", xytext=(4, -14), fontsize=7)
    ax.set_ylabel(f"|E| ({unit})")
    ax.set_ylim(bottom=0)
    ax.set_title("largest field", fontsize=10)
    ax.legend(fontsize=7, loc="lower left")
    ax.tick_params(axis="x", labelrotation=30, labelsize=7)
    ax2 = fig.add_axes((0.56, 0.52, 0.40, 0.34))
    ax2.plot(times, [s.hotspot_area_m2 for s in steps], marker="o", color="#b2182b", label="whole site")
    zone_names = [z.zone for z in steps[0].zones] if steps else []
    for k, name in enumerate(zone_names):
        ax2.plot(times, [s.zones[k].hotspot_area_m2 for s in steps], marker="^", linestyle="--",
                 label=f"zone {name}")
    ax2.set_ylabel("hotspot area (m²)")
    ax2.set_ylim(bottom=0)
    ax2.set_title("hotspot area", fontsize=10)
    ax2.legend(fontsize=7, loc="upper right")
    ax2.tick_params(axis="x", labelrotation=30, labelsize=7)
    # the table: one column per survey (the latest 8), zones then places
    shown = history.surveys[-8:]
    y = 0.37
    stops = [0.04, 0.12] + [0.36 + 0.075 * k for k in range(len(shown))]

    def row(cells, bold=False):
        nonlocal y
        for x, c in zip(stops, cells, strict=False):
            fig.text(x, y, c, fontsize=7, fontweight="bold" if bold else "normal", va="top")
        y -= 0.022

    row(["", ""] + [("▶ " if s.survey_id == current else "") + (s.started_utc or "")[:10] for s in shown], bold=True)
    for k, name in enumerate(zone_names):
        row([f"zone {name}", "against its limit"] + [
            "–" if s.zones[k].passed is None else ("pass" if s.zones[k].passed else "FAIL") for s in shown])
    for p in history.places[:9]:
        where = f"{p.polarity}, near {p.nearest_asset}" if p.nearest_asset else p.polarity
        row([f"place {p.id}", where[:44]] + [STATUS_MARK[s.status_of(p.id)] for s in shown])
    if len(history.places) > 9:
        row([f"... and {len(history.places) - 9} more places (mapper archive history --site NAME)"])
    fig.text(0.04, 0.045, "Hotspots of consecutive surveys are the same place when their outlines overlap, or when "
             "they share the nearest asset and lie within 2 m; new: not in the survey before; recurring: in both; "
             "cleared: gone since the survey before.", fontsize=6.5, color="#444444", wrap=True)
