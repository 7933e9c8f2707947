"""The export's all-at-once builders give what one-at-a-time building gives, to the last bit.

References: shapely's own per-geometry :func:`shapely.affinity.affine_transform` and
:class:`shapely.geometry.Point`; pandas' :meth:`pandas.Timestamp.isoformat`; for the nearest
condition note, the definition written out (the note nearest in time giving RH or temperature,
the earlier of two equally near), one at a time or all at once.
"""

from __future__ import annotations

import csv
from dataclasses import replace
from datetime import UTC, datetime, timedelta

import numpy as np
import pandas as pd
import shapely
from shapely import affinity
from shapely.geometry import LineString, Point, Polygon

from mapper.export.crs import affine_xy, transform_all
from mapper.export.csv_out import _cell, _column
from mapper.export.layers import READING_COLUMNS, reading_table, readings_layer
from mapper.readings.model import Conditions


def test_transform_all_matches_shapely_one_at_a_time(rotated):
    ecrs = rotated["products"].crs
    assert ecrs.georeferenced
    rng = np.random.default_rng(3)
    geoms = [Point(*rng.uniform(-50, 50, 2)) for _ in range(50)]
    geoms += [LineString(rng.uniform(-50, 50, (5, 2))), Polygon([(0, 0), (3.3, 0), (3.3, 1.7), (0, 1.7)]),
              Polygon(), shapely.Point(1.0, 2.0, 3.0)]
    moved = transform_all(geoms, ecrs)
    for g, m in zip(geoms, moved, strict=True):
        expect = g if g.is_empty else affinity.affine_transform(g, ecrs.affine())
        assert m.wkb == expect.wkb
    xs, ys = affine_xy(ecrs, [g.x for g in geoms[:50]], [g.y for g in geoms[:50]])
    assert [shapely.Point(x, y).wkb for x, y in zip(xs, ys, strict=True)] == [m.wkb for m in moved[:50]]


def test_readings_layer_points_are_the_readings_moved(hall):
    products = hall["products"]
    frame = readings_layer(products).frame
    expect = [affinity.affine_transform(Point(c.reading.x, c.reading.y), products.crs.affine()).wkb
              for c in products.readings]
    assert [g.wkb for g in frame.geometry] == expect


def _nearest_by_definition(notes, moment):
    usable = [c for c in notes if c.rh_percent is not None or c.temperature_c is not None]
    if not usable:
        return None
    best = min(abs((c.time - moment).total_seconds()) for c in usable)
    return next(c for c in usable if abs((c.time - moment).total_seconds()) == best)


def test_nearest_conditions_all_at_once(hall):
    t0 = datetime(2026, 11, 17, 7, 0, tzinfo=UTC)
    notes = (
        Conditions(1, t0, 30.0, None, "a"),
        Conditions(2, t0 + timedelta(minutes=10), None, None, "no values: never chosen"),
        Conditions(3, t0 + timedelta(minutes=20), None, 21.0, "b"),
        Conditions(4, t0 + timedelta(minutes=40), 28.0, 20.0, "c"),
    )
    products = replace(hall["products"], conditions=notes)
    moments = [t0 + timedelta(minutes=m, microseconds=u) for m in (-5, 0, 5, 10, 10, 15, 30, 30, 39, 60)
               for u in (0, 1, 999_999)]
    moments.append(t0 + timedelta(minutes=30))  # exactly between b and c: the earlier one
    got = products.nearest_conditions_all(moments)
    assert got == [_nearest_by_definition(notes, m) for m in moments]
    assert got[-1].note == "b"
    assert [products.nearest_conditions(m) for m in moments] == got
    assert replace(products, conditions=()).nearest_conditions_all(moments[:2]) == [None, None]


def test_csv_time_texts_are_pandas_isoformat():
    stamps = [pd.Timestamp(datetime(2026, 11, 17, 7, 30, s % 60, us, tzinfo=UTC)) for s, us in
              ((0, 0), (5, 1), (59, 999_999), (7, 500_000))]
    values = [*stamps, None]
    column = pd.DatetimeIndex(values, dtype="datetime64[us, UTC]")
    assert _column(column) == [_cell(v) for v in values] == [*(t.isoformat() for t in stamps), ""]
    mixed = [1.5, float("nan"), None, "x", True, 3]
    assert _column(mixed) == [_cell(v) for v in mixed]


def test_csv_rows_are_the_layer_records(hall):
    products = hall["products"]
    records = reading_table(products).records()
    with open(hall["result"].csv, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert len(rows) == len(records) == len(products.readings)
    for row, rec in zip(rows, records, strict=True):
        assert [row[c] for c in READING_COLUMNS] == [str(_cell(rec[c])) for c in READING_COLUMNS]
