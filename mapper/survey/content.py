"""A survey file's whole content as rows, read out and written back verbatim.

:func:`read_content` takes every stored row of an open survey (metadata, site, plan, meters,
readings with their superseding history, condition notes, the event log, stored field models);
:func:`write_content` makes a new survey file holding exactly those rows, through the same
schema, migrations, writer lock and single transaction as :meth:`Survey.create`. The archive
(:mod:`mapper.archive`) uses the pair to push a survey and to pull it back identical.
"""

from __future__ import annotations

import hashlib
import json
import os
import sqlite3
from dataclasses import dataclass
from pathlib import Path

from mapper.atomic_file import output_path
from mapper.errors import MapperError
from mapper.survey.lock import WriterLock
from mapper.survey.schema import APPLICATION_ID, migrate
from mapper.survey.store import Survey

#: Columns of each table, in the order rows hold them (the schema's order).
COLUMNS: dict[str, tuple[str, ...]] = {
    "plan_points": ("label", "row", "col", "x_m", "y_m", "walk_order"),
    "meters": ("id", "json"),
    "readings": (
        "id", "action", "replaces", "point", "x_m", "y_m", "entered_value", "entered_unit",
        "value_v_per_m", "kind", "time_utc", "height_m", "meter_id", "note", "flags", "source",
        "recorded_utc",
    ),
    "conditions": ("id", "time_utc", "rh_percent", "temperature_c", "note"),
    "events": ("id", "time_utc", "kind", "detail"),
    "field_models": ("id", "created_utc", "method", "summary", "data"),
}
#: Tables whose rows are only ever appended (keyed by an increasing integer ``id``).
APPEND_ONLY = ("readings", "conditions", "events", "field_models")
#: Order of the tables' rows: the key each is sorted by.
ORDER_BY = {"plan_points": "walk_order", "meters": "id", "readings": "id", "conditions": "id",
            "events": "id", "field_models": "id"}


@dataclass(frozen=True)
class SurveyContent:
    """Every row of one survey file.

    Attributes
    ----------
    meta : tuple of (str, str)
        Metadata key/value pairs, in the file's order.
    site_json : str
        The stored site (site metres, WKT) as written in the file.
    site_text : str or None
        The site file as the user wrote it.
    tables : dict
        Table name -> tuple of rows, each a tuple in :data:`COLUMNS` order, sorted by
        :data:`ORDER_BY`.
    """

    meta: tuple[tuple[str, str], ...]
    site_json: str
    site_text: str | None
    tables: dict

    @property
    def meta_dict(self) -> dict[str, str]:
        """Metadata as a dict."""
        return dict(self.meta)

    @property
    def uid(self) -> str:
        """The survey's stable identity: a SHA-256 of its name, creation time, site and first event.

        These are written once, when the file is created, and never change afterwards, so a
        survey keeps its identity while it gains readings, and a pulled copy has the same one.
        """
        meta = self.meta_dict
        events = self.tables["events"]
        first = list(events[0][1:]) if events else []
        text = json.dumps([meta.get("name", ""), meta.get("created_utc", ""), self.site_json, first])
        return hashlib.sha256(text.encode("utf-8")).hexdigest()

    def digest(self) -> str:
        """SHA-256 of every row: equal digests mean equal content."""
        h = hashlib.sha256()
        h.update(json.dumps([list(self.meta), self.site_json, self.site_text]).encode("utf-8"))
        for name in COLUMNS:
            rows = [[v.hex() if isinstance(v, bytes) else v for v in row] for row in self.tables[name]]
            h.update(json.dumps([name, rows]).encode("utf-8"))
        return h.hexdigest()


def read_content(survey: Survey) -> SurveyContent:
    """All rows of an open survey (read-only is enough).

    Parameters
    ----------
    survey : Survey
        An open survey file.
    """
    conn = survey.conn
    tables = {}
    for name, cols in COLUMNS.items():
        try:
            rows = conn.execute(f"SELECT {', '.join(cols)} FROM {name} ORDER BY {ORDER_BY[name]}").fetchall()
        except sqlite3.OperationalError:  # a version-1 file has no field_models table
            rows = []
        tables[name] = tuple(tuple(bytes(v) if isinstance(v, memoryview) else v for v in r) for r in rows)
    meta = tuple((r[0], r[1]) for r in conn.execute("SELECT key, value FROM meta ORDER BY rowid"))
    site = conn.execute("SELECT json, source_text FROM site WHERE id = 1").fetchone()
    return SurveyContent(meta, site[0], site[1], tables)


def write_content(path: str | Path, content: SurveyContent) -> Path:
    """Write a new survey file holding exactly ``content``, in one transaction.

    Parameters
    ----------
    path : str or Path
        New survey file; refused if it exists. Nothing is left behind on failure.
    content : SurveyContent
        The rows to store.

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    if path.exists():
        raise MapperError("survey file already exists; choose another name", where=str(path))
    output_path(path)  # its folder must exist
    # built under a temporary name beside it and linked into place when complete, so a pull
    # that is killed never leaves a half-written survey under the name asked for
    temp = path.with_name(f".{path.name}.{os.getpid()}.partial")
    _remove(temp)
    lock = WriterLock(temp)
    lock.acquire()
    conn = Survey._connect(temp)
    try:
        conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
        conn.execute("PRAGMA journal_mode = WAL")
        migrate(conn)
        with conn:
            conn.execute("BEGIN")
            conn.executemany("INSERT INTO meta (key, value) VALUES (?, ?)", list(content.meta))
            conn.execute("INSERT INTO site (id, json, source_text) VALUES (1, ?, ?)",
                         (content.site_json, content.site_text))
            for name, cols in COLUMNS.items():
                rows = content.tables.get(name, ())
                if rows:
                    marks = ", ".join("?" * len(cols))
                    conn.executemany(f"INSERT INTO {name} ({', '.join(cols)}) VALUES ({marks})", rows)
        conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        conn.close()
        conn = None
        try:
            os.link(temp, path)  # fails, never overwrites, when the name was taken meanwhile
        except FileExistsError:
            raise MapperError("survey file already exists; choose another name", where=str(path)) from None
        except OSError:  # a file system without hard links (FAT, some network shares)
            if path.exists():
                raise MapperError("survey file already exists; choose another name", where=str(path)) from None
            os.replace(temp, path)
    finally:
        if conn is not None:
            conn.close()
        lock.release()
        _remove(temp)
    return path


def _remove(path: Path) -> None:
    for extra in ("", "-wal", "-shm", ".lock"):
        Path(f"{path}{extra}").unlink(missing_ok=True)
