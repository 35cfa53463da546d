"""A read-only catalogue can be read (issue 14 item 8): listed, shown, found, exported and checked
without write access; a command that would write ends with one line and writes nothing.

The tests run as root in CI, and root ignores permission bits: there, the read-only path is taken
because a file or folder with no write bit at all counts as read-only for everyone
(gravicat.store.db.sqlite_access), and the tests show it is taken (no -wal/-shm file appears, the
file's bytes do not change, and SQLite itself refuses a write on the connection). Where possible the
same catalogue is also read as an unprivileged user, for whom the system refuses the write.
"""

from __future__ import annotations

import gc
import hashlib
import json
import os
import pwd
import shutil
import sqlite3
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest
from typer.testing import CliRunner

from gravicat.cli import app
from gravicat.errors import DatabaseError
from gravicat.store import db

EXAMPLES = Path(__file__).resolve().parent.parent / "catalog" / "examples"
INTERIOR = EXAMPLES / "corvin9-interior.toml"
EXTERIOR = EXAMPLES / "corvin9-exterior.toml"


def run(url: str, *args: str):
    return CliRunner().invoke(app, ["--db", url, *args])


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def sidecars(path: Path) -> list[str]:
    return sorted(p.name for p in path.parent.iterdir() if p.name != path.name)


def one_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.output
    assert "Traceback" not in result.output
    return lines[0]


@pytest.fixture
def catalogue(tmp_path, monkeypatch) -> Path:
    """A catalogue with two revisions of corvin9-interior, alone in its folder, closed (no -wal)."""
    monkeypatch.delenv("GRAVICAT_MEMORY_CAP", raising=False)
    folder = tmp_path / "shared"
    folder.mkdir()
    path = folder / "catalogue.sqlite"
    url = f"sqlite:///{path}"
    assert run(url, "init", "--empty").exit_code == 0
    assert run(url, "add", str(INTERIOR)).exit_code == 0
    second = tmp_path / "interior-v2.toml"
    second.write_text(INTERIOR.read_text(encoding="utf-8").replace("(Halcyon Reach model)", "(Halcyon Reach, v2)"),
                      encoding="utf-8")
    assert run(url, "add", str(second)).exit_code == 0
    gc.collect()  # the in-process runs' connections close: SQLite checkpoints and removes its -wal
    assert sidecars(path) == []
    yield path
    folder.chmod(0o755)
    path.chmod(0o644)


def freeze_folder(path: Path) -> None:
    path.parent.chmod(0o555)


READS = [
    ("list",),
    ("list", "--json"),
    ("show", "corvin9-interior"),
    ("show", "corvin9-interior@1", "--json"),
    ("find", "Corvin"),
    ("history", "corvin9-interior"),
    ("export", "corvin9-interior", "--to", "json", "--allow-unverified"),
    ("check", "corvin9-interior", "--budget", "5"),
]


@pytest.mark.parametrize("freeze", ["folder", "file"])
def test_a_read_only_catalogue_can_be_read(catalogue, freeze):
    before = digest(catalogue)
    if freeze == "folder":
        freeze_folder(catalogue)
    else:
        catalogue.chmod(0o444)
    url = f"sqlite:///{catalogue}"
    for args in READS:
        done = run(url, *args)
        assert done.exit_code == 0, (args, done.output)
        assert "read-only" not in done.output
    assert "Halcyon Reach, v2" in run(url, "show", "corvin9-interior").stdout
    gc.collect()
    # the read-only path was taken: no WAL set-up, no lock files beside it, not a byte changed
    assert sidecars(catalogue) == []
    assert digest(catalogue) == before


WRITES = [
    ("add", str(EXTERIOR)),
    ("remove", "corvin9-interior", "--yes"),
    ("revert", "corvin9-interior", "1"),
    ("init", "--empty"),
    ("init",),
    ("verify", "corvin9-interior", "--budget", "5"),
]


@pytest.mark.parametrize("args", WRITES, ids=lambda a: " ".join(a[:2]))
def test_a_write_on_a_read_only_catalogue_is_one_line(catalogue, args):
    before = digest(catalogue)
    freeze_folder(catalogue)
    done = run(f"sqlite:///{catalogue}", *args)
    line = one_line(done)
    assert done.exit_code == 2
    assert line.startswith(f"Error: the catalogue {catalogue} is read-only: its folder {catalogue.parent} "
                           "is not writable;")
    assert "nothing was written" in line
    gc.collect()
    assert sidecars(catalogue) == [] and digest(catalogue) == before
    catalogue.parent.chmod(0o755)  # and the catalogue is intact: the one entry, at its second revision
    url = f"sqlite:///{catalogue}"
    assert [row["id"] for row in json.loads(run(url, "list", "--json").stdout)] == ["corvin9-interior"]
    assert "Halcyon Reach, v2" in run(url, "show", "corvin9-interior").stdout
    assert json.loads(run(url, "show", "corvin9-interior", "--json").stdout)["checks"] == []


def test_verify_with_every_result_stored_needs_no_write(catalogue):
    url = f"sqlite:///{catalogue}"
    assert run(url, "verify", "corvin9-interior", "--budget", "5").exit_code == 0
    gc.collect()
    before = digest(catalogue)
    freeze_folder(catalogue)
    again = run(url, "verify", "corvin9-interior", "--budget", "5")
    assert again.exit_code == 0 and "reused" in again.stdout, again.output
    gc.collect()
    assert sidecars(catalogue) == [] and digest(catalogue) == before


def test_sqlite_itself_refuses_a_write_on_the_read_only_connection(catalogue):
    """Not only gravicat's check: the connection is opened read-only (mode=ro or immutable), so
    SQLite refuses a write made on the driver connection directly."""
    freeze_folder(catalogue)
    engine = db.make_engine(f"sqlite:///{catalogue}")
    try:
        assert db.read_only_reason(engine) == (f"the catalogue {catalogue} is read-only: "
                                               f"its folder {catalogue.parent} is not writable")
        raw = engine.raw_connection()
        try:
            with pytest.raises(sqlite3.OperationalError, match="readonly database"):
                raw.driver_connection.execute("DELETE FROM tag")
            assert raw.driver_connection.execute("PRAGMA journal_mode").fetchone()[0] != "wal"
        finally:
            raw.close()
        from sqlalchemy import text

        with pytest.raises(DatabaseError, match="is read-only"), engine.begin() as conn:
            conn.execute(text("DELETE FROM tag"))
        with pytest.raises(DatabaseError, match="init needs write access"):
            db.ensure_schema(engine, may_upgrade=True, may_create=True)
    finally:
        engine.dispose()
    assert sidecars(catalogue) == []


def test_an_older_schema_in_a_read_only_folder_is_one_line(tmp_path):
    folder = tmp_path / "old"
    folder.mkdir()
    path = folder / "catalogue.sqlite"
    engine = db.make_engine(f"sqlite:///{path}")
    db.upgrade(engine, db.known_revisions()[-2])
    engine.dispose()
    folder.chmod(0o555)
    try:
        done = run(f"sqlite:///{path}", "list")
        line = one_line(done)
        assert done.exit_code == 2
        assert f"the catalogue {path} is read-only" in line and f"needs an upgrade to {db.SCHEMA_HEAD}" in line
        assert sidecars(path) == []
    finally:
        folder.chmod(0o755)


def test_the_decision(tmp_path, monkeypatch):
    path = tmp_path / "c.sqlite"
    assert db.sqlite_access(path) == ("write", None)  # not there yet: init creates it
    sqlite3.connect(path).close()
    assert db.sqlite_access(path) == ("write", None)
    path.chmod(0o444)  # no write bit at all: nobody changes it, no lock files needed
    assert db.sqlite_access(path) == ("immutable", "the file is not writable")
    (tmp_path / "c.sqlite-wal").write_bytes(b"")  # changes may wait in a write-ahead log: read with it
    assert db.sqlite_access(path) == ("ro", "the file is not writable")
    (tmp_path / "c.sqlite-wal").unlink()
    path.chmod(0o644)
    real = os.access
    monkeypatch.setattr(db.os, "access", lambda p, mode: False if Path(p) == path else real(p, mode))
    # another user's file (write bits set, but not for us): SQLite's mode=ro coordinates with its writers
    assert db.sqlite_access(path) == ("ro", "the file is not writable")
    monkeypatch.setattr(db.os, "access", real)
    tmp_path.chmod(0o555)
    try:
        assert db.sqlite_access(path) == ("immutable", f"its folder {tmp_path} is not writable")
    finally:
        tmp_path.chmod(0o755)


def _unprivileged() -> pwd.struct_passwd | None:
    if os.geteuid() != 0:
        return None
    try:
        return pwd.getpwnam("nobody")
    except KeyError:
        return None


@pytest.mark.skipif(_unprivileged() is None, reason="needs root to run a command as the user nobody")
def test_as_an_unprivileged_user_the_system_refuses_and_gravicat_reads(catalogue):
    """The real case: a catalogue owned by someone else, in their folder (0755, file 0644)."""
    user = _unprivileged()
    shared = Path(tempfile.mkdtemp(prefix="gravicat-ro-"))
    try:
        shared.chmod(0o755)
        path = shared / "catalogue.sqlite"
        shutil.copy(catalogue, path)
        path.chmod(0o644)
        before = digest(path)
        env = {"PATH": os.environ.get("PATH", ""), "HOME": str(shared), "GRAVICAT_CONFIG": str(shared / "none.toml"),
               "PYTHONDONTWRITEBYTECODE": "1"}

        def as_nobody(*args):
            return subprocess.run([sys.executable, "-m", "gravicat", "--db", f"sqlite:///{path}", *args],
                                  capture_output=True, text=True, env=env, timeout=300, cwd=shared,
                                  user=user.pw_uid, group=user.pw_gid, extra_groups=[])

        try:
            probe = as_nobody("list", "--json")
        except PermissionError as exc:  # the interpreter lives where nobody may not go (e.g. under /root)
            pytest.skip(f"the user nobody cannot run this interpreter: {exc}")
        if probe.returncode != 0 and "Permission denied" in probe.stderr and "catalogue" not in probe.stderr:
            pytest.skip(f"the user nobody cannot run this checkout: {probe.stderr.strip()[:200]}")
        assert probe.returncode == 0, probe.stderr
        assert '"corvin9-interior"' in probe.stdout
        refused = as_nobody("add", str(EXTERIOR))
        assert refused.returncode == 2
        assert refused.stderr.strip() == (f"Error: the catalogue {path} is read-only: its folder {shared} is not "
                                          "writable; this command needs write access, nothing was written")
        assert sidecars(path) == [] and digest(path) == before
    finally:
        shutil.rmtree(shared, ignore_errors=True)
