"""The survey file's SQLite schema and its migrations.

``PRAGMA user_version`` holds the schema version. Each entry of :data:`MIGRATIONS` takes a file
from the previous version to the next; a new file runs them all, in one transaction each.
"""

from __future__ import annotations

import sqlite3

#: Application id stamped into every survey file ("MAPR" as a big-endian 32-bit integer).
APPLICATION_ID = int.from_bytes(b"MAPR", "big")

_V1 = """
CREATE TABLE meta (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE site (
    id          INTEGER PRIMARY KEY CHECK (id = 1),
    json        TEXT NOT NULL,
    source_text TEXT
);
CREATE TABLE plan_points (
    label      TEXT PRIMARY KEY,
    row        INTEGER NOT NULL,
    col        INTEGER NOT NULL,
    x_m        REAL NOT NULL,
    y_m        REAL NOT NULL,
    walk_order INTEGER NOT NULL UNIQUE
);
CREATE TABLE meters (
    id   TEXT PRIMARY KEY,
    json TEXT NOT NULL
);
CREATE TABLE readings (
    id             INTEGER PRIMARY KEY,
    action         TEXT NOT NULL CHECK (action IN ('record', 'edit', 'undo', 'exclude', 'restore')),
    replaces       INTEGER REFERENCES readings(id),
    point          TEXT REFERENCES plan_points(label),
    x_m            REAL NOT NULL,
    y_m            REAL NOT NULL,
    entered_value  REAL NOT NULL,
    entered_unit   TEXT NOT NULL,
    value_v_per_m  REAL NOT NULL,
    kind           TEXT NOT NULL CHECK (kind IN ('field', 'reference', 'zero', 'calibration')),
    time_utc       TEXT NOT NULL,
    height_m       REAL,
    meter_id       TEXT NOT NULL REFERENCES meters(id),
    note           TEXT NOT NULL DEFAULT '',
    flags          TEXT NOT NULL DEFAULT '',
    source         TEXT NOT NULL DEFAULT '',
    recorded_utc   TEXT NOT NULL
);
CREATE INDEX readings_replaces ON readings(replaces);
CREATE TABLE conditions (
    id            INTEGER PRIMARY KEY,
    time_utc      TEXT NOT NULL,
    rh_percent    REAL CHECK (rh_percent IS NULL OR (rh_percent >= 0 AND rh_percent <= 100)),
    temperature_c REAL,
    note          TEXT NOT NULL DEFAULT ''
);
CREATE TABLE events (
    id       INTEGER PRIMARY KEY,
    time_utc TEXT NOT NULL,
    kind     TEXT NOT NULL,
    detail   TEXT NOT NULL DEFAULT '{}'
);
"""

_V2 = """
CREATE TABLE field_models (
    id          INTEGER PRIMARY KEY,
    created_utc TEXT NOT NULL,
    method      TEXT NOT NULL,
    summary     TEXT NOT NULL,
    data        BLOB NOT NULL
);
"""

#: Migrations; index i takes a file from version i to version i + 1.
MIGRATIONS: tuple[str, ...] = (_V1, _V2)
SCHEMA_VERSION = len(MIGRATIONS)


def migrate(conn: sqlite3.Connection) -> int:
    """Bring a connection's database up to :data:`SCHEMA_VERSION`; returns the version found."""
    found = conn.execute("PRAGMA user_version").fetchone()[0]
    for version in range(found, SCHEMA_VERSION):
        with conn:
            conn.executescript("BEGIN;" + MIGRATIONS[version] + f"PRAGMA user_version = {version + 1};COMMIT;")
    return found
