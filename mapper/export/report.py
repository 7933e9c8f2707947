"""The printable report: a multi-page PDF (matplotlib) and, on request, the map alone as PNG.

Page 1 is the map: site outline, assets and zones, field bands with a labelled colour bar in the
display unit, labelled contours, hotspots outlined with their ids, readings as dots, a scale bar
and, for a georeferenced site, a north arrow. Page 2 holds the findings: hotspot table, limit
violations, conditions, meter and calibration, method and cross-validation, the
standard-deviation map, and the cautions. Text is embedded as TrueType (``pdf.fonttype`` 42), so
it stays real, searchable text.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import matplotlib
import numpy as np
import shapely
from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.cm import ScalarMappable
from matplotlib.colors import BoundaryNorm, LinearSegmentedColormap, ListedColormap
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import FancyBboxPatch, Patch, PathPatch, Rectangle
from matplotlib.path import Path as MplPath
from matplotlib.ticker import FuncFormatter
from shapely.geometry.base import BaseGeometry
from shapely.geometry.polygon import orient

from mapper import __version__
from mapper.atomic_file import atomic_path, output_path
from mapper.export import styles as st
from mapper.features import CAUTIONS, LIMITS_ARE_DEFAULTS
from mapper.features import colour_scale as cs
from mapper.features.colour_scale import scale_levels
from mapper.features.contours import Levels
from mapper.features.hotspots import MEASURED_NOTE
from mapper.features.sources import LIMITATIONS, source_records
from mapper.features.zone_results import zone_sentence
from mapper.presentation import HOTSPOT_COLUMNS as HOTSPOT_HEADERS
from mapper.presentation import hotspot_table
from mapper.site.model import Site
from mapper.survey.store import to_utc_text, utc_now
from mapper.units import field_text_in, format_field, from_si, plain_number
from mapper.wording import local_span, plural
from mapper.workflow import Products

#: A4 landscape, inches.
PAGE_SIZE_IN = (11.69, 8.27)
#: Matplotlib settings for every page: TrueType text in the PDF, one sans-serif family.
RC = {
    "pdf.fonttype": 42,
    "ps.fonttype": 42,
    "font.family": "DejaVu Sans",
    "font.size": 8.5,
    "axes.titlesize": 10,
    "axes.labelsize": 8,
    "xtick.labelsize": 7,
    "ytick.labelsize": 7,
}
#: Section headings of page 2 (tests look for them).
SECTIONS = (
    "Hotspots",
    "Limit violations",
    "Conditions",
    "Meter and calibration",
    "Method and cross-validation",
    "Uncertainty",
    "Cautions",
)
#: Largest number of hotspot rows printed; the rest are in the GeoPackage.
MAX_HOTSPOT_ROWS = 9


@dataclass(frozen=True)
class ReportResult:
    """What was written.

    Attributes
    ----------
    pdf : Path
        The report.
    png : Path or None
        The map alone, when asked for.
    pages : int
        Pages in the PDF.
    """

    pdf: Path
    png: Path | None
    pages: int


# ------------------------------------------------------------------------------- drawing helpers
def _polygon_path(geom: BaseGeometry) -> MplPath | None:
    """A matplotlib path of a (multi)polygon, holes included (exterior CCW, holes CW)."""
    polys = [g for g in getattr(geom, "geoms", [geom]) if g.geom_type == "Polygon" and not g.is_empty]
    if not polys:
        return None
    verts, codes = [], []
    for poly in polys:
        poly = orient(poly, 1.0)
        for ring in (poly.exterior, *poly.interiors):
            xy = np.asarray(ring.coords)
            verts.append(xy)
            codes += [MplPath.MOVETO] + [MplPath.LINETO] * (len(xy) - 2) + [MplPath.CLOSEPOLY]
    return MplPath(np.concatenate(verts), codes)


def fill_geometry(ax, geom: BaseGeometry, **kw) -> None:
    path = _polygon_path(geom)
    if path is not None:
        ax.add_patch(PathPatch(path, **kw))


def draw_lines(ax, geom: BaseGeometry, **kw) -> None:
    parts = getattr(geom, "geoms", [geom])
    for part in parts:
        if part.is_empty:
            continue
        if part.geom_type in ("LineString", "LinearRing"):
            xy = np.asarray(part.coords)
            ax.plot(xy[:, 0], xy[:, 1], **kw)
        elif part.geom_type == "Polygon":
            draw_lines(ax, part.exterior, **kw)
            for ring in part.interiors:
                draw_lines(ax, ring, **kw)
        elif part.geom_type.startswith("Multi") or part.geom_type == "GeometryCollection":
            draw_lines(ax, part, **kw)
        elif part.geom_type == "Point":
            ax.plot([part.x], [part.y], marker="s", color=kw.get("color", "k"), markersize=4)


def _label_lines(ax, geom: BaseGeometry, text: str, min_length: float, placed: list, clearance: float,
                 *, fontsize=6.5, color="#222222") -> None:
    """Label the longest parts of a (multi)line along the line, upright, away from earlier labels.

    ``placed`` holds the positions of labels already drawn (updated here); a label is moved along
    its line, or left out, so that no two labels are closer than ``clearance`` (metres).
    """
    parts = sorted((p for p in getattr(geom, "geoms", [geom]) if p.length >= min_length),
                   key=lambda p: -p.length)[:2]
    for part in parts:
        mid = None
        for frac in (0.5, 0.3, 0.7, 0.15, 0.85):
            candidate = part.interpolate(frac, normalized=True)
            if all(math.hypot(candidate.x - x, candidate.y - y) >= clearance for x, y in placed):
                mid = candidate
                break
        if mid is None:
            continue
        placed.append((mid.x, mid.y))
        a = part.interpolate(max(0.0, part.project(mid) - 0.5), normalized=False)
        b = part.interpolate(min(part.length, part.project(mid) + 0.5), normalized=False)
        angle = math.degrees(math.atan2(b.y - a.y, b.x - a.x))
        if angle > 90:
            angle -= 180
        elif angle < -90:
            angle += 180
        ax.text(mid.x, mid.y, text, fontsize=fontsize, color=color, rotation=angle, rotation_mode="anchor",
                ha="center", va="center", zorder=14,
                bbox={"boxstyle": "round,pad=0.12", "fc": "white", "ec": "none", "alpha": 0.8})


def _nice_length(span: float) -> float:
    """A round scale-bar length of about a fifth of ``span``, metres."""
    target = span / 4.0
    p = 10 ** math.floor(math.log10(target))
    for m in (10, 5, 2, 1):
        if m * p <= target:
            return m * p
    return p


def _scale_bar(ax, bounds, unit_scale: float = 1.0) -> None:
    """A black-and-white scale bar in the lower-left margin of the map, in metres."""
    minx, miny, maxx, maxy = bounds
    length = _nice_length(maxx - minx)
    x0 = minx
    y0 = miny - 0.085 * (maxy - miny)
    h = 0.018 * (maxy - miny)
    for i in range(4):
        ax.add_patch(Rectangle((x0 + i * length / 4, y0), length / 4, h, facecolor="black" if i % 2 == 0 else "white",
                               edgecolor="black", linewidth=0.6, zorder=9, clip_on=False))
    for i, frac in enumerate((0, 0.5, 1.0)):
        ax.text(x0 + frac * length, y0 + 1.6 * h, f"{frac * length:g}" + (" m" if i == 2 else ""),
                ha="center", va="bottom", fontsize=7, zorder=9)


def _north_arrow(ax, direction: tuple[float, float]) -> None:
    """An arrow pointing to true north in a small square axes."""
    dx, dy = direction
    ax.set_xlim(-1, 1)
    ax.set_ylim(-1, 1)
    ax.set_aspect("equal")
    ax.axis("off")
    ax.annotate("", xy=(0.62 * dx, 0.62 * dy), xytext=(-0.62 * dx, -0.62 * dy),
                arrowprops={"arrowstyle": "-|>,head_width=0.45,head_length=0.9", "lw": 1.6, "color": "black"})
    ax.text(0.92 * dx, 0.92 * dy, "N", ha="center", va="center", fontsize=11, fontweight="bold")


def _band_cmap(levels: Levels, colors: Sequence[str]) -> tuple[ListedColormap, BoundaryNorm, list[float]]:
    """Colour map and norm for the bands, with open ends shown as colour-bar extensions."""
    bounds = list(levels.display_values)
    if len(bounds) == 1:
        bounds = [bounds[0] - 1e-9 * max(1.0, abs(bounds[0])), bounds[0]]
        colors = [colors[0], colors[0], colors[-1]]
    cmap = ListedColormap(list(colors[1:-1]) or [colors[0]]).with_extremes(under=colors[0], over=colors[-1])
    return cmap, BoundaryNorm(bounds, cmap.N), bounds


def std_limits(values: np.ndarray) -> tuple[float, float]:
    """Colour limits of an uncertainty map: the 2nd and 98th percentiles of its values.

    One extreme cell at a corner must not leave the rest of the map one flat colour, so the
    colours span the values present (beyond the limits the colour bar's ends extend).
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return 0.0, 1.0
    lo, hi = (float(x) for x in np.percentile(v, [2.0, 98.0]))
    if hi <= lo:
        pad = max(abs(hi) * 0.05, 1e-12)
        lo, hi = lo - pad, hi + pad
    return lo, hi


def _std_cmap() -> LinearSegmentedColormap:
    return LinearSegmentedColormap.from_list("mapper_uncertainty", ["#f7f7f7", "#d9d2e6", "#a593c6", "#6f5a9e"])


class TextColumn:
    """Writes lines of text downwards in figure coordinates."""

    def __init__(self, fig: Figure, x: float, top: float, width: float) -> None:
        self.fig, self.x, self.y, self.width = fig, x, top, width

    def _dy(self, size: float) -> float:
        return 1.38 * size / 72.0 / self.fig.get_figheight()

    def chars(self, size: float) -> int:
        return max(20, int(self.width * self.fig.get_figwidth() * 72.0 / (0.53 * size)))

    def heading(self, text: str) -> None:
        self.y -= self._dy(6)
        self.fig.text(self.x, self.y, text, fontsize=10.5, fontweight="bold", va="top", color="#1b3a6b")
        self.y -= self._dy(11)

    def para(self, text: str, size: float = 8.0, *, color: str = "black", indent: float = 0.0) -> None:
        for line in textwrap.wrap(text, self.chars(size) - int(indent * 200)) or [""]:
            self.fig.text(self.x + indent, self.y, line, fontsize=size, va="top", color=color)
            self.y -= self._dy(size)

    def row(self, cells: Sequence[str], stops: Sequence[float], size: float = 7.5, bold: bool = False) -> None:
        """One table row; a cell holding line breaks (a wrapped name) makes the row taller."""
        for cell, stop in zip(cells, stops, strict=True):
            self.fig.text(self.x + stop, self.y, cell, fontsize=size, va="top", linespacing=1.1,
                          fontweight="bold" if bold else "normal")
        lines = max((cell.count("\n") + 1 for cell in cells), default=1)
        self.y -= self._dy(size) * (1 + 0.8 * (lines - 1))

    def gap(self, size: float = 4.0) -> None:
        self.y -= self._dy(size)


# ------------------------------------------------------------------------------------- pages
def method_text(p: Products) -> str:
    """The field model in a few words: ``"physics, cell 1 m"``, or ``"no field model"``."""
    return f"{p.grid.method}, cell {p.grid.cell_m:g} m" if p.grid is not None else "no field model"


def _title(fig: Figure, products: Products, heading: str) -> None:
    p = products
    fig.text(0.04, 0.965, f"{p.name}: {heading}", fontsize=15, fontweight="bold", va="top")
    span = p.time_span()
    when = local_span(span, p.site.timezone) if span else "no readings"
    method = method_text(p)
    fig.text(0.04, 0.925, f"Survey {when}  ·  {plural(len(p.readings), 'reading')}  ·  action level "
             f"{format_field(p.threshold_v_per_m, p.display_unit)}  ·  {method}"
             + (f"  ·  operator {p.operator}" if p.operator else ""), fontsize=9, va="top", color="#333333")
    fig.text(0.04, 0.018, f"mapper {__version__}  ·  {to_utc_text(utc_now())[:16].replace('T', ' ')} UTC  ·  "
             f"CRS {p.crs.name}  ·  {Path(p.source).name}", fontsize=6.5, color="#555555")


def draw_cautions(fig: Figure, left: float, top: float, width: float, *, size: float = 7.4,
                  gap: float = 2.0) -> None:
    """The cautions in a pale yellow box sized to its text (figure coordinates, top-left anchored)."""
    cc = TextColumn(fig, left + 0.012, top, width - 0.024)
    cc.heading("Cautions")
    for text in CAUTIONS:
        cc.para("• " + text, size)
        cc.gap(gap)
    bottom = cc.y - 0.01
    fig.patches.append(FancyBboxPatch((left, bottom), width, top + 0.012 - bottom, boxstyle="round,pad=0.006",
                                      transform=fig.transFigure, facecolor="#fff6d6", edgecolor="#b58900",
                                      linewidth=1.0, zorder=-1))


def draw_site(ax, site: Site, *, labels: bool = True) -> None:
    """Zones, assets (polygons, lines and points, labelled) and the outline on a map axes."""
    for zone in site.zones:
        draw_lines(ax, zone.geometry, color=st.ZONE_COLOR, linewidth=1.2, linestyle=(0, (5, 3)), zorder=6)
        if labels:
            minx, miny, maxx, maxy = zone.geometry.bounds
            ax.text(minx + 0.2, maxy - 0.2, zone.name, color=st.ZONE_COLOR, fontsize=6.5, ha="left", va="top",
                    zorder=9, fontweight="bold", bbox={"boxstyle": "round,pad=0.1", "fc": "white", "ec": "none",
                                                       "alpha": 0.75})
    for asset in site.assets:
        g = asset.geometry
        if g.geom_type.endswith("Polygon"):
            fill_geometry(ax, g, facecolor="#9a9a9a", edgecolor="#4a4a4a", linewidth=0.7, alpha=0.55, zorder=5,
                  hatch="////" if not asset.walkable else None)
        elif g.geom_type.endswith("Point"):
            for pt in getattr(g, "geoms", [g]):
                ax.plot([pt.x], [pt.y], marker="o", markersize=5, color="#4a4a4a", markeredgecolor="white",
                        markeredgewidth=0.6, linestyle="none", zorder=5)
        else:
            draw_lines(ax, g, color="#4a4a4a", linewidth=3.2, solid_capstyle="butt", zorder=5, alpha=0.8)
        if labels:
            if g.geom_type.endswith("Polygon") or g.geom_type.endswith("Point"):
                p = g.representative_point()
            else:
                p = g.interpolate(0.5, normalized=True)
            ax.text(p.x, p.y, asset.name, fontsize=5.8, ha="center", va="center", color="#1e1e1e", zorder=9,
                    style="italic", bbox={"boxstyle": "round,pad=0.08", "fc": "white", "ec": "none", "alpha": 0.6})
    draw_lines(ax, site.outline, color=st.OUTLINE_COLOR, linewidth=1.6, zorder=7)


def frame_axes(ax, site: Site) -> tuple[float, float, float, float]:
    """Limits, equal aspect and axis labels of a site map; returns the outline's bounds, metres."""
    minx, miny, maxx, maxy = site.outline.bounds
    w, h = maxx - minx, maxy - miny
    ax.set_xlim(minx - 0.03 * w, maxx + 0.03 * w)
    ax.set_ylim(miny - 0.14 * h, maxy + 0.04 * h)
    ax.set_aspect("equal")
    ax.set_xlabel("site x (m)")
    ax.set_ylabel("site y (m)")
    ax.tick_params(length=2, color="#888888")
    for spine in ax.spines.values():
        spine.set_color("#aaaaaa")
    return minx, miny, maxx, maxy


def draw_map_page(fig: Figure, products: Products) -> None:
    """Page 1: the field map with legend, colour bar, scale bar and north arrow."""
    p = products
    f = p.findings
    unit = p.display_unit
    _title(fig, p, "electrostatic field map")
    ax = fig.add_axes((0.055, 0.085, 0.70, 0.80))
    bounds = frame_axes(ax, p.site)
    readings = list(p.readings)
    if f is not None:
        colors = st.band_colors(f.bands, f.threshold_v_per_m)
        for band, color in zip(f.bands, colors, strict=True):
            fill_geometry(ax, band.geometry, facecolor=color, edgecolor=color, linewidth=0.3, zorder=1)
        span = bounds[2] - bounds[0]
        placed = [(h.geometry.bounds[2], h.geometry.bounds[3]) for h in (*f.hotspots, *f.zone_hotspots)]
        for iso in f.isolines:
            if iso.geometry.is_empty:
                continue
            draw_lines(ax, iso.geometry, color=st.CONTOUR_COLOR, linewidth=0.6, zorder=4)
            _label_lines(ax, iso.geometry, iso.label, 0.12 * span, placed, 0.09 * span)
        for region in f.probable:
            draw_lines(ax, region.geometry, color=st.PROBABLE_COLOR, linewidth=1.3, linestyle=(0, (2, 2)), zorder=7)
        levels = f.levels
    else:
        values = [r.value_v_per_m for r in readings] or [0.0, 1.0]
        lo, hi = min(values), max(values)
        levels = Levels(scale_levels(p.threshold_v_per_m, lo, hi if hi > lo else lo + 1.0), unit)
        edges = (-math.inf, *levels.values_v_per_m, math.inf)
        colors = [cs.interval_hex(a, b, p.threshold_v_per_m) for a, b in zip(edges[:-1], edges[1:], strict=True)]
        fill_geometry(ax, p.site.outline, facecolor="#f2f2f2", edgecolor="none", zorder=1)
    draw_site(ax, p.site)
    if readings:
        xy = np.array([(r.reading.x, r.reading.y) for r in readings])
        if f is not None:
            ax.scatter(xy[:, 0], xy[:, 1], s=5, c="#111111", edgecolors="white", linewidths=0.3, zorder=10,
                       label="reading")
        else:
            dots = [cs.colour_hex(r.value_v_per_m, p.threshold_v_per_m) for r in readings]
            ax.scatter(xy[:, 0], xy[:, 1], s=22, c=dots, edgecolors="#111111", linewidths=0.4, zorder=10)
    if f is not None:
        for h in (*f.hotspots, *f.zone_hotspots):
            color = st.HOTSPOT_COLORS.get(h.polarity, "#000000")
            draw_lines(ax, h.geometry, color="white", linewidth=3.4, zorder=11)
            draw_lines(ax, h.geometry, color=color, linewidth=1.9, zorder=12)
            bx = h.geometry.bounds
            # the label sits at the outline's upper right, turned inward near the map's edges
            near_right = bx[2] > bounds[2] - 0.25 * (bounds[2] - bounds[0])
            near_top = bx[3] > bounds[3] - 0.08 * (bounds[3] - bounds[1])
            ax.text(bx[2], bx[3], h.id, fontsize=9, fontweight="bold", color="white",
                    ha="right" if near_right else "left", va="top" if near_top else "bottom",
                    zorder=13, bbox={"boxstyle": "round,pad=0.2", "fc": color, "ec": "white", "lw": 0.8})
    else:
        ax.text(0.5, 0.55, "No field map: " + (p.no_field_reason or "no field model"), transform=ax.transAxes,
                ha="center", va="center", fontsize=10, wrap=True, zorder=20,
                bbox={"boxstyle": "round,pad=0.5", "fc": "#fff6d6", "ec": "#b58900"})
    _scale_bar(ax, bounds)

    # Side panel: north arrow, colour bar, legend.
    if p.crs.georeferenced:
        c = p.site.outline.centroid
        nax = fig.add_axes((0.79, 0.79, 0.07, 0.10))
        _north_arrow(nax, p.crs.site_north(c.x, c.y))
        fig.text(0.825, 0.785, "true north", fontsize=7, va="top", ha="center", color="#333333")
    cax = fig.add_axes((0.80, 0.36, 0.022, 0.38))
    cmap, norm, ticks = _band_cmap(levels, colors)
    cb = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), cax=cax, extend="both",
                      ticks=ticks, spacing="uniform")
    title = f"field estimate ({unit})" if f is not None else f"reading ({unit})"
    cb.ax.tick_params(labelsize=7.5)
    cb.ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: plain_number(v, 4)))
    cb.set_label(title, fontsize=8.5)
    t = from_si(p.threshold_v_per_m, unit)
    for level in (t, -t):
        if ticks[0] <= level <= ticks[-1]:  # the colour bar's long axis is in data units
            cax.axhline(level, color="black", linewidth=1.6)
            cax.text(-0.4, level, "action level", transform=cax.get_yaxis_transform(), fontsize=6.5,
                     va="center", ha="right")
    fig.text(0.80, 0.335, "red: positive, field pointing up\n(away from the floor)\n"
             "blue: negative, pointing down", fontsize=7, va="top", color="#333333", linespacing=1.3)
    handles = [
        Line2D([], [], color=st.OUTLINE_COLOR, lw=1.6, label="site outline"),
        Line2D([], [], color=st.ZONE_COLOR, lw=1.2, ls=(0, (5, 3)), label="zone (own limit)"),
        Patch(facecolor="#9a9a9a", edgecolor="#4a4a4a", alpha=0.55, label="asset"),
        Line2D([], [], marker="o", ls="none", markersize=3, color="#111111", label="reading"),
    ]
    if f is not None:
        handles[3:3] = [
            Line2D([], [], color=st.CONTOUR_COLOR, lw=0.6, label="contour"),
            Line2D([], [], color=st.HOTSPOT_COLORS["positive"], lw=1.9, label="hotspot (|E| ≥ action level)"),
            Line2D([], [], color=st.PROBABLE_COLOR, lw=1.3, ls=(0, (2, 2)), label="P(exceed) ≥ 0.5"),
        ]
    fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.795, 0.25), frameon=False, fontsize=7)


#: Columns of the report's hotspot table (keys of :data:`mapper.presentation.HOTSPOT_COLUMNS`).
HOTSPOT_COLUMNS = ("id", "polarity", "status", "area", "peak", "max_reading", "p_max", "readings", "nearest")


def _hotspot_rows(products: Products) -> list[list[str]]:
    f = products.findings
    _, rows = hotspot_table((*f.hotspots, *f.zone_hotspots), products.display_unit, HOTSPOT_COLUMNS,
                            wrap={"nearest": 24}, digits=3)
    return rows


def sign_and_height(p: Products) -> str:
    """The meter's sign convention (and that values were converted) and the measurement height."""
    if p.sign_convention == "atmospheric":
        sign = ("Meter sign: atmospheric (potential gradient, fair weather positive); every value here "
                "was converted to the physics convention (upward field positive, fair weather negative).")
    else:
        sign = "Meter sign: physics convention (upward field positive); values shown as the meter gave them."
    heights = sorted({r.reading.height_m for r in p.readings if r.reading.height_m is not None})
    if not heights:
        height = "Measurement height: not recorded (the physical model assumes 1 m)."
    elif len(heights) == 1:
        height = f"Measurement height: {heights[0]:.2f} m above the floor."
    else:
        height = f"Measurement height: {heights[0]:.2f}-{heights[-1]:.2f} m above the floor."
    shown = None if p.grid is None or p.grid.settings is None else p.grid.settings.prediction_height_m
    if shown is not None and shown not in heights:
        height += f" The map shows the field at {shown:.2f} m (physical model)."
    return f"{sign} {height}"


def draw_findings_page(fig: Figure, products: Products) -> None:
    """Page 2: hotspot table, violations, conditions, meter, method and CV, std map, cautions."""
    p = products
    f = p.findings
    unit = p.display_unit
    _title(fig, p, "findings")
    col = TextColumn(fig, 0.04, 0.895, 0.52)

    col.heading("Hotspots")
    if f is None:
        used = p.used_readings
        exceeding = [r.reading.id for r in used if abs(r.value_v_per_m) >= p.threshold_v_per_m]
        level = format_field(p.threshold_v_per_m, unit)
        if exceeding:
            # A measured exceedance is a fact even without a map: never "no hotspots" here.
            ids = ", ".join(map(str, exceeding[:12])) + (" ..." if len(exceeding) > 12 else "")
            col.para(f"No field model ({p.no_field_reason}), so nothing is mapped; but {len(exceeding)} of "
                     f"{len(used)} field readings reach the action level {level} (ids {ids}): each is a "
                     "measured exceedance.")
        else:
            col.para(f"No field model, so no hotspots: {p.no_field_reason}.")
            col.para(f"None of the {len(used)} field readings is at or above the action level {level}.")
    else:
        rows = _hotspot_rows(p)
        if rows:
            stops = (0.0, 0.032, 0.092, 0.157, 0.207, 0.272, 0.347, 0.392, 0.445)
            col.row([HOTSPOT_HEADERS[c] for c in HOTSPOT_COLUMNS], stops, bold=True)
            for row in rows[:MAX_HOTSPOT_ROWS]:
                col.row(row, stops)
            if len(rows) > MAX_HOTSPOT_ROWS:
                col.para(f"... and {len(rows) - MAX_HOTSPOT_ROWS} more in the GeoPackage's hotspots layer.", 7.5)
            if any(h.status == "measured" for h in f.hotspots):
                col.para(MEASURED_NOTE[0].upper() + MEASURED_NOTE[1:] + ".", 7.0, color="#444444")
        else:
            col.para(f"No reading and no region of the map reaches the action level "
                     f"{format_field(p.threshold_v_per_m, unit)}.")
        if f.probable:
            extra = [r for r in f.probable if not r.hotspot_ids]
            col.para(f"{plural(len(f.probable), 'region')} where P(|E| ≥ action level) ≥ 0.5"
                     + (f", {len(extra)} of them outside every hotspot (measure there)." if extra else "."), 7.5)
        if f.unmapped_exceedances:
            col.para(f"Readings at or above the action level outside every hotspot: "
                     f"{', '.join(map(str, f.unmapped_exceedances[:12]))}.", 7.5)

    col.heading("Limit violations")
    if f is None:
        col.para("Not checked without a field model.")
    elif f.violations:
        for v in f.violations[:5]:
            col.para("• " + v.message, 7.5)
        if len(f.violations) > 5:
            col.para(f"... and {len(f.violations) - 5} more in the violations layer.", 7.5)
    else:
        col.para("None: no sensitive asset is closer to a high-field region than the keep-away rules allow "
                 "(" + "; ".join(r.text for r in f.rules) + ").", 7.5)
    if f is not None and f.zone_results:
        col.heading("Zones")
        for r in f.zone_results:
            col.para("• " + zone_sentence(r, lambda v: format_field(v, unit, 3)), 7.5,
                     color="#b00020" if r.exceeded else "black")
    col.para(LIMITS_ARE_DEFAULTS, 7.0, color="#444444")

    col.heading("Conditions")
    ranges = p.condition_ranges()
    rh, temp = ranges["rh_percent"], ranges["temperature_c"]
    if p.conditions:
        col.para(f"{plural(len(p.conditions), 'condition note')}; RH "
                 + (f"{rh[0]:g}–{rh[1]:g} %" if rh else "not noted") + "; temperature "
                 + (f"{temp[0]:g}–{temp[1]:g} °C" if temp else "not noted") + ".")
        notes = [c.note for c in p.conditions if c.note]
        if notes:
            col.para("Notes: " + "; ".join(notes[:4]) + ("; ..." if len(notes) > 4 else ""), 7.5)
        if rh and rh[0] < 30:
            col.para("Low humidity (< 30 % RH) raises charging; fields may be lower on a humid day.", 7.5)
    else:
        col.para("No conditions were noted (note RH and temperature at the start and end of each survey).")

    col.heading("Meter and calibration")
    for m in p.meters:
        cal = (f"calibrated {m.calibration_date.isoformat()}" if m.calibration_date
               else "calibration date not recorded")
        due = f", due {m.due_date.isoformat()}" if m.due_date else ""
        fit = (f", gain {m.gain:.4g}, offset {format_field(m.offset_v_per_m, unit, 3)}" if m.calibrated else "")
        col.para(f"{m.id}: {m.description or 'no description'}"
                 + (f", serial {m.serial}" if m.serial else "")
                 + f", specified at {m.distance_m * 100:.3g} cm; {cal}{due}{fit}.", 7.5)
    if p.corrections is not None:
        col.para("Corrections applied: " + (", ".join(p.corrections.applied) or "none") + ".", 7.5)
    col.para(sign_and_height(p), 7.5)

    if f is not None and f.advice:
        col.heading("Next readings")
        for s_ in f.advice[:4]:
            where = f"point {s_.point}" if s_.point else f"x {s_.x:.1f} m, y {s_.y:.1f} m"
            col.para(f"{s_.rank}. {where}: {s_.why}", 7.2)

    col.heading("Method and cross-validation")
    if p.grid is None:
        col.para(p.no_field_reason or "No field model.", 7.5)
    else:
        g = p.grid
        kriging = None if g.settings is None else g.settings.kriging
        physics = None if g.settings is None else g.settings.physics
        col.para(f"{g.method}, cell {g.cell_m:g} m. {field_text_in(g.reason, unit)}", 7.5)
        if kriging is not None and kriging.variogram_text:
            col.para(f"Variogram: {kriging.variogram_text}.", 7.5)
        table = g.cv_table or ((g.cv,) if g.cv else ())
        if table:
            stops = (0.0, 0.09, 0.17, 0.25, 0.34, 0.43)
            col.row(["method", "RMSE", "MAE", "mean error", "mean z", "RMS z"], stops, bold=True)
            for c in table:
                col.row([c.method + (" *" if c.method == g.method else ""),
                         format_field(c.rmse_v_per_m, unit, 3), format_field(c.mae_v_per_m, unit, 3),
                         format_field(c.mean_error_v_per_m, unit, 3),
                         "-" if c.mean_standardized is None else f"{c.mean_standardized:.2f}",
                         "-" if c.rms_standardized is None else
                         f"{c.rms_standardized:.2f}" + (" †" if _calibrated(g, c) else "")], stops)
            split = None if physics is None else physics.loo_split
            if split is not None:
                parts = []
                for st_, label in ((split.near_sources, "near sources"), (split.quiet, "elsewhere")):
                    if st_.n and st_.rms_standardized is not None:
                        parts.append(f"{label} {st_.n} readings, RMSE {format_field(st_.rmse_v_per_m, unit, 3)}, "
                                     f"RMS z {st_.rms_standardized:.2f}")
                if parts:
                    col.para("Physical model, " + "; ".join(parts) + ".", 6.8)
            col.para("Leave-one-out: each reading predicted from the others. z = error / predicted standard "
                     "deviation; mean z near 0 and RMS z near 1 mean the stated uncertainty is honest.", 6.8,
                     color="#444444")
            scale = _std_scale(g)
            if scale is not None:
                col.para(f"† {g.method} gives no standard deviation of its own: the map's is the ordinary "
                         f"kriging standard deviation scaled locally (site-wide factor {scale:.3g}, "
                         "set near each place by the nearby leave-one-out errors) so that its RMS z is 1 by "
                         "construction; mean z and the share of |z| <= 1.96 remain the checks.", 6.8,
                         color="#444444")

    # Right: the standard deviation map.
    ax = fig.add_axes((0.60, 0.40, 0.36, 0.46))
    ax.set_title("Uncertainty of a new reading (standard deviation)", fontsize=9.5, loc="left",
                 color="#1b3a6b", fontweight="bold")
    frame_axes(ax, p.site)
    g = p.grid
    if g is not None and np.isfinite(g.std).any():
        std = np.ma.masked_invalid(from_si(1.0, unit) * np.asarray(g.std, dtype=float))
        vmin, vmax = std_limits(std.compressed())
        c = g.cell_m
        mesh = ax.pcolormesh(np.append(g.x - c / 2, g.x[-1] + c / 2), np.append(g.y - c / 2, g.y[-1] + c / 2),
                             std, cmap=_std_cmap(), vmin=vmin, vmax=vmax, shading="flat", zorder=1,
                             rasterized=True)
        cb = fig.colorbar(mesh, ax=ax, fraction=0.04, pad=0.02, extend="both")
        cb.set_label(f"standard deviation ({unit})", fontsize=7.5)
        cb.ax.tick_params(labelsize=6.5)
    else:
        reason = "no field model" if g is None else f"method {g.method} gives no standard deviation"
        ax.text(0.5, 0.5, reason, transform=ax.transAxes, ha="center", va="center", fontsize=8)
    draw_site(ax, p.site, labels=False)
    if p.readings:
        xy = np.array([(r.reading.x, r.reading.y) for r in p.readings])
        ax.scatter(xy[:, 0], xy[:, 1], s=2, c="#111111", zorder=10)
    fig.text(0.60, 0.365, "How far a new reading there may differ from the map (one standard deviation, the "
             "meter's scatter included); colours span this site's values. Large in gaps: where the estimate "
             "is near the action level, measure there (next readings).", fontsize=7,
             va="top", color="#444444", wrap=True)

    # Bottom right: the cautions box, sized to its text.
    draw_cautions(fig, 0.60, 0.30, 0.36)


def _charge_text(q: float) -> str:
    return f"{q * 1e6:+.2f} µC" if abs(q) >= 1e-6 else f"{q * 1e9:+.1f} nC"


def draw_sources_page(fig: Figure, products: Products) -> None:
    """Page 3 (physical field model only): the likely charged objects, largest first."""
    p = products
    unit = p.display_unit
    _title(fig, p, "likely charged objects")
    rows = source_records(p.grid, p.site)
    phys = p.grid.settings.physics if p.grid.settings is not None else None
    ax = fig.add_axes((0.06, 0.40, 0.88, 0.46))
    frame_axes(ax, p.site)
    draw_site(ax, p.site, labels=False)
    for r in rows:
        g = shapely.from_wkt(r["wkt"])
        color = "#c0392b" if r["charge_c"] > 0 else "#1f5fa8"
        if g.geom_type == "Point":
            ax.scatter([g.x], [g.y], s=90, marker="*", color=color, edgecolor="black", linewidth=0.5, zorder=11)
        elif g.geom_type.endswith("Polygon"):
            fill_geometry(ax, g, facecolor=color, edgecolor="black", linewidth=0.8, alpha=0.55, zorder=10)
        else:
            draw_lines(ax, g, color=color, linewidth=4.0, solid_capstyle="butt", zorder=10)
        ax.annotate(r["source_id"], (r["x_m"], r["y_m"]), xytext=(5, 5), textcoords="offset points",
                    fontsize=8, fontweight="bold", zorder=12,
                    bbox={"boxstyle": "round,pad=0.12", "fc": "white", "ec": "none", "alpha": 0.8})
    ax.set_title("Sources of the physical field model (red: positive charge, blue: negative)", fontsize=9.5,
                 loc="left", color="#1b3a6b", fontweight="bold")
    col = TextColumn(fig, 0.06, 0.34, 0.88)
    col.heading("Likely charged objects, largest field first")
    if not rows:
        col.para("No charged source explains the readings better than the background and the meter's noise.")
    else:
        stops = (0.0, 0.05, 0.11, 0.33, 0.47, 0.63, 0.76)
        col.row(["id", "kind", "where", "height", "charge", "peak field", "status"], stops, bold=True)
        for r in rows[:10]:
            where = r["asset"] or f"x {r['x_m']:.1f} m, y {r['y_m']:.1f} m"
            col.row([r["source_id"], r["kind"], where, f"{r['height_m']:.2f} ± {r['height_std_m']:.2f} m",
                     f"{_charge_text(r['charge_c'])} ± {_charge_text(abs(r['charge_std_c']))[1:]}",
                     format_field(r["peak_v_per_m"], unit, 3), r["status"]], stops)
    if phys is not None:
        col.para(f"Meter height {phys.meter_height_m:.2f} m; background field "
                 f"{format_field(phys.background_v_per_m, unit, 3)}; meter error model "
                 f"{format_field(phys.noise_floor_v_per_m, unit, 3)} + "
                 f"{100 * phys.noise_share:.1f} % of the source field.", 7.5)
    col.heading("What the survey cannot tell")
    for text in LIMITATIONS:
        col.para("• " + text, 7.4)
    col.para("A field map is evidence, not a safety clearance. " + LIMITS_ARE_DEFAULTS, 7.0, color="#444444")


def write_report(products: Products, pdf_path: str | Path, *, png_path: str | Path | None = None,
                 dpi: int = 160, history=None, current: int | None = None) -> ReportResult:
    """Write the PDF report (and optionally the map page as PNG).

    Parameters
    ----------
    products : Products
        Output of :func:`~mapper.workflow.survey_products`.
    pdf_path : str or Path
        Target ``.pdf``; replaced if it exists.
    png_path : str or Path, optional
        Also write the map alone as PNG here.
    dpi : int
        Resolution of the PNG, dots per inch.
    history : mapper.archive.history.History, optional
        The site's archived history: adds a history page (``mapper report --db``).
    current : int, optional
        Archive id of this survey, marked on the history page.

    Returns
    -------
    ReportResult
    """
    pdf_path = output_path(pdf_path, ".pdf")
    png = Path(png_path) if png_path is not None else None
    meta = {"Title": f"{products.name}: electrostatic field survey", "Author": products.operator or "",
            "Subject": "field map and findings", "Creator": f"mapper {__version__}"}
    with matplotlib.rc_context(RC):
        pages = [draw_map_page, draw_findings_page]
        if products.grid is not None and products.grid.method == "physics":
            pages.append(draw_sources_page)
        figures = []
        for draw in pages:
            fig = Figure(figsize=PAGE_SIZE_IN)
            draw(fig, products)
            figures.append(fig)
        if history is not None:
            from mapper.export.report_history import draw_history_page

            fig = Figure(figsize=PAGE_SIZE_IN)
            draw_history_page(fig, products, history, current)
            figures.append(fig)
        # Written beside the target and renamed into place when complete (mapper.atomic_file): a
        # killed run never leaves a truncated file under the final name, nor replaces a good one.
        with atomic_path(pdf_path) as tmp, PdfPages(tmp, metadata=meta) as pdf:
            for fig in figures:
                pdf.savefig(fig)
        if png is not None:
            with atomic_path(png) as tmp:
                figures[0].savefig(tmp, dpi=dpi, facecolor="white", format="png")
    return ReportResult(pdf_path, png, len(figures))


__all__ = ["PAGE_SIZE_IN", "SECTIONS", "ReportResult", "draw_findings_page", "draw_map_page", "write_report"]


def _std_scale(grid) -> float | None:
    """Site-wide factor of a borrowed (calibrated kriging) standard deviation, or None."""
    std = None if grid.settings is None else grid.settings.std
    return None if std is None else std.scale


def _calibrated(grid, stats) -> bool:
    """True for the chosen method's row when its standard deviation is calibrated kriging's."""
    return stats.method == grid.method and _std_scale(grid) is not None
