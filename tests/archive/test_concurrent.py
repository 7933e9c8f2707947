"""Several coordinators pushing at once: every push lands, nothing is lost or doubled."""

from __future__ import annotations

import multiprocessing
import os

import psycopg
import pytest

from mapper.archive.schema import SCHEMA
from mapper.cli.main import main
from mapper.survey.content import read_content
from mapper.survey.store import Survey
from tests.archive.helpers import distinct_copies, small_survey


def _push_when_told(go, path, url: str) -> None:
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, 1)
    os.dup2(devnull, 2)
    go.wait(30)
    os._exit(main(["archive", "push", str(path), "--db", url]))


def push_together(paths, url: str) -> list[int]:
    """Push all ``paths`` from as many processes released at the same moment; their exit codes."""
    ctx = multiprocessing.get_context("fork")
    go = ctx.Event()
    procs = [ctx.Process(target=_push_when_told, args=(go, p, url)) for p in paths]
    for p in procs:
        p.start()
    go.set()
    for p in procs:
        p.join(120)
    return [p.exitcode for p in procs]


@pytest.fixture(scope="module")
def bases(tmp_path_factory):
    folder = tmp_path_factory.mktemp("concurrent")
    return folder, small_survey(folder, "Box", "c", repeats=3), small_survey(folder, "Bay", "c", repeats=2)


def test_eight_concurrent_pushes_of_two_sites_all_land(bases, archive_db):
    folder, box, bay = bases
    surveys = distinct_copies(box, folder, 4, "box") + distinct_copies(bay, folder, 4, "bay")
    codes = push_together(surveys, archive_db)
    assert codes == [0] * 8
    with psycopg.connect(archive_db) as conn:
        sites = conn.execute(f"SELECT name FROM {SCHEMA}.sites ORDER BY name").fetchall()
        per_survey = dict(conn.execute(
            f"SELECT v.uid, count(r.id) FROM {SCHEMA}.surveys v JOIN {SCHEMA}.readings r ON r.survey_id = v.id "
            "GROUP BY v.uid").fetchall())
        by_site = dict(conn.execute(
            f"SELECT s.name, count(*) FROM {SCHEMA}.surveys v JOIN {SCHEMA}.sites s ON s.id = v.site_id "
            "GROUP BY s.name").fetchall())
    assert sites == [("Bay",), ("Box",)]
    assert by_site == {"Box": 4, "Bay": 4}
    expected = {}
    for path in surveys:
        with Survey.open(path) as survey:
            expected[read_content(survey).uid] = survey.count_rows()
    assert len(expected) == 8
    assert per_survey == expected


def test_the_same_survey_pushed_twice_at_once_is_stored_once(bases, archive_db):
    folder, box, _ = bases
    codes = push_together([box, box, box], archive_db)
    assert codes == [0, 0, 0]
    with psycopg.connect(archive_db) as conn:
        surveys = conn.execute(f"SELECT count(*) FROM {SCHEMA}.surveys").fetchone()[0]
        readings = conn.execute(f"SELECT count(*) FROM {SCHEMA}.readings").fetchone()[0]
    with Survey.open(box) as survey:
        assert (surveys, readings) == (1, survey.count_rows())
