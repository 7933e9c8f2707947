"""``mapper compare``: two surveys of one site, before and after a change.

Prints what happened to each hotspot (appeared, cleared, grew, shrank, unchanged) and a summary,
and writes a GeoPackage with the difference grid (raster ``difference``, after - before in V/m),
its bands, both surveys' hotspots, the changes and the common region.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import rasterio
from rasterio.transform import Affine
from scipy.interpolate import RegularGridInterpolator

from mapper.cli.cmd_hotspots import load_survey_inputs
from mapper.cli.common import fmt, say, table, threshold_arg, warn
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS, export_crs, transform_all
from mapper.features import Comparison, bands, compare_fields, nice_levels
from mapper.features.cautions import CAUTIONS

#: Layer names written to the GeoPackage.
LAYERS = (
    "common_region",
    "difference_bands",
    "hotspots_before",
    "hotspots_after",
    "hotspot_changes",
    "summary",
)
RASTER = "difference"


def register(sub) -> None:
    p = sub.add_parser(
        "compare",
        help="compare two surveys of one site (before / after a change)",
        description="Difference grid (after - before) and hotspot changes between two surveys "
        "of the same site, written to a GeoPackage.",
    )
    p.add_argument("before", help="survey file before the change")
    p.add_argument("after", help="survey file after the change")
    p.add_argument("--out", required=True, help="GeoPackage to write, e.g. diff.gpkg")
    p.add_argument(
        "--threshold",
        type=threshold_arg,
        metavar="Q",
        help="action level with unit for both surveys (default: the first survey's own)",
    )
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(func=run)


def run(args) -> int:
    out = Path(args.out)
    if out.suffix.lower() != ".gpkg":
        raise MapperError(f"output {out} must end in .gpkg (a GeoPackage)", where="--out")
    before = load_survey_inputs(args.before, args.threshold)
    after = load_survey_inputs(args.after, args.threshold)
    threshold = before.threshold_v_per_m
    messages = [f"{args.before}: {m}" for m in before.warnings]
    messages += [f"{args.after}: {m}" for m in after.warnings]
    if args.threshold is None and not np.isclose(after.threshold_v_per_m, threshold, rtol=1e-9):
        messages.append(
            f"the surveys have different thresholds ({fmt(threshold, before.unit)} and "
            f"{fmt(after.threshold_v_per_m, before.unit)}); both compared at the first one's"
        )
    cmp = compare_fields(
        before.grid,
        after.grid,
        before.site,
        after.site,
        threshold,
        before.readings,
        after.readings,
    )
    write_comparison_gpkg(out, cmp, before.site, before.unit)
    unit = before.unit
    if args.json:
        say(
            json.dumps(
                {
                    "before": before.name,
                    "after": after.name,
                    "out": str(out),
                    "summary": cmp.summary.to_dict(),
                    "changes": [c.to_dict() for c in cmp.changes],
                    "warnings": messages,
                    "cautions": list(CAUTIONS),
                },
                indent=2,
            )
        )
        return 0
    for m in messages:
        warn(m)
    s = cmp.summary
    say(f"before     {before.name}  ({before.path}; {before.field_note})")
    say(f"after      {after.name}  ({after.path}; {after.field_note})")
    say(f"threshold  |E| >= {fmt(threshold, unit)}")
    say(f"common     {s.common_area_m2:.1f} m² covered by both")
    say("")
    if cmp.changes:
        rows = [
            [
                c.status + (f" ({c.note})" if c.note else ""),
                "+" if c.polarity == "positive" else "-",
                ", ".join(c.before_ids) or "-",
                ", ".join(c.after_ids) or "-",
                f"{c.area_before_m2:.2f}",
                f"{c.area_after_m2:.2f}",
                fmt(c.peak_before_v_per_m, unit),
                fmt(c.peak_after_v_per_m, unit),
            ]
            for c in cmp.changes
        ]
        say("Hotspot changes:")
        say(
            table(
                rows,
                (
                    "change",
                    "pol",
                    "before",
                    "after",
                    "area before m²",
                    "area after m²",
                    "peak before",
                    "peak after",
                ),
            )
        )
    else:
        say(f"No hotspots in either survey at {fmt(threshold, unit)}.")
    say("")
    say("hotspots   " + ", ".join(f"{n} {k}" for k, n in s.counts.items()))
    say(
        table(
            [
                [
                    "largest |E|",
                    fmt(s.max_abs_before_v_per_m, unit),
                    fmt(s.max_abs_after_v_per_m, unit),
                ],
                [
                    "area at or above level",
                    f"{s.area_above_before_m2:.2f} m²",
                    f"{s.area_above_after_m2:.2f} m²",
                ],
            ],
            ("", "before", "after"),
        )
    )
    say(
        f"difference (after - before): mean {fmt(s.mean_difference_v_per_m, unit)}, mean |d| "
        f"{fmt(s.mean_abs_difference_v_per_m, unit)}, largest rise "
        f"{fmt(s.max_increase_v_per_m, unit)}, largest fall {fmt(s.max_decrease_v_per_m, unit)}"
    )
    say(f"wrote      {out} (raster '{RASTER}', layers {', '.join(LAYERS)})")
    say("")
    say("Cautions:")
    for c in CAUTIONS:
        say(f"  - {c}")
    return 0


def _frame(records: list[dict], geoms, ecrs: ExportCRS) -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame(records, geometry=transform_all(geoms, ecrs), crs=ecrs.crs)


def difference_raster(cmp: Comparison, ecrs: ExportCRS) -> tuple[np.ndarray, object]:
    """The difference grid as a north-up float32 raster in the export CRS.

    A local site writes the common grid as it is. A georeferenced site is resampled
    (bilinear) onto a north-up grid of the same cell size in the projected CRS, since a
    GeoPackage raster cannot be rotated.

    Returns
    -------
    array : ndarray, shape (rows, cols), float32
        V/m, NaN where there is no difference value; row 0 is the northern edge.
    transform : affine.Affine
        Pixel to CRS transform.
    """
    x, y, d = cmp.x, cmp.y, cmp.difference
    dx, dy = float(x[1] - x[0]), float(y[1] - y[0])
    if ecrs.georef is None:
        transform = Affine(dx, 0.0, x[0] - dx / 2, 0.0, -dy, y[-1] + dy / 2)
        return d[::-1].astype(np.float32), transform
    g = ecrs.georef
    cell = min(dx, dy) * g.scale
    cx = np.array([x[0] - dx / 2, x[-1] + dx / 2, x[-1] + dx / 2, x[0] - dx / 2])
    cy = np.array([y[0] - dy / 2, y[0] - dy / 2, y[-1] + dy / 2, y[-1] + dy / 2])
    e, n = g.forward(cx, cy)
    west, north = float(np.min(e)), float(np.max(n))
    cols = int(np.ceil((np.max(e) - west) / cell))
    rows = int(np.ceil((north - np.min(n)) / cell))
    ee, nn = np.meshgrid(
        west + cell * (np.arange(cols) + 0.5), north - cell * (np.arange(rows) + 0.5)
    )
    sx, sy = g.inverse(ee, nn)
    interp = RegularGridInterpolator((y, x), d, bounds_error=False, fill_value=np.nan)
    values = interp(np.column_stack([np.ravel(sy), np.ravel(sx)])).reshape(ee.shape)
    return values.astype(np.float32), Affine(cell, 0.0, west, 0.0, -cell, north)


def write_comparison_gpkg(path: Path, cmp: Comparison, site, unit: str) -> None:
    """Write a comparison to a GeoPackage (replacing the file), atomically.

    Parameters
    ----------
    path : Path
        Output ``.gpkg``.
    cmp : Comparison
        What :func:`mapper.features.compare_fields` returned.
    site : Site
        The site (its georeference places the layers).
    unit : str
        Display unit for band labels.
    """
    ecrs = export_crs(site)
    tmp = path.with_name(f".{path.stem}.partial.gpkg")
    if tmp.exists():
        tmp.unlink()
    try:
        _frame([{"area_m2": float(cmp.common_region.area)}], [cmp.common_region], ecrs).to_file(
            tmp, layer="common_region", driver="GPKG"
        )
        diff_grid = cmp.difference_grid()
        d = cmp.difference[np.isfinite(cmp.difference)]
        lo, hi = float(d.min()), float(d.max())
        if hi - lo > 0:
            lv = nice_levels(min(lo, -hi), max(hi, -lo), unit=unit, symmetric=True)
            bs = bands(diff_grid, cmp.common_region, lv)
        else:
            bs = ()
        _frame(
            [
                {
                    "lower_v_per_m": b.lower_v_per_m,
                    "upper_v_per_m": b.upper_v_per_m,
                    "label": b.label,
                    "area_m2": b.area_m2,
                }
                for b in bs
            ],
            [b.geometry for b in bs],
            ecrs,
        ).to_file(tmp, layer="difference_bands", driver="GPKG", promote_to_multi=True)
        status_of = {}
        for c in cmp.changes:
            for hid in c.before_ids:
                status_of[("before", hid)] = c.status
            for hid in c.after_ids:
                status_of[("after", hid)] = c.status
        for side, hs in (("before", cmp.hotspots_before), ("after", cmp.hotspots_after)):
            records = []
            for h in hs:
                rec = {
                    k: v for k, v in h.to_dict().items() if k not in ("wkt", "reading_ids", "zones")
                }
                rec["zones"] = ", ".join(h.zones)
                rec["readings"] = len(h.reading_ids)
                rec["change"] = status_of.get((side, h.id), "")
                records.append(rec)
            _frame(records, [h.geometry for h in hs], ecrs).to_file(
                tmp, layer=f"hotspots_{side}", driver="GPKG", promote_to_multi=True
            )
        change_records = []
        for c in cmp.changes:
            rec = {k: v for k, v in c.to_dict().items() if not k.startswith("wkt")}
            rec["before_ids"] = ", ".join(c.before_ids)
            rec["after_ids"] = ", ".join(c.after_ids)
            change_records.append(rec)
        change_geoms = [c.geometry_before.union(c.geometry_after) for c in cmp.changes]
        _frame(change_records, change_geoms, ecrs).to_file(
            tmp, layer="hotspot_changes", driver="GPKG", promote_to_multi=True
        )
        summary = cmp.summary.to_dict()
        counts = summary.pop("counts")
        summary.update({f"count_{k}": v for k, v in counts.items()})
        summary["crs"] = ecrs.name
        pyogrio.write_dataframe(pd.DataFrame([summary]), tmp, layer="summary", driver="GPKG")
        array, transform = difference_raster(cmp, ecrs)
        with rasterio.open(
            tmp,
            "w",
            driver="GPKG",
            width=array.shape[1],
            height=array.shape[0],
            count=1,
            dtype="float32",
            crs=ecrs.wkt,
            transform=transform,
            nodata=np.nan,
            RASTER_TABLE=RASTER,
            RASTER_IDENTIFIER="after - before, V/m",
            APPEND_SUBDATASET="YES",
            TILE_FORMAT="TIFF",
        ) as ds:
            ds.write(array, 1)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
