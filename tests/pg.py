"""A real PostgreSQL server for the store and cluster tests, and a fresh database per test.

Where the server comes from, in this order:

1. ``GRAVICAT_TEST_PG`` (set by ``.ci/run``, which starts a throwaway PostgreSQL 15
   cluster): a SQLAlchemy URL of a role allowed to create databases. If it is set
   and the server does not answer, the tests FAIL (CI must not skip silently).
2. Otherwise, when the PostgreSQL server binaries exist (``GRAVICAT_PG_BIN``, else
   ``/usr/lib/postgresql/<version>/bin``, else ``initdb`` on the PATH), one cluster
   is started for the whole test session the same way ``.ci/run`` does it (as an
   unprivileged user when running as root, data under a temporary folder, listening
   on 127.0.0.1 and a Unix socket in that folder, a free port) and stopped at exit.
3. Otherwise the PostgreSQL tests are skipped with a visible reason.

Each test gets its own database (``CREATE DATABASE``), dropped afterwards.
"""

from __future__ import annotations

import atexit
import os
import pwd
import shutil
import socket
import subprocess
import tempfile
import threading
import time
import uuid
from pathlib import Path

import pytest

ENV_URL = "GRAVICAT_TEST_PG"
ENV_BIN = "GRAVICAT_PG_BIN"
CLUSTER_USER = "gravicat-pg"  # created with useradd when the tests run as root and it is missing
SUPERUSER = "gravicat"

_server: dict[str, str] = {}  # "url", or "skip" / "fail" with the reason


def find_bin_dir() -> Path | None:
    """The folder holding initdb / pg_ctl, or None."""
    given = os.environ.get(ENV_BIN)
    if given:
        return Path(given) if (Path(given) / "initdb").exists() else None
    versions = sorted(Path("/usr/lib/postgresql").glob("*/bin/initdb"),
                      key=lambda p: int(p.parent.parent.name) if p.parent.parent.name.isdigit() else 0)
    if versions:
        return versions[-1].parent
    found = shutil.which("initdb")
    return Path(found).parent if found else None


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _as_user() -> list[str]:
    """Command prefix that runs the server binaries as an unprivileged user (initdb refuses root)."""
    if os.geteuid() != 0:
        return []
    try:
        pwd.getpwnam(CLUSTER_USER)
    except KeyError:
        subprocess.run(["useradd", "--system", "--no-create-home", "--shell", "/usr/sbin/nologin", CLUSTER_USER],
                       check=True, capture_output=True)
    return ["runuser", "-u", CLUSTER_USER, "--"]


class Cluster:
    """A throwaway cluster: ``start()`` returns the admin URL; ``stop()`` removes everything."""

    def __init__(self, bin_dir: Path):
        self.bin_dir = bin_dir
        self.root = Path(tempfile.mkdtemp(prefix="gravicat-pg-", dir="/tmp"))
        self.data = self.root / "data"
        self.port = free_port()
        self.prefix = _as_user()
        self.started = False

    def _run(self, *args: str) -> None:
        proc = subprocess.run([*self.prefix, *args], capture_output=True, text=True)
        if proc.returncode != 0:
            log = self.root / "server.log"
            tail = log.read_text(errors="replace")[-2000:] if log.exists() else ""
            raise RuntimeError(f"{' '.join(args[:2])} failed ({proc.returncode}): {proc.stderr.strip()} {tail}")

    def start(self) -> str:
        if self.prefix:
            shutil.chown(self.root, user=CLUSTER_USER)
        self._run(str(self.bin_dir / "initdb"), "-D", str(self.data), "-U", SUPERUSER, "--auth=trust",
                  "-E", "UTF8", "--no-locale", "--no-sync")
        # durability off: a test cluster is thrown away (common practice for test servers, no source)
        options = (f"-p {self.port} -k {self.root} -c listen_addresses=127.0.0.1 -c fsync=off "
                   "-c synchronous_commit=off -c full_page_writes=off -c max_connections=100")
        self._run(str(self.bin_dir / "pg_ctl"), "-D", str(self.data), "-l", str(self.root / "server.log"),
                  "-w", "-t", "60", "-o", options, "start")
        self.started = True
        return f"postgresql+psycopg://{SUPERUSER}@127.0.0.1:{self.port}/postgres"

    def stop(self) -> None:
        if self.started:
            subprocess.run([*self.prefix, str(self.bin_dir / "pg_ctl"), "-D", str(self.data), "-m", "immediate",
                            "-w", "stop"], capture_output=True)
            self.started = False
        shutil.rmtree(self.root, ignore_errors=True)


def _ping(url: str) -> None:
    import psycopg

    with psycopg.connect(_libpq(url), connect_timeout=10) as conn:
        conn.execute("SELECT 1")


def _libpq(url: str) -> str:
    """The psycopg connection string of a SQLAlchemy URL."""
    from sqlalchemy.engine import make_url

    u = make_url(url)
    parts = {"host": u.host or u.query.get("host"), "port": u.port, "user": u.username,
             "password": u.password, "dbname": u.database}
    return " ".join(f"{k}={v}" for k, v in parts.items() if v)


def server_url() -> str:
    """The admin URL of the test server; skips (no binaries) or fails (server broken)."""
    if "fail" in _server:
        pytest.fail(_server["fail"], pytrace=False)
    if "skip" in _server:
        pytest.skip(_server["skip"])
    if "url" in _server:
        return _server["url"]
    given = os.environ.get(ENV_URL)
    if given:
        try:
            _ping(given)
        except Exception as exc:  # CI exported a server: it must work
            _server["fail"] = f"{ENV_URL} is set but the server does not answer: {exc}"
            pytest.fail(_server["fail"], pytrace=False)
        _server["url"] = given
        return given
    bin_dir = find_bin_dir()
    if bin_dir is None:
        reason = ("PostgreSQL tests skipped: no PostgreSQL server binaries (initdb, pg_ctl) found; "
                  f"set {ENV_URL} to a server URL or {ENV_BIN} to their folder")
        _server["skip"] = reason
        pytest.skip(reason)
    cluster = Cluster(bin_dir)
    atexit.register(cluster.stop)
    try:
        url = cluster.start()
    except Exception as exc:
        cluster.stop()
        _server["fail"] = f"could not start a PostgreSQL cluster from {bin_dir}: {exc}"
        pytest.fail(_server["fail"], pytrace=False)
    _server["url"] = url
    return url


def create_database() -> str:
    """A new empty database on the test server; returns its URL."""
    import psycopg
    from sqlalchemy.engine import make_url

    admin = server_url()
    name = f"gravicat_t_{uuid.uuid4().hex[:12]}"
    with psycopg.connect(_libpq(admin), autocommit=True) as conn:
        conn.execute(f'CREATE DATABASE "{name}" STRATEGY FILE_COPY')
    return make_url(admin).set(database=name).render_as_string(hide_password=False)


def drop_database(url: str) -> None:
    import psycopg
    from sqlalchemy.engine import make_url

    name = make_url(url).database
    with psycopg.connect(_libpq(server_url()), autocommit=True) as conn:
        conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


def wait_until_blocked(engine, thread: threading.Thread) -> None:
    """Until the second writer waits for the first: on PostgreSQL a backend waiting for a lock,
    on SQLite (which serialises write transactions) a thread that has not finished."""
    deadline = time.monotonic() + 20
    if engine.dialect.name == "postgresql":
        with engine.connect() as conn:
            while time.monotonic() < deadline:
                waiting = conn.exec_driver_sql("SELECT count(*) FROM pg_stat_activity WHERE datname = "
                                               "current_database() AND wait_event_type = 'Lock'").scalar()
                if waiting:
                    return
                conn.rollback()
                time.sleep(0.02)
        raise AssertionError("the second writer never waited for the first")
    time.sleep(0.3)
    assert thread.is_alive(), "the second writer did not wait for the first"


@pytest.fixture
def pg_url():
    """A fresh, empty PostgreSQL database for one test (no schema yet)."""
    url = create_database()
    try:
        yield url
    finally:
        drop_database(url)


@pytest.fixture(params=["sqlite", "postgresql"])
def any_url(request, tmp_path):
    """The same test on a fresh SQLite file and on a fresh PostgreSQL database."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'any-catalogue.sqlite'}"
        return
    url = create_database()
    try:
        yield url
    finally:
        drop_database(url)
