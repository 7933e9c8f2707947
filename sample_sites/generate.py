"""Regenerate the sample sites' readings from a physical model (fixed seed).

Both sites are invented. Readings are the vertical field at meter height of charged sources over
a grounded floor (method of images, ``mapper.physics.images``), plus meter noise, a slow zero
drift and, outdoors, a storm's large-scale field and GPS scatter. Run from the repository root::

    .venv/bin/python sample_sites/generate.py
"""

from __future__ import annotations

import csv
import json
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
from pyproj import Transformer

from mapper.physics.images import AreaCharge, LineCharge, PointCharge, field_z
from mapper.plan.grid import plan_grid
from mapper.site.site_file import load_site

HERE = Path(__file__).resolve().parent
SEED = 20261202

# --------------------------------------------------------------------------- north hall (indoor)
#: Invented georeference: site origin and rotation in UTM zone 33N (EPSG:32633).
HALL_ORIGIN_E, HALL_ORIGIN_N, HALL_ROTATION_DEG = 411_250.0, 5_656_480.0, 23.0
HALL_METER_HEIGHT_M = 1.0
HALL_SOURCES = [
    # belt 1: overhead conveyor, its rubber belt charged negative by friction, 2.4 m up
    # (the field below points up toward it: positive in the physics convention)
    LineCharge(7.0, 9.0, 33.0, 9.0, h=2.4, density_c_per_m=-1.0e-6),
    # stretch-wrap station: film carriage at the top of its mast, film charged positive
    PointCharge(42.8, 11.2, h=2.6, q=+6.0e-6),
    # stack of plastic totes by the wall, top layer charged negative
    AreaCharge(17.0, 21.0, 21.0, 23.0, h=2.0, density_c_per_m2=-6.0e-7),
]

HALL_TOML = """# North Hall: an invented packaging hall with two conveyor lines, a stretch-wrap station,
# workstations and an ESD protected area. Coordinates in metres from the south-west corner.
[site]
name = "North Hall"
units = "m"
crs = "EPSG:32633"
timezone = "Europe/Berlin"

[outline]
wkt = "POLYGON ((0 0, 48 0, 48 30, 12 30, 12 25, 0 25, 0 0))"

[[asset]]
name = "belt 1"
kind = "conveyor"
# overhead, 2.4 m up
wkt = "LINESTRING (7 9, 33 9)"

[[asset]]
name = "belt 2"
kind = "conveyor"
wkt = "LINESTRING (7 19, 30 19)"

[[asset]]
name = "stretch-wrap station"
kind = "machine"
wkt = "POLYGON ((40.5 6.5, 43.5 6.5, 43.5 9.5, 40.5 9.5, 40.5 6.5))"

[[asset]]
name = "rework bench"
kind = "workstation"
wkt = "POLYGON ((26 11, 30 11, 30 12.2, 26 12.2, 26 11))"

[[asset]]
name = "test bench"
kind = "workstation"
wkt = "POLYGON ((31 13.5, 35 13.5, 35 14.7, 31 14.7, 31 13.5))"

[[asset]]
name = "packing table"
kind = "workstation"
wkt = "POLYGON ((38 12, 41 12, 41 13.2, 38 13.2, 38 12))"

[[asset]]
name = "tote stack"
kind = "storage"
wkt = "POLYGON ((18 21, 21 21, 21 23, 18 23, 18 21))"

[[asset]]
name = "pallet rack"
kind = "rack"
wkt = "POLYGON ((38 22, 46 22, 46 27, 38 27, 38 22))"

[[zone]]
name = "packing EPA"
kind = "EPA"
wkt = "POLYGON ((24 10, 36 10, 36 16, 24 16, 24 10))"
limit = "125 V/in"
"""


def hall_control_points(rng: np.random.Generator) -> str:
    """Four corners placed by the invented transform, with 1 cm survey scatter, as TOML."""
    to_ll = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)
    theta = np.radians(HALL_ROTATION_DEG)
    lines = []
    for x, y in [(0, 0), (48, 0), (48, 30), (0, 25)]:
        e = HALL_ORIGIN_E + x * np.cos(theta) - y * np.sin(theta) + rng.normal(0, 0.01)
        n = HALL_ORIGIN_N + x * np.sin(theta) + y * np.cos(theta) + rng.normal(0, 0.01)
        lon, lat = to_ll.transform(e, n)
        lines.append(f"\n[[control_point]]\nx = {x:.1f}\ny = {y:.1f}\nlon = {lon:.8f}\nlat = {lat:.8f}\n")
    return "".join(lines)


#: The same hall after remedial work: an ioniser bar over belt 1 and a grounded brush on its
#: return run leave a tenth of its charge; the wrap station and the totes are unchanged.
HALL_SOURCES_AFTER = [
    LineCharge(7.0, 9.0, 33.0, 9.0, h=2.4, density_c_per_m=-1.0e-7),
    *HALL_SOURCES[1:],
]


#: A week later: belt 1 still remedied, the tote stack moved out of the hall, and film-wrapped
#: pallets (charged negative on top) now stored on the pallet rack.
HALL_SOURCES_THIRD = [
    HALL_SOURCES_AFTER[0],
    HALL_SOURCES[1],
    AreaCharge(39.0, 23.0, 45.0, 26.0, h=2.2, density_c_per_m2=-6.0e-7),
]


def make_hall(
    rng: np.random.Generator,
    sources=HALL_SOURCES,
    name: str = "north_hall",
    start: datetime = datetime(2026, 11, 17, 7, 30, tzinfo=UTC),
) -> None:
    toml_path = HERE / "north_hall.toml"
    if name == "north_hall":
        toml_path.write_text(HALL_TOML + hall_control_points(rng), encoding="utf-8")
    site = load_site(toml_path)
    plan = plan_grid(site, 2.0)
    drift_v_per_m_per_h = 45.0  # slow zero drift of the meter (invented)
    noise = 25.0  # V/m, meter noise (invented)
    rows: list[dict] = []

    def truth(x, y):
        return float(field_z(sources, x, y, HALL_METER_HEIGHT_M))

    def reading(t: datetime, x: float, y: float, kind: str, point: str = "", note: str = "") -> dict:
        hours = (t - start).total_seconds() / 3600
        true = 0.0 if kind == "zero" else truth(x, y)
        value = true * (1 + rng.normal(0, 0.01)) + 12.0 + drift_v_per_m_per_h * hours + rng.normal(0, noise)
        return {
            "time": t.isoformat().replace("+00:00", "Z"),
            "x": f"{x:.2f}",
            "y": f"{y:.2f}",
            "value": f"{value / 1000:.3f}",
            "unit": "kV/m",
            "kind": kind,
            "height_m": f"{HALL_METER_HEIGHT_M:.2f}",
            "point": point,
            "note": note,
        }

    ref_x, ref_y = 3.0, 1.0  # reference station by the entrance
    t = start
    rows.append(reading(t, ref_x, ref_y, "zero", note="grounded plate"))
    t += timedelta(seconds=40)
    rows.append(reading(t, ref_x, ref_y, "reference", note="reference station"))
    last_ref = t
    for p in plan.points:
        t += timedelta(seconds=int(rng.integers(10, 16)))
        if t - last_ref >= timedelta(minutes=20):
            rows.append(reading(t, ref_x, ref_y, "reference", note="reference station"))
            last_ref = t
            t += timedelta(seconds=30)
        rows.append(reading(t, p.x, p.y, "field", p.label))
    # repeats at a few points and readings right beside belt 1 (off the grid)
    for p in rng.choice(np.array(plan.points, dtype=object), size=8, replace=False):
        t += timedelta(seconds=20)
        rows.append(reading(t, p.x, p.y, "field", p.label, "repeat"))
    for x in (10.0, 16.0, 22.0, 28.0):
        t += timedelta(seconds=25)
        rows.append(reading(t, x, 9.5, "field", note="beside belt 1"))
    t += timedelta(seconds=40)
    rows.append(reading(t, ref_x, ref_y, "reference", note="reference station"))
    t += timedelta(seconds=30)
    rows.append(reading(t, ref_x, ref_y, "zero", note="grounded plate"))
    _write_csv(HERE / f"{name}_readings.csv", rows)
    conditions = [
        {"time": (start - timedelta(minutes=2)).isoformat().replace("+00:00", "Z"), "rh_percent": 34,
         "temperature_c": 19.5, "note": "ionisers at packing table off"},
        {"time": (start + timedelta(minutes=45)).isoformat().replace("+00:00", "Z"), "rh_percent": 31,
         "temperature_c": 20.5, "note": "dock door 2 open"},
        {"time": t.isoformat().replace("+00:00", "Z"), "rh_percent": 29,
         "temperature_c": 21.0, "note": ""},
    ]
    _write_csv(HERE / f"{name}_conditions.csv", conditions)


# ---------------------------------------------------------------------------- east yard (outdoor)
YARD_CRS = "EPSG:32633"
YARD_ORIGIN_E, YARD_ORIGIN_N = 412_600.0, 5_655_900.0
YARD_METER_HEIGHT_M = 1.0
YARD_SOURCES = [
    # tarpaulin-covered stack, charged by wind-blown dust (invented)
    AreaCharge(68.0, 30.0, 76.0, 36.0, h=2.0, density_c_per_m2=+4.0e-8),
]


def yard_background(x, y):
    """Large-scale field under an approaching storm: upward (physics +), rising to the north-east."""
    return 900.0 + 8.0 * x + 12.0 * y


def make_yard(rng: np.random.Generator) -> None:
    to_ll = Transformer.from_crs(YARD_CRS, "EPSG:4326", always_xy=True)

    def ll(coords):
        e = [YARD_ORIGIN_E + x for x, _ in coords]
        n = [YARD_ORIGIN_N + y for _, y in coords]
        lon, lat = to_ll.transform(e, n)
        return [[round(a, 8), round(b, 8)] for a, b in zip(lon, lat, strict=True)]

    def polygon(coords):
        return {"type": "Polygon", "coordinates": [ll(coords + [coords[0]])]}

    features = [
        ({"kind": "outline", "name": "east yard"}, polygon([(0, 0), (120, 0), (120, 80), (0, 80)])),
        ({"kind": "tank", "name": "water tank"}, polygon([(20, 55), (30, 55), (30, 65), (20, 65)])),
        ({"kind": "storage", "name": "tarp stack"}, polygon([(68, 30), (76, 30), (76, 36), (68, 36)])),
        ({"kind": "workstation", "name": "weigh cabin", "sensitive": True},
         polygon([(90, 10), (96, 10), (96, 14), (90, 14)])),
        ({"kind": "gantry", "name": "loading gantry"}, {"type": "LineString", "coordinates": ll([(40, 5), (40, 40)])}),
        ({"kind": "zone", "name": "electronics lay-down", "limit": "1 kV/m"},
         polygon([(84, 4), (110, 4), (110, 22), (84, 22)])),
    ]
    geojson = {
        "type": "FeatureCollection",
        "name": "east_yard",
        "features": [{"type": "Feature", "properties": p, "geometry": g} for p, g in features],
    }
    (HERE / "east_yard.geojson").write_text(json.dumps(geojson, indent=1), encoding="utf-8")
    start = datetime(2026, 8, 21, 15, 10, tzinfo=UTC)
    rows = []
    t = start
    k = 0
    to_proj = Transformer.from_crs("EPSG:4326", YARD_CRS, always_xy=True)
    for j, y in enumerate(np.arange(4.0, 80.0, 8.0)):
        xs = np.arange(4.0, 120.0, 8.0)
        for x in xs if j % 2 == 0 else xs[::-1]:
            if 20 <= x <= 30 and 55 <= y <= 65:
                continue
            t += timedelta(seconds=int(rng.integers(20, 35)))
            true = yard_background(x, y) + float(field_z(YARD_SOURCES, x, y, YARD_METER_HEIGHT_M))
            true *= 1 + 0.002 * (t - start).total_seconds() / 60  # storm strengthening, 0.2 %/min
            value = true + rng.normal(0, 30.0)
            gx, gy = x + rng.normal(0, 1.0), y + rng.normal(0, 1.0)  # GPS scatter, 1 m
            gx, gy = min(max(gx, 0.3), 119.7), min(max(gy, 0.3), 79.7)
            lon, lat = to_ll.transform(YARD_ORIGIN_E + gx, YARD_ORIGIN_N + gy)
            assert abs(to_proj.transform(lon, lat)[0] - YARD_ORIGIN_E - gx) < 1e-3
            # the yard meter reports the atmospheric potential gradient: fair weather positive
            rows.append({
                "time": t.isoformat().replace("+00:00", "Z"),
                "lon": f"{lon:.7f}",
                "lat": f"{lat:.7f}",
                "value": f"{-value:.0f}",
                "unit": "V/m",
                "height_m": f"{YARD_METER_HEIGHT_M:.1f}",
            })
            k += 1
    _write_csv(HERE / "east_yard_readings.csv", rows)


def _write_csv(path: Path, rows: list[dict]) -> None:
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(rows[0]), lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)


if __name__ == "__main__":
    generator = np.random.default_rng(SEED)
    make_hall(generator)
    make_yard(generator)
    make_hall(generator, HALL_SOURCES_AFTER, "north_hall_after", datetime(2026, 11, 24, 7, 30, tzinfo=UTC))
    make_hall(generator, HALL_SOURCES_THIRD, "north_hall_third", datetime(2026, 12, 1, 7, 30, tzinfo=UTC))
    print("wrote", ", ".join(sorted(p.name for p in HERE.iterdir() if p.suffix in (".toml", ".csv", ".geojson"))))
