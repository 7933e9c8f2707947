"""Fixtures: one real PostgreSQL/PostGIS server per test session, a fresh database per test."""

from __future__ import annotations

import itertools

import pytest

from tests.archive.server import start_server

psycopg = pytest.importorskip("psycopg", reason="psycopg 3 not installed (pip install 'mapper[archive]')")

_counter = itertools.count(1)


@pytest.fixture(scope="session")
def pg_server():
    """The running server (skipped, with the reason printed, when it cannot be started)."""
    server, reason = start_server()
    if server is None:
        print(f"archive tests skipped: {reason}")
        pytest.skip(reason)
    with psycopg.connect(server.url(), autocommit=True) as conn:
        conn.execute("CREATE DATABASE tpl_postgis")
    with psycopg.connect(server.url("tpl_postgis"), autocommit=True) as conn:
        conn.execute("CREATE EXTENSION postgis")
    yield server
    server.stop()


def new_database(server, template: str = "tpl_postgis") -> str:
    """A new database cloned from ``template``; returns its URL."""
    name = f"t{next(_counter)}"
    with psycopg.connect(server.url(), autocommit=True) as conn:
        conn.execute(f"CREATE DATABASE {name} TEMPLATE {template}")
    return server.url(name)


@pytest.fixture
def postgis_db(pg_server) -> str:
    """URL of a new database with PostGIS and no archive."""
    return new_database(pg_server)


@pytest.fixture
def archive_db(pg_server) -> str:
    """URL of a new database with an initialised archive."""
    from mapper.archive.connect import connect
    from mapper.archive.schema import initialise

    url = new_database(pg_server)
    with connect(url, autocommit=True) as conn:
        initialise(conn, url)
    return url


@pytest.fixture(scope="session")
def hall_files(tmp_path_factory):
    """The sample hall's three surveys, each with its field model stored (read them, never change them)."""
    from mapper.cli.main import main
    from tests.archive.helpers import HALL_SURVEYS, hall_survey

    folder = tmp_path_factory.mktemp("hall_files")
    paths = {}
    for name in HALL_SURVEYS:
        paths[name] = hall_survey(folder, name)
        assert main(["grid", str(paths[name]), "--method", "idw"]) == 0
    return paths
