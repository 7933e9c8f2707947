"""A real PostgreSQL server with PostGIS for the archive tests, started from the machine's binaries.

The server runs in a fresh temporary folder on a Unix socket only (no TCP port), with trust
authentication for that socket. ``initdb`` refuses to run as root; when the tests run as root the
server runs as the ``postgres`` (or ``nobody``) user, owning its folder. Without PostgreSQL
binaries or the PostGIS extension the tests are skipped and say why.
"""

from __future__ import annotations

import glob
import os
import pwd
import shutil
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

SUPERUSER = "postgres"


def find_bindir() -> Path | None:
    """The newest ``/usr/lib/postgresql/*/bin`` with ``initdb`` and ``pg_ctl``, or one on PATH."""
    found = sorted(glob.glob("/usr/lib/postgresql/*/bin/initdb"), key=lambda p: int(p.split("/")[4]))
    if found:
        return Path(found[-1]).parent
    initdb = shutil.which("initdb")
    return Path(initdb).parent if initdb and shutil.which("pg_ctl") else None


def postgis_missing(bindir: Path) -> str | None:
    """Why PostGIS cannot be used with this server, or ``None``."""
    version = bindir.parent.name
    controls = glob.glob(f"/usr/share/postgresql/{version}/extension/postgis.control")
    if not controls:
        sharedir = subprocess.run([str(bindir / "pg_config"), "--sharedir"], capture_output=True, text=True)
        if sharedir.returncode != 0 or not Path(sharedir.stdout.strip(), "extension", "postgis.control").exists():
            return f"PostGIS extension not installed for PostgreSQL {version} (apt-get install postgresql-postgis)"
    return None


@dataclass
class Server:
    """A running server: its folder, socket folder and the OS user running it."""

    root: Path
    bindir: Path
    user: str | None

    @property
    def socket_dir(self) -> Path:
        return self.root / "socket"

    def url(self, dbname: str = "postgres", user: str = SUPERUSER) -> str:
        """A libpq URL to a database of this server over its socket."""
        return f"postgresql:///{dbname}?host={self.socket_dir}&user={user}"

    def _run(self, argv: list[str], **kw) -> subprocess.CompletedProcess:
        if self.user:
            argv = ["runuser", "-u", self.user, "--", *argv]
        return subprocess.run(argv, capture_output=True, text=True, **kw)

    def start(self, fsync: bool = False) -> None:
        data = self.root / "data"
        init = self._run([str(self.bindir / "initdb"), "-D", str(data), "-U", SUPERUSER, "--auth=trust",
                          "-E", "UTF8", "--locale=C"])
        if init.returncode != 0:
            raise RuntimeError(f"initdb failed: {init.stderr.strip()}")
        options = f"-k {self.socket_dir} -c listen_addresses='' -c max_connections=60"
        if not fsync:  # the tests kill clients, never the server: durability on disk is not tested
            options += " -c fsync=off -c synchronous_commit=off -c full_page_writes=off"
        started = self._run([str(self.bindir / "pg_ctl"), "-D", str(data), "-o", options, "-l",
                             str(self.root / "server.log"), "-w", "-t", "60", "start"])
        if started.returncode != 0:
            log = (self.root / "server.log").read_text(errors="replace")[-2000:]
            raise RuntimeError(f"pg_ctl start failed: {started.stderr.strip()} {log}")

    def stop(self) -> None:
        self._run([str(self.bindir / "pg_ctl"), "-D", str(self.root / "data"), "-m", "immediate", "-w", "stop"])
        shutil.rmtree(self.root, ignore_errors=True)


def start_server(fsync: bool = False) -> tuple[Server | None, str | None]:
    """Start a server, or say why not (``fsync`` keeps the server's durable defaults)."""
    bindir = find_bindir()
    if bindir is None:
        return None, "no PostgreSQL binaries (initdb, pg_ctl) found in /usr/lib/postgresql/*/bin or on PATH"
    reason = postgis_missing(bindir)
    if reason:
        return None, reason
    user = None
    if os.geteuid() == 0:
        for name in ("postgres", "nobody"):
            try:
                pwd.getpwnam(name)
            except KeyError:
                continue
            user = name
            break
        if user is None or shutil.which("runuser") is None:
            return None, "running as root and no postgres/nobody user with runuser to run initdb as"
    root = Path(tempfile.mkdtemp(prefix="mapper-pg-"))
    (root / "socket").mkdir()
    if user:
        entry = pwd.getpwnam(user)
        for path in (root, root / "socket"):
            os.chown(path, entry.pw_uid, entry.pw_gid)
    server = Server(root, bindir, user)
    try:
        server.start(fsync)
    except RuntimeError as exc:
        shutil.rmtree(root, ignore_errors=True)
        return None, str(exc)
    return server, None
