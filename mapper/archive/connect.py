"""Connecting to the archive: psycopg loaded on demand, libpq URLs or ``PG*`` variables, no passwords shown.

The connection string is a libpq URL (``postgresql://user@host:5432/dbname``) or key/value
text (``host=... dbname=...``); an empty one means libpq's own defaults and the usual ``PG*``
environment variables (``PGHOST``, ``PGDATABASE``, ``PGUSER``, ``PGPASSFILE`` ...). Passwords
belong in ``~/.pgpass`` (or ``PGPASSFILE``); they are never printed: :func:`describe` leaves them
out of every message.
"""

from __future__ import annotations

import os
import random
import time
from collections.abc import Callable
from typing import Any, TypeVar

from mapper.errors import MapperError

T = TypeVar("T")
#: ``application_name`` the archive's connections carry (``pg_stat_activity``) unless ``PGAPPNAME`` is set.
APPLICATION_NAME = "mapper archive"
#: How often a transaction that lost a serialisation conflict is run again.
MAX_ATTEMPTS = 30


def psycopg():
    """The psycopg 3 module, or a one-line error saying how to install it."""
    try:
        import psycopg as module
    except ImportError:
        raise MapperError(
            "the archive needs psycopg 3; install mapper[archive] (pip install 'mapper[archive]')"
        ) from None
    return module


def describe(url: str | None) -> str:
    """The connection target in words, without any password (``database NAME on user@host:port``)."""
    info = _params(url)
    if info is None:
        return "database (connection string not understood)"
    host = info.get("host") or os.environ.get("PGHOST") or "local socket"
    port = info.get("port") or os.environ.get("PGPORT") or ""
    db = info.get("dbname") or os.environ.get("PGDATABASE") or ""
    user = info.get("user") or os.environ.get("PGUSER") or ""
    return f"database {db or '(default)'} on {user + '@' if user else ''}{host}{':' + port if port else ''}"


def _params(url: str | None) -> dict[str, str] | None:
    try:
        from psycopg.conninfo import conninfo_to_dict
    except ImportError:
        return {}
    try:
        return {k: str(v) for k, v in conninfo_to_dict(url or "").items() if k != "password"}
    except Exception:  # noqa: BLE001 - a malformed URL: described by the connect error instead
        return None


def _password(url: str | None) -> str | None:
    try:
        from psycopg.conninfo import conninfo_to_dict

        value = conninfo_to_dict(url or "").get("password")
    except Exception:  # noqa: BLE001
        return None
    return str(value) if value else None


def has_password(url: str | None) -> bool:
    """True when the connection string itself holds a password (better kept in ``~/.pgpass``)."""
    return _password(url) is not None


def clean_message(exc: BaseException, url: str | None = None) -> str:
    """The first line of a database error, with any password from ``url`` blanked out."""
    lines = [line.strip() for line in str(exc).splitlines() if line.strip()]
    text = lines[0] if lines else type(exc).__name__
    secret = _password(url)
    if secret:
        text = text.replace(secret, "***")
    if url and "://" in url and "@" in url:  # a URL's user:password@ part, even unparsable
        head, _, rest = url.partition("://")
        auth = rest.split("@", 1)[0]
        if ":" in auth:
            text = text.replace(auth.split(":", 1)[1], "***")
    return text.removeprefix("FATAL:  ").removeprefix("ERROR:  ")


def connect(url: str | None, *, autocommit: bool = False) -> Any:
    """Open a connection to the archive database.

    Parameters
    ----------
    url : str or None
        libpq URL or key/value string; ``None`` or ``""`` uses the ``PG*`` environment variables.
    autocommit : bool
        Autocommit mode (no implicit transaction).

    Returns
    -------
    psycopg.Connection
    """
    pg = psycopg()
    try:
        return pg.connect(url or "", autocommit=autocommit, connect_timeout=10,
                          application_name=os.environ.get("PGAPPNAME") or APPLICATION_NAME)
    except pg.Error as exc:
        raise MapperError(f"cannot connect to the archive: {clean_message(exc, url)}",
                          where=describe(url)) from None


def run_transaction(conn: Any, body: Callable[[Any], T], *, isolation: str = "SERIALIZABLE") -> T:
    """Run ``body(cursor)`` in one transaction, again from the start after a serialisation conflict.

    The transaction commits only when ``body`` returns; any error rolls all of it back. A
    conflict with a concurrent transaction (serialisation failure or deadlock) is retried with a
    short random back-off, up to :data:`MAX_ATTEMPTS` times.

    Parameters
    ----------
    conn : psycopg.Connection
        A connection in autocommit mode.
    body : callable
        Does the work with the cursor it is given.
    isolation : str
        Transaction isolation level.
    """
    pg = psycopg()
    from psycopg import errors

    for attempt in range(1, MAX_ATTEMPTS + 1):
        try:
            with conn.transaction(), conn.cursor() as cur:
                cur.execute(f"SET TRANSACTION ISOLATION LEVEL {isolation}")
                return body(cur)
        except (errors.SerializationFailure, errors.DeadlockDetected):
            if attempt == MAX_ATTEMPTS:
                raise MapperError(
                    f"the archive stayed busy: {MAX_ATTEMPTS} attempts lost to concurrent pushes; try again"
                ) from None
            time.sleep(random.uniform(0.01, 0.05) * attempt)
        except errors.InsufficientPrivilege as exc:
            raise MapperError(
                f"permission denied in the archive ({clean_message(exc)}); pushing needs the "
                "mapper_archive_writer role (docs/archive.md)"
            ) from None
        except pg.OperationalError as exc:
            raise MapperError(f"lost the connection to the archive; nothing was written "
                              f"({clean_message(exc)})") from None
    raise AssertionError("unreachable")


__all__ = ["APPLICATION_NAME", "clean_message", "connect", "describe", "has_password", "psycopg",
           "run_transaction"]
