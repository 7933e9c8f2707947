"""The printable comparison of two surveys: before, after and difference maps on one scale.

One A4 landscape page: the three maps side by side on the action-level colour scale shared with
every other map (:mod:`mapper.features.colour_scale`), so a colour means the same field in all
three (the difference, after - before, read on the same bands); the hotspot changes; the summary
numbers; the cautions. Written atomically like every output (:mod:`mapper.atomic_file`).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import matplotlib
import numpy as np
from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.cm import ScalarMappable
from matplotlib.colors import BoundaryNorm, ListedColormap
from matplotlib.figure import Figure

from mapper import __version__
from mapper.atomic_file import atomic_path, output_path
from mapper.export import styles as st
from mapper.export.report import (
    PAGE_SIZE_IN,
    RC,
    TextColumn,
    draw_cautions,
    draw_lines,
    draw_site,
    frame_axes,
    method_text,
)
from mapper.features import colour_scale as cs
from mapper.features.compare import Comparison
from mapper.survey.store import to_utc_text, utc_now
from mapper.units import format_field, from_si, plain_number
from mapper.wording import local_span, plural
from mapper.workflow import Products

#: Largest number of hotspot-change rows printed (the GeoPackage's ``changes`` layer has all).
MAX_CHANGE_ROWS = 10
#: Titles of the three maps.
MAP_TITLES = ("before", "after", "difference (after - before)")


@dataclass(frozen=True)
class ComparisonReport:
    """What :func:`write_comparison_report` wrote.

    Attributes
    ----------
    pdf : Path
        The PDF.
    png : Path or None
        The page as PNG, when asked for.
    """

    pdf: Path
    png: Path | None


def _scale() -> tuple[ListedColormap, BoundaryNorm]:
    """Colour map over the scale's band numbers (0 = most negative band)."""
    colours = [cs.band_hex(k) for k in range(-len(cs.POSITIVE), len(cs.POSITIVE) + 1)]
    return ListedColormap(colours), BoundaryNorm(np.arange(-0.5, len(colours) + 0.5), len(colours))


def _draw_field(ax, cmp: Comparison, values: np.ndarray, threshold_v_per_m: float) -> None:
    band = cs.band_index(values, threshold_v_per_m) + len(cs.POSITIVE)
    band = np.ma.masked_where(~np.isfinite(values), band)
    cmap, norm = _scale()
    c = float(cmp.x[1] - cmp.x[0]) if cmp.x.size > 1 else 1.0
    ax.pcolormesh(np.append(cmp.x - c / 2, cmp.x[-1] + c / 2), np.append(cmp.y - c / 2, cmp.y[-1] + c / 2),
                  band, cmap=cmap, norm=norm, shading="flat", zorder=1, rasterized=True)


def _outline_hotspots(ax, hotspots, *, dashed: bool = False, label: bool = True) -> None:
    for h in hotspots:
        colour = st.HOTSPOT_COLORS.get(h.polarity, "#000000")
        style = (0, (3, 2)) if dashed else "solid"
        draw_lines(ax, h.geometry, color="white", linewidth=2.6, zorder=11)
        draw_lines(ax, h.geometry, color=colour, linewidth=1.4, linestyle=style, zorder=12)
        if label:
            bx = h.geometry.bounds
            ax.text(bx[2], bx[3], h.id, fontsize=7, fontweight="bold", color="white", ha="left", va="bottom",
                    zorder=13, bbox={"boxstyle": "round,pad=0.15", "fc": colour, "ec": "white", "lw": 0.6})


def _mark_changes(ax, cmp: Comparison) -> None:
    """On the difference map: each change's status at its outline (after, or before if cleared)."""
    for c in cmp.changes:
        geom = c.geometry_after if not c.geometry_after.is_empty else c.geometry_before
        if geom.is_empty:
            continue
        p = geom.representative_point()
        ax.text(p.x, p.y, c.status, fontsize=6.5, ha="center", va="center", zorder=14, fontweight="bold",
                bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "#333333", "lw": 0.5, "alpha": 0.9})


def change_rows(cmp: Comparison, unit: str) -> list[list[str]]:
    """The hotspot changes as table rows (display unit), most important first as computed."""
    rows = []
    for c in cmp.changes:
        rows.append([
            c.status + (f" ({c.note})" if c.note else ""),
            c.polarity,
            ", ".join(c.before_ids) or "-",
            ", ".join(c.after_ids) or "-",
            f"{c.area_before_m2:.1f}",
            f"{c.area_after_m2:.1f}",
            "-" if c.peak_before_v_per_m is None else format_field(c.peak_before_v_per_m, unit, 3),
            "-" if c.peak_after_v_per_m is None else format_field(c.peak_after_v_per_m, unit, 3),
        ])
    return rows


def summary_lines(cmp: Comparison, unit: str) -> list[str]:
    """Plain sentences of the comparison's summary (display unit)."""
    s = cmp.summary
    counts = ", ".join(f"{n} {k}" for k, n in s.counts.items() if n) or "no hotspots on either side"
    rise = (f"largest rise {format_field(s.max_increase_v_per_m, unit)}" if s.max_increase_v_per_m > 0
            else "no rise anywhere")
    fall = (f"largest fall {format_field(-s.max_decrease_v_per_m, unit)}" if s.max_decrease_v_per_m < 0
            else "no fall anywhere")
    return [
        f"Compared where both surveys cover the site: {s.common_area_m2:.1f} m².",
        f"Hotspot changes: {counts}.",
        f"Largest |E|: before {format_field(s.max_abs_before_v_per_m, unit)}, after "
        f"{format_field(s.max_abs_after_v_per_m, unit)}. Area at or above the action level: before "
        f"{s.area_above_before_m2:.1f} m², after {s.area_above_after_m2:.1f} m².",
        f"Difference (after - before): mean {format_field(s.mean_difference_v_per_m, unit)}, mean |d| "
        f"{format_field(s.mean_abs_difference_v_per_m, unit)}, {rise}, {fall}.",
    ]


def draw_comparison_page(fig: Figure, cmp: Comparison, before: Products, after: Products) -> None:
    """The comparison page: three maps on one scale, the changes, the summary and the cautions."""
    unit = before.display_unit
    t = cmp.summary.threshold_v_per_m
    site = before.site
    fig.text(0.04, 0.965, f"{before.name}: before and after", fontsize=15, fontweight="bold", va="top")

    def when(p: Products) -> str:
        span = p.time_span()
        return local_span(span, p.site.timezone) if span else "no readings"

    fig.text(0.04, 0.928, f"Before: {when(before)}, {plural(len(before.readings), 'reading')}  ·  after: "
                          f"{when(after)}, "
             f"{plural(len(after.readings), 'reading')}", fontsize=9, va="top", color="#333333")
    fig.text(0.04, 0.905, f"Action level {format_field(t, unit)}  ·  before: {method_text(before)}  ·  after: "
             f"{method_text(after)}", fontsize=9, va="top", color="#333333")
    fig.text(0.04, 0.018, f"mapper {__version__}  ·  {to_utc_text(utc_now())[:16].replace('T', ' ')} UTC  ·  "
             f"{Path(before.source).name} → {Path(after.source).name}", fontsize=6.5, color="#555555")

    width, gap, left = 0.295, 0.025, 0.04
    panels = ((cmp.before, cmp.hotspots_before), (cmp.after, cmp.hotspots_after), (cmp.difference, ()))
    for i, (values, hotspots) in enumerate(panels):
        ax = fig.add_axes((left + i * (width + gap), 0.49, width, 0.37))
        frame_axes(ax, site)
        ax.set_title(MAP_TITLES[i], fontsize=10, loc="left", color="#1b3a6b", fontweight="bold")
        _draw_field(ax, cmp, np.asarray(values, dtype=float), t)
        draw_site(ax, site, labels=i == 0)
        if i < 2:
            _outline_hotspots(ax, hotspots)
        else:
            _outline_hotspots(ax, cmp.hotspots_before, dashed=True, label=False)
            _outline_hotspots(ax, cmp.hotspots_after, label=False)
            _mark_changes(ax, cmp)
        if i:
            ax.set_ylabel("")

    # One colour bar for the three maps: the scale's edges in the display unit.
    cax = fig.add_axes((0.20, 0.435, 0.60, 0.018))
    cmap, norm = _scale()
    edges = cs.edges_v_per_m(t)
    cb = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), cax=cax, orientation="horizontal",
                      ticks=np.arange(len(edges)) + 0.5)
    cb.ax.set_xticklabels([plain_number(from_si(e, unit), 3) for e in edges], fontsize=6.5)
    k = cs.ACTION_BAND
    for pos in (len(cs.POSITIVE) - k + 0.5, len(cs.POSITIVE) + k - 0.5):
        cax.axvline(pos, color="black", linewidth=1.8)
    cb.set_label(f"field ({unit}); the same bands for before, after and their difference; black bars: the "
                 f"action level ±{format_field(t, unit)}", fontsize=7.5)
    fig.text(0.04, 0.37, "Red: positive, field pointing up (away from the floor); blue: negative. Difference map: "
             "dashed outlines before, solid after.", fontsize=7, color="#333333", va="top")

    col = TextColumn(fig, 0.04, 0.35, 0.54)
    col.heading("Hotspot changes")
    rows = change_rows(cmp, unit)
    if rows:
        stops = (0.0, 0.085, 0.15, 0.2, 0.25, 0.315, 0.38, 0.46)
        col.row(["change", "polarity", "before", "after", "m² before", "m² after", "peak before",
                 "peak after"], stops, bold=True, size=7.2)
        for row in rows[:MAX_CHANGE_ROWS]:
            col.row(row, stops, size=7.2)
        if len(rows) > MAX_CHANGE_ROWS:
            col.para(f"... and {len(rows) - MAX_CHANGE_ROWS} more in the GeoPackage's changes layer.", 7.0)
    else:
        col.para(f"No hotspot in either survey at the action level {format_field(t, unit)}.", 7.5)
    col.gap(3)
    for line in summary_lines(cmp, unit):
        col.para(line, 7.2)

    draw_cautions(fig, 0.62, 0.35, 0.34, size=6.8, gap=1.5)


def write_comparison_report(cmp: Comparison, before: Products, after: Products, pdf_path: str | Path, *,
                            png_path: str | Path | None = None, dpi: int = 160) -> ComparisonReport:
    """Write the comparison PDF (and optionally the page as PNG).

    Parameters
    ----------
    cmp : Comparison
        Output of :func:`~mapper.features.compare.compare_fields`.
    before, after : Products
        The two surveys' products (names, times, site, display unit).
    pdf_path : str or Path
        Target ``.pdf``; replaced if it exists.
    png_path : str or Path, optional
        Also write the page as PNG here.
    dpi : int
        Resolution of the PNG, dots per inch.

    Returns
    -------
    ComparisonReport
    """
    pdf = output_path(pdf_path, ".pdf")
    png = output_path(png_path, ".png") if png_path is not None else None
    meta = {"Title": f"{before.name}: before and after", "Author": after.operator or "",
            "Subject": "comparison of two field surveys", "Creator": f"mapper {__version__}"}
    with matplotlib.rc_context(RC):
        fig = Figure(figsize=PAGE_SIZE_IN)
        draw_comparison_page(fig, cmp, before, after)
        with atomic_path(pdf) as tmp, PdfPages(tmp, metadata=meta) as out:
            out.savefig(fig)
        if png is not None:
            with atomic_path(png) as tmp:
                fig.savefig(tmp, dpi=dpi, facecolor="white", format="png")
    return ComparisonReport(pdf, png)


__all__ = ["ComparisonReport", "change_rows", "draw_comparison_page", "summary_lines", "write_comparison_report"]
