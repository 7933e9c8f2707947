"""Push, pull, push again: the archive keeps a survey row for row, and a second push changes nothing."""

from __future__ import annotations

import sqlite3
from datetime import UTC, datetime

import psycopg
import pytest
import shapely
from pyproj import Transformer

from mapper.archive.pull import list_surveys, pull
from mapper.archive.push import push
from mapper.archive.schema import SCHEMA
from mapper.cli.main import main
from mapper.survey.store import NewReading, Survey
from tests.archive.conftest import new_database
from tests.archive.helpers import small_survey

TABLES = ("sites", "zones", "assets", "surveys", "survey_meta", "plan_points", "meters", "readings",
          "conditions", "events", "field_models", "hotspots", "sources", "zone_results", "rasters")


def dump_sqlite(path) -> dict[str, list[tuple]]:
    """Every row of every table of an SQLite file, read with the sqlite3 module (not our store)."""
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        names = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
        out = {n: conn.execute(f"SELECT * FROM {n} ORDER BY rowid").fetchall() for n in names}
        out["pragma"] = [(conn.execute("PRAGMA user_version").fetchone()[0],
                          conn.execute("PRAGMA application_id").fetchone()[0])]
        return out
    finally:
        conn.close()


def snapshot(url: str) -> dict[str, list[tuple]]:
    """Every archive row with its physical position and inserting transaction (ctid, xmin).

    An insert, update or delete anywhere changes this (PostgreSQL MVCC: an updated row gets a new
    ctid and xmin; PostgreSQL documentation, "System Columns").
    """
    with psycopg.connect(url) as conn:
        return {t: conn.execute(f"SELECT ctid::text, xmin::text FROM {SCHEMA}.{t} ORDER BY 1").fetchall()
                for t in TABLES}


@pytest.fixture(scope="module")
def hall(tmp_path_factory, pg_server, hall_files):
    """The sample hall survey, with its field model stored, pushed into a fresh archive."""
    folder = tmp_path_factory.mktemp("hall")
    path = hall_files["north_hall"]
    url = new_database(pg_server)
    assert main(["archive", "init", "--db", url]) == 0
    first = push(path, url)
    return {"path": path, "url": url, "first": first, "folder": folder}


def test_pushed_then_pulled_survey_equals_the_original_row_for_row(hall):
    assert hall["first"].status == "added"
    out = hall["folder"] / "pulled.survey"
    pull(hall["url"], hall["first"].survey_id, out)
    assert dump_sqlite(out) == dump_sqlite(hall["path"])
    assert dump_sqlite(out)["readings"]  # the comparison covered real rows


def test_pulled_survey_is_accepted_by_local_commands_and_gives_the_same_hotspots(hall, capsys):
    out = hall["folder"] / "pulled_for_commands.survey"
    assert main(["archive", "pull", str(hall["first"].survey_id), str(out), "--db", hall["url"]]) == 0
    capsys.readouterr()
    assert main(["hotspots", str(hall["path"]), "--json"]) == 0
    original = capsys.readouterr().out
    assert main(["hotspots", str(out), "--json"]) == 0
    copy = capsys.readouterr().out
    assert copy.replace(str(out), "X") == original.replace(str(hall["path"]), "X")
    assert main(["info", str(out)]) == 0
    with Survey.open(out, write=True) as survey:  # writable too: a pulled survey can be continued
        survey.add_conditions(40.0, 20.0, "after pull")


def test_second_push_changes_nothing(hall):
    before = snapshot(hall["url"])
    again = push(hall["path"], hall["url"])
    assert again.status == "unchanged" and again.survey_id == hall["first"].survey_id
    assert snapshot(hall["url"]) == before


def test_pushing_the_pulled_copy_is_the_same_survey(hall):
    out = hall["folder"] / "pulled_again.survey"
    pull(hall["url"], hall["first"].survey_id, out)
    before = snapshot(hall["url"])
    assert push(out, hall["url"]).status == "unchanged"
    assert snapshot(hall["url"]) == before
    assert [s.id for s in list_surveys(hall["url"])] == [hall["first"].survey_id]


def test_geometries_in_the_real_crs_and_site_metres_with_gist_indexes(hall):
    with psycopg.connect(hall["url"]) as conn:
        srids = conn.execute(f"SELECT DISTINCT ST_SRID(geom), ST_SRID(geom_site) FROM {SCHEMA}.readings").fetchall()
        assert srids == [(32633, 0)]
        # a reading moved into UTM by PostGIS and back to WGS 84 agrees with pyproj (PROJ), the
        # reference for EPSG:32633 -> EPSG:4326
        e, n, lon, lat = conn.execute(
            f"SELECT ST_X(geom), ST_Y(geom), ST_X(ST_Transform(geom, 4326)), ST_Y(ST_Transform(geom, 4326)) "
            f"FROM {SCHEMA}.readings ORDER BY id LIMIT 1").fetchone()
        ref_lon, ref_lat = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True).transform(e, n)
        assert lon == pytest.approx(ref_lon, abs=1e-9) and lat == pytest.approx(ref_lat, abs=1e-9)
        # the site-metre copy has the same area as the real one (similarity transform of scale
        # ~1.00028, so areas agree to scale² ~ 6e-4)
        site_area, real_area = conn.execute(
            f"SELECT sum(ST_Area(geom_site)), sum(ST_Area(geom)) FROM {SCHEMA}.hotspots").fetchone()
        assert real_area == pytest.approx(site_area, rel=1e-3)
        gist = {r[0] for r in conn.execute(
            "SELECT tablename FROM pg_indexes WHERE schemaname = %s AND indexdef LIKE %s",
            (SCHEMA, "%USING gist%"))}
        assert {"sites", "zones", "assets", "readings", "hotspots", "sources", "rasters"} <= gist
        view = conn.execute(
            f"SELECT site, hotspot_id, ST_SRID(geom), GeometryType(geom) FROM {SCHEMA}.latest_hotspots "
            "ORDER BY hotspot_id").fetchall()
    with Survey.open(hall["path"]) as survey:
        from mapper.workflow import survey_products

        expected = [h.id for h in survey_products(survey).findings.hotspots]
    assert [v[1] for v in view] == expected
    assert {(v[0], v[2], v[3]) for v in view} == {("North Hall", 4326, "MULTIPOLYGON")}


def test_survey_that_gained_readings_adds_only_the_new_rows(tmp_path, archive_db):
    path = small_survey(tmp_path, "Box", "grow")
    first = push(path, archive_db)
    before = snapshot(archive_db)
    with Survey.open(path, write=True) as survey:
        n_before = survey.count_rows()
        added = survey.add_readings([NewReading(1.0, 1.0, 123.0, "V/m", 123.0, height_m=1.0,
                                                time=datetime(2026, 11, 1, 9, 0, tzinfo=UTC))])
        survey.supersede(added[0].id, "edit", {"entered_value": 124.0, "value_v_per_m": 124.0})
        survey.add_conditions(36.0, 21.5, "later")
    second = push(path, archive_db)
    assert second.status == "updated" and second.survey_id == first.survey_id
    assert second.added["readings"] == 2 and second.added["conditions"] == 1
    after = snapshot(archive_db)
    # every row there before is still there, untouched (same ctid and xmin)
    for table in ("readings", "conditions", "events", "plan_points", "field_models", "sites", "zones"):
        assert set(before[table]) <= set(after[table]), table
    assert len(after["readings"]) == n_before + 2
    out = tmp_path / "grown_pulled.survey"
    pull(archive_db, first.survey_id, out)
    assert dump_sqlite(out) == dump_sqlite(path)


def test_local_site_has_site_metres_only(tmp_path, archive_db):
    push(small_survey(tmp_path, "Bay", "local"), archive_db)
    with psycopg.connect(archive_db) as conn:
        rows = conn.execute(f"SELECT count(*), count(geom), min(ST_SRID(geom_site)) FROM {SCHEMA}.readings").fetchone()
        outline = conn.execute(f"SELECT ST_AsText(outline_site), outline FROM {SCHEMA}.sites").fetchone()
    assert rows[0] > 0 and rows[1] == 0 and rows[2] == 0
    assert shapely.from_wkt(outline[0]).equals(shapely.box(0, 0, 14, 8)) and outline[1] is None


def test_list_filters_by_site(tmp_path, archive_db):
    push(small_survey(tmp_path, "Box", "one"), archive_db)
    push(small_survey(tmp_path, "Bay", "two"), archive_db)
    assert {s.site for s in list_surveys(archive_db)} == {"Box", "Bay"}
    assert [s.site for s in list_surveys(archive_db, " box ")] == ["Box"]
