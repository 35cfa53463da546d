"""Opening the database: engines, SQLite settings, schema version and upgrades.

The schema version is read with one SELECT on ``alembic_version``; Alembic is
imported only when an upgrade has to run.
"""

from __future__ import annotations

import os
import stat
import weakref
from importlib.resources import files
from pathlib import Path
from typing import TYPE_CHECKING

from gravicat.errors import DatabaseError, SchemaOutdated

if TYPE_CHECKING:
    from sqlalchemy.engine import Engine

SCHEMA_HEAD = "0004"  # a test asserts this equals Alembic's head


def default_url() -> str:
    import platformdirs

    path = Path(platformdirs.user_data_dir("gravicat", appauthor=False)) / "catalogue.sqlite"
    return f"sqlite:///{path}"


def safe_url(url: str) -> str:
    """The URL with any password hidden, for messages."""
    try:
        from sqlalchemy.engine import make_url

        return make_url(url).render_as_string(hide_password=True)
    except Exception:
        return "<unparseable database URL>"


def redacted(text: str) -> str:
    """``text`` (a URL that may not parse) with anything between ``:`` and ``@`` hidden, and cut to
    200 characters: a password is never printed (issue 14 item 10)."""
    import re

    text = re.sub(r"(?<=:)[^:@/]*(?=@)", "***", text)
    text = re.sub(r"^[^:/@]*(?=@)", "***", text) if "://" not in text else text
    return text if len(text) <= 200 else text[:197] + "..."


# engines opened for reading only -> why (issue 14 item 8); see read_only_reason
_READ_ONLY: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _writable(path: Path) -> bool:
    """Whether ``path`` may be written: the system allows it (``os.access``) and its permission bits
    give someone write access. A file or folder with no write bit at all (``chmod a-w``) is treated as
    read-only even by a user the system would let write (root), so such a catalogue is never changed."""
    try:
        return os.access(path, os.W_OK) and _write_bits(path)
    except OSError:
        return False


def sqlite_access(path: Path) -> tuple[str, str | None]:
    """How to open the SQLite file ``path``: ``("write", None)``, or for reading only
    ``("ro", why)`` (SQLite's ``mode=ro``: we may not write the file but someone may, or changes wait
    in a ``-wal`` file; SQLite coordinates with writers through its shared-memory file) or
    ``("immutable", why)`` (the folder is not writable, so no ``-wal``/``-shm`` file can be made, or the
    file has no write bit at all, so nobody changes it: SQLite reads the file as it is, without lock
    files). A file that does not exist yet is ``"write"`` (``init`` creates it)."""
    if not path.exists():
        return "write", None
    folder = path.parent
    if not _writable(folder):
        if Path(f"{path}-wal").exists():  # changes may wait in the write-ahead log: read them with it
            return "ro", f"its folder {folder} is not writable"
        return "immutable", f"its folder {folder} is not writable"
    if not _writable(path):
        if not Path(f"{path}-wal").exists() and not _write_bits(path):
            return "immutable", "the file is not writable"  # nobody may change it: no lock files needed
        return "ro", "the file is not writable"
    return "write", None


def _write_bits(path: Path) -> bool:
    try:
        return bool(path.stat().st_mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))
    except OSError:
        return False


def read_only_reason(engine: Engine) -> str | None:
    """Why ``engine`` was opened for reading only (a read-only SQLite catalogue), else None."""
    return _READ_ONLY.get(engine)


def refuse_if_read_only(engine: Engine, what: str) -> None:
    """A :class:`DatabaseError` before ``what`` (e.g. ``"verify"``) starts, when the catalogue is
    read-only; nothing is written."""
    why = read_only_reason(engine)
    if why is not None:
        raise DatabaseError(f"{why}; {what} needs write access, nothing was written")


def make_engine(url: str) -> Engine:
    """An engine for ``url``; SQLite gets foreign keys, WAL and a busy timeout.

    A SQLite catalogue that is not writable (the file, or its folder: :func:`sqlite_access`) is
    opened for reading only, without WAL set-up, so listing, showing, finding, exporting and
    checking work; a command that writes then ends with one line, "the catalogue FILE is read-only:
    ..." (:func:`read_only_reason`), and nothing is written."""
    from sqlalchemy import create_engine, event
    from sqlalchemy.engine import make_url
    from sqlalchemy.exc import ArgumentError, NoSuchModuleError

    try:
        parsed = make_url(url)
        parsed.port  # noqa: B018 - a port that is not a number fails here, not later
    except (ArgumentError, ValueError, TypeError):
        raise DatabaseError(f"--db: '{redacted(url)}' is not a database URL (expected e.g. "
                            "sqlite:///path/catalogue.sqlite or postgresql+psycopg://user@host/dbname)") from None
    kwargs = {}
    read_only = None  # (SQLite URI of the file opened for reading only, why) when the catalogue is read-only
    if parsed.get_backend_name() == "sqlite":
        database = parsed.database
        if database and database != ":memory:" and not database.startswith("file:"):
            try:
                folder = Path(database).expanduser().resolve().parent
                folder_exists = folder.is_dir()
            except (OSError, ValueError) as exc:  # a name too long, a NUL in it (issue 14 item 10)
                reason = getattr(exc, "strerror", None) or type(exc).__name__
                raise DatabaseError(f"--db {safe_url(url)[:200]}: not a usable file name ({reason})") from None
            if not folder_exists:
                if url == default_url():
                    folder.mkdir(parents=True, exist_ok=True)
                else:
                    raise DatabaseError(f"--db {safe_url(url)}: folder {folder} does not exist")
            path = folder / Path(database).expanduser().name
            mode, why = sqlite_access(path)
            if mode != "write" and not parsed.query:
                uri = f"{path.as_uri()}?{'mode=ro' if mode == 'ro' else 'immutable=1'}"
                read_only = (uri, f"the catalogue {path} is read-only: {why}")
        kwargs["connect_args"] = {"timeout": 30}
        if read_only is not None:
            import sqlite3

            kwargs["creator"] = lambda: sqlite3.connect(read_only[0], uri=True, timeout=30)
    try:
        engine = create_engine(parsed, **kwargs)
    except NoSuchModuleError:
        raise DatabaseError(f"--db {safe_url(url)}: unknown database kind '{parsed.drivername}'") from None
    except ImportError as exc:
        raise DatabaseError(f"--db {safe_url(url)}: its driver is not installed ({exc.name}); "
                            "for PostgreSQL: pip install 'gravicat[postgres]'") from None
    if engine.dialect.name == "sqlite":
        @event.listens_for(engine, "connect")
        def _sqlite_pragmas(dbapi_conn, _record):  # noqa: ARG001
            cur = dbapi_conn.cursor()
            cur.execute("PRAGMA foreign_keys=ON")
            if read_only is None:  # WAL set-up writes to the file: never on a read-only catalogue
                cur.execute("PRAGMA journal_mode=WAL")
            cur.execute("PRAGMA busy_timeout=30000")
            cur.close()

        if read_only is not None:
            _READ_ONLY[engine] = read_only[1]

            @event.listens_for(engine, "handle_error")
            def _read_only_write(context):
                # SQLite refused a write (SQLITE_READONLY): the one line, instead of a driver error
                original = context.original_exception
                if ("readonly database" in str(original)
                        or getattr(original, "sqlite_errorname", "") == "SQLITE_READONLY"):
                    raise DatabaseError(f"{read_only[1]}; this command needs write access, nothing was written")

        # let SQLAlchemy, not the driver, open transactions (BEGIN IMMEDIATE serialises writers)
        @event.listens_for(engine, "connect")
        def _no_driver_tx(dbapi_conn, _record):
            dbapi_conn.isolation_level = None

        @event.listens_for(engine, "begin")
        def _begin(conn):
            conn.exec_driver_sql("BEGIN IMMEDIATE")
    return engine


def _operational(url: str, exc: Exception) -> DatabaseError:
    reason = str(getattr(exc, "orig", exc)).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return DatabaseError(f"--db {safe_url(url)}: cannot open the database ({reason})")


def current_revision(engine: Engine) -> str | None:
    """The schema revision recorded in the database, or None if it has none."""
    from sqlalchemy import inspect, text
    from sqlalchemy.exc import DBAPIError

    url = engine.url.render_as_string(hide_password=False)
    try:
        with engine.connect() as conn:
            if not inspect(conn).has_table("alembic_version"):
                if inspect(conn).get_table_names():
                    raise DatabaseError(f"--db {safe_url(url)}: holds tables that are not a gravicat catalogue; "
                                        "refusing to use it")
                return None
            return conn.execute(text("SELECT version_num FROM alembic_version")).scalar()
    except DBAPIError as exc:
        raise _operational(url, exc) from None


def upgrade(engine: Engine, target: str = "head") -> None:
    """Run the migrations up to ``target`` in one transaction (all or none)."""
    from alembic import command
    from alembic.config import Config
    from sqlalchemy.exc import DBAPIError

    cfg = Config()
    cfg.set_main_option("script_location", str(files("gravicat.migrations")))
    try:
        with engine.begin() as conn:
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, target)
    except DBAPIError as exc:
        raise _operational(engine.url.render_as_string(hide_password=False), exc) from None


def missing_tables(engine: Engine) -> list[str]:
    """Tables of this schema that the database lacks (a damaged catalogue), sorted."""
    from sqlalchemy import inspect

    from gravicat.store.models import Base

    present = set(inspect(engine).get_table_names())
    return sorted(set(Base.metadata.tables) - present)


def known_revisions() -> list[str]:
    """The schema revisions of this gravicat in chain order (the ``NNNN_`` prefix of each migration
    file; read from the package without importing Alembic)."""
    folder = files("gravicat.migrations").joinpath("versions")
    ids = [p.name.split("_", 1)[0] for p in folder.iterdir()
           if p.name.endswith(".py") and p.name[:4].isdigit() and "_" in p.name]
    return sorted(ids, key=int)


def ensure_schema(engine: Engine, *, may_upgrade: bool, may_create: bool = False) -> None:
    """Make sure the schema is at :data:`SCHEMA_HEAD`.

    A database without a schema is created only when ``may_create`` (``gravicat init``);
    an older one is upgraded when ``may_upgrade`` and refused with the exact command otherwise.
    """
    if may_create:
        refuse_if_read_only(engine, "init")
    found = current_revision(engine)
    if found == SCHEMA_HEAD:
        return
    url = safe_url(engine.url.render_as_string(hide_password=False))
    if read_only_reason(engine) is not None and found is not None and found in known_revisions():
        raise DatabaseError(f"{read_only_reason(engine)}; its schema {found} needs an upgrade to {SCHEMA_HEAD} "
                            "(write access), nothing was written")
    if found is None and not may_create:
        raise DatabaseError(f"--db {url}: no catalogue here yet; run 'gravicat --db {url} init' first")
    chain = known_revisions()
    # revisions are compared by their place in the migration chain, never as strings (issue 14 item 7)
    if found is not None and (found not in chain or chain.index(found) > chain.index(SCHEMA_HEAD)):
        shown = str(found)[:40].encode("unicode_escape").decode("ascii")
        raise SchemaOutdated(f"--db {url}: schema '{shown}' is not one this gravicat knows ({', '.join(chain)}): "
                             "this catalogue was written by another version of gravicat; use that version "
                             "or upgrade gravicat")
    if found is not None and not may_upgrade:
        raise SchemaOutdated(f"--db {url}: schema {found}, this version needs {SCHEMA_HEAD}; "
                             f"run 'gravicat --db {url} init' to upgrade it")
    upgrade(engine)
