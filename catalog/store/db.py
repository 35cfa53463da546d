"""Opening the database: engines, SQLite settings, schema version and upgrades.

The schema version is read with one SELECT on ``alembic_version``; Alembic is
imported only when an upgrade has to run.
"""

from __future__ import annotations

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


def make_engine(url: str) -> Engine:
    """An engine for ``url``; SQLite gets foreign keys, WAL and a busy timeout."""
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
        kwargs["connect_args"] = {"timeout": 30}
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
            cur.execute("PRAGMA journal_mode=WAL")
            cur.execute("PRAGMA busy_timeout=30000")
            cur.close()

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
    found = current_revision(engine)
    if found == SCHEMA_HEAD:
        return
    url = safe_url(engine.url.render_as_string(hide_password=False))
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
