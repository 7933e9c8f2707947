"""``mapper sources``: the likely charged objects behind a survey's field (the physical model)."""

from __future__ import annotations

import json

from mapper.cli.commands import summary
from mapper.cli.common import fmt, say, table, warn
from mapper.features.sources import LIMITATIONS, source_records
from mapper.workflow import survey_file_products


def register(sub) -> None:
    p = sub.add_parser(
        "sources",
        help=summary('sources'),
        description="Fit the physical field model (charged sources over a grounded floor, a "
        "background and a residual) to the corrected readings, or use the stored one, and list "
        "the sources: the site's assets that carry charge and unlisted ones found in the readings.",
    )
    p.add_argument("survey", help="survey file")
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(func=run)


def _charge(q: float) -> str:
    """Charge in nC or µC, fixed-point."""
    if abs(q) >= 1e-6:
        return f"{q * 1e6:+.2f} µC"
    return f"{q * 1e9:+.1f} nC"


def run(args) -> int:
    products = survey_file_products(args.survey)
    if products.grid is None or products.grid.method != "physics":
        products = survey_file_products(args.survey, method="physics")
    products.require_field()
    grid = products.grid
    records = source_records(grid, products.site)
    phys = grid.settings.physics if grid.settings is not None else None
    if args.json:
        say(json.dumps({
            "survey": products.name,
            "file": products.source,
            "crs": products.crs.crs.to_string(),
            "coordinates": "site metres",
            "field_model": products.field_note,
            "background_v_per_m": None if phys is None else phys.background_v_per_m,
            "meter_height_m": None if phys is None else phys.meter_height_m,
            "sources": records,
            "limitations": list(LIMITATIONS),
        }, indent=2, allow_nan=False))
        return 0
    for message in products.warnings:
        warn(message)
    unit = products.display_unit
    say(f"{products.name}: {len(records)} likely charged object(s), largest field first "
        f"(physical model, meter at {0 if phys is None else phys.meter_height_m:.2f} m; {products.field_note})")
    if not records:
        say("no charged source explains the readings better than the background and noise")
    rows = []
    for r in records:
        where = r["asset"] or f"({r['x_m']:.1f}, {r['y_m']:.1f}) m"
        if r["position_std_m"] is not None:
            where += f" ±{r['position_std_m']:.1f} m"
        rows.append([
            r["source_id"], r["kind"], where, f"{r['height_m']:.2f} ±{r['height_std_m']:.2f} m",
            f"{_charge(r['charge_c'])} ±{abs(r['charge_std_c']) * (1e6 if abs(r['charge_c']) >= 1e-6 else 1e9):.2g}",
            fmt(r["peak_v_per_m"], unit), r["status"],
        ])
    if rows:
        say(table(rows, ["id", "kind", "where", "height", "charge", "peak field", "status"]))
    say(f"background field {fmt(0.0 if phys is None else phys.background_v_per_m, unit)}")
    for line in LIMITATIONS:
        say(f"note: {line}")
    return 0
