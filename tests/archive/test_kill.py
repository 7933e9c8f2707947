"""A push killed at random points (SIGKILL of the pushing process) leaves the whole survey or none of it."""

from __future__ import annotations

import multiprocessing
import os
import random
import time

import psycopg
import pytest

from mapper.archive.push import push
from mapper.archive.schema import SCHEMA
from mapper.cli.main import main
from mapper.survey.content import read_content
from mapper.survey.store import Survey
from tests.archive.helpers import distinct_copies, small_survey

TRIALS = 20
PER_SURVEY = ("plan_points", "readings", "conditions", "events", "field_models", "survey_meta", "meters",
              "hotspots", "zone_results", "rasters")


def counts(conn, survey_id: int) -> dict[str, int]:
    return {t: conn.execute(f"SELECT count(*) FROM {SCHEMA}.{t} WHERE survey_id = %s", (survey_id,)).fetchone()[0]
            for t in PER_SURVEY}


def _push_in_child(path, url: str, name: str) -> None:
    """The pushing process: ``mapper archive push`` as the command line runs it."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, 1)
    os.dup2(devnull, 2)
    os.environ["PGAPPNAME"] = name
    os._exit(main(["archive", "push", str(path), "--db", url]))


def trial(k: int, path, url: str, rng: random.Random, full_s: float) -> tuple[bool, int | None]:
    """Start a pushing process (forked: already imported) and SIGKILL it at a random point.

    Returns whether its transaction had begun when it was killed, and its exit code when it
    finished before the kill.
    """
    name = f"mapper-kill-{k}"
    proc = multiprocessing.get_context("fork").Process(target=_push_in_child, args=(path, url, name))
    in_transaction = False
    with psycopg.connect(url, autocommit=True) as watch:
        proc.start()
        if k % 2 == 0:  # anywhere in the run: reading the survey, products, the transaction, after
            time.sleep(rng.uniform(0.0, 1.2 * full_s))
        else:  # inside the transaction: wait for it to begin, then a random time into it
            deadline = time.monotonic() + 20
            while proc.is_alive() and time.monotonic() < deadline:
                row = watch.execute("SELECT xact_start FROM pg_stat_activity WHERE application_name = %s",
                                    (name,)).fetchone()
                if row and row[0] is not None:
                    in_transaction = True
                    break
                time.sleep(0.002)
            time.sleep(rng.uniform(0.0, 0.2))
        finished = not proc.is_alive()
        proc.kill()  # SIGKILL
        proc.join()
    return in_transaction, proc.exitcode if finished else None


@pytest.fixture(scope="module")
def prepared(tmp_path_factory, pg_server):
    from tests.archive.conftest import new_database

    folder = tmp_path_factory.mktemp("kill")
    base = small_survey(folder, "Bay", "kill", repeats=20)
    url = new_database(pg_server, "tpl_postgis")
    assert main(["archive", "init", "--db", url]) == 0
    started = time.monotonic()
    reference = push(base, url)
    full_s = time.monotonic() - started
    with psycopg.connect(url) as conn:
        expected = counts(conn, reference.survey_id)
    return {"url": url, "folder": folder, "base": base, "expected": expected, "full_s": full_s}


def test_killed_pushes_leave_whole_surveys_or_nothing(prepared):
    url, expected = prepared["url"], prepared["expected"]
    assert expected["readings"] == 20 * expected["plan_points"] and expected["hotspots"] > 0
    paths = distinct_copies(prepared["base"], prepared["folder"], TRIALS, "copy")
    surveys = []
    for path in paths:
        with Survey.open(path) as survey:
            surveys.append((path, read_content(survey).uid))
    assert len({uid for _, uid in surveys}) == TRIALS
    rng = random.Random(14)  # fixed seed: the same random kill points each run
    record = [trial(k, surveys[k][0], url, rng, prepared["full_s"]) for k in range(TRIALS)]
    outcomes = []
    with psycopg.connect(url) as conn:
        for k, (_, uid) in enumerate(surveys):
            row = conn.execute(f"SELECT id FROM {SCHEMA}.surveys WHERE uid = %s", (uid,)).fetchone()
            if row is None:
                outcomes.append("none")
            else:
                assert counts(conn, row[0]) == expected, k
                outcomes.append("whole")
        # nothing belongs to no survey: every row is in a survey that is there whole
        stray = conn.execute(
            f"SELECT count(*) FROM {SCHEMA}.readings r LEFT JOIN {SCHEMA}.surveys s ON s.id = r.survey_id "
            "WHERE s.id IS NULL").fetchone()[0]
        assert stray == 0
        total = conn.execute(f"SELECT count(*) FROM {SCHEMA}.readings").fetchone()[0]
        assert total == expected["readings"] * (1 + outcomes.count("whole"))
    killed_mid_transaction = sum(1 for k in range(TRIALS) if record[k][0] and outcomes[k] == "none")
    for k in range(TRIALS):  # a push that ran to its end before the kill landed whole
        if record[k][1] == 0:
            assert outcomes[k] == "whole"
    print(f"kill trials: {outcomes.count('whole')} whole, {outcomes.count('none')} none, "
          f"{killed_mid_transaction} killed inside the transaction")
    assert killed_mid_transaction >= 3
    # a killed push blocks nothing: the same surveys push completely afterwards
    for k in [k for k in range(TRIALS) if outcomes[k] == "none"][:3]:
        result = push(surveys[k][0], url)
        assert result.status == "added"
        with psycopg.connect(url) as conn:
            assert counts(conn, result.survey_id) == expected


def test_push_that_loses_its_connection_writes_nothing(prepared, monkeypatch, tmp_path):
    """The server ends the pushing session deep inside its transaction (pg_terminate_backend).

    The push is held at its last table: another session holds the ``rasters`` table in EXCLUSIVE
    mode, which blocks inserts (PostgreSQL documentation, "Explicit Locking", table-level lock
    modes), so by then it has written the survey, plan, readings ... in its transaction.
    """
    import threading

    from mapper.errors import MapperError

    url = prepared["url"]
    path = distinct_copies(prepared["base"], tmp_path, 1, "lost", first=TRIALS + 1)[0]
    with Survey.open(path) as survey:
        uid = read_content(survey).uid
    seen = {}
    done = threading.Event()

    def cut() -> None:
        with psycopg.connect(url, autocommit=True) as watch:
            deadline = time.monotonic() + 30
            while time.monotonic() < deadline and not done.is_set():
                row = watch.execute(
                    "SELECT pid, wait_event_type, query FROM pg_stat_activity WHERE application_name = "
                    "'mapper-lost' AND wait_event_type = 'Lock'").fetchone()
                if row:
                    seen["query"] = row[2]
                    seen["ended"] = watch.execute("SELECT pg_terminate_backend(%s)", (row[0],)).fetchone()[0]
                    return
                time.sleep(0.005)

    with psycopg.connect(url) as holder:
        holder.execute(f"LOCK TABLE {SCHEMA}.rasters IN EXCLUSIVE MODE")
        monkeypatch.setenv("PGAPPNAME", "mapper-lost")  # the push's connection, not the holder's
        watcher = threading.Thread(target=cut)
        watcher.start()
        try:
            with pytest.raises(MapperError, match="lost the connection to the archive; nothing was written"):
                push(path, url)
        finally:
            done.set()
            watcher.join()
        holder.rollback()
    assert seen.get("ended") is True and "rasters" in seen["query"]
    with psycopg.connect(url) as conn:
        assert conn.execute(f"SELECT count(*) FROM {SCHEMA}.surveys WHERE uid = %s", (uid,)).fetchone()[0] == 0
        stray = conn.execute(
            f"SELECT count(*) FROM {SCHEMA}.readings r LEFT JOIN {SCHEMA}.surveys s ON s.id = r.survey_id "
            "WHERE s.id IS NULL").fetchone()[0]
        assert stray == 0
    monkeypatch.delenv("PGAPPNAME")
    assert push(path, url).status == "added"  # and the next push goes through whole
