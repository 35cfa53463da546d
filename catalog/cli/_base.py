"""Shared CLI state and the single place where errors become text and exit codes."""

from __future__ import annotations

import functools
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING

import typer

from gravicat.errors import CatalogError, DatabaseError

if TYPE_CHECKING:
    import pluggy
    from sqlalchemy.engine import Engine
    from sqlalchemy.orm import Session

    from gravicat.config import Settings


@dataclass
class AppContext:
    """Reaches every command as ``ctx.obj``; nothing is opened until used, so --help stays instant."""

    settings: Settings

    @cached_property
    def engine(self) -> Engine:
        from gravicat.store.db import make_engine

        return make_engine(self.settings.database)

    def open(self, *, create: bool = False) -> Engine:
        """The engine, with the schema checked (and upgraded on SQLite, where the file is the user's own)."""
        from gravicat.store.db import ensure_schema

        engine = self.engine
        ensure_schema(engine, may_upgrade=create or engine.dialect.name == "sqlite", may_create=create)
        return engine

    @contextmanager
    def transaction(self, *, create: bool = False) -> Iterator[Session]:
        """One transaction for the whole command: everything or nothing is written."""
        from sqlalchemy.orm import Session

        engine = self.open(create=create)
        with Session(engine) as session, session.begin():
            yield session

    @cached_property
    def plugins(self) -> pluggy.PluginManager:
        from gravicat.registry import make_plugin_manager

        return make_plugin_manager(blocked=self.settings.disable_plugins)


def app_context(ctx: typer.Context) -> AppContext:
    return ctx.ensure_object(AppContext) if ctx.obj is None else ctx.obj


def reports_errors(fn):
    """Turn a CatalogError (and database failures) into one stderr line and its exit code."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except CatalogError as exc:
            typer.echo(f"Error: {exc}", err=True)
            raise typer.Exit(exc.exit_code) from None
        except Exception as exc:
            converted = _database_failure(exc)
            if converted is None:
                raise
            typer.echo(f"Error: {converted}", err=True)
            raise typer.Exit(converted.exit_code) from None

    return wrapper


def _database_failure(exc: Exception) -> DatabaseError | None:
    if not type(exc).__module__.startswith("sqlalchemy"):
        return None
    from sqlalchemy.exc import IntegrityError, OperationalError

    if isinstance(exc, IntegrityError):
        return DatabaseError(f"the database refused the change (a concurrent edit?): "
                             f"{str(exc.orig).splitlines()[0]}; nothing was written, try again")
    if isinstance(exc, OperationalError):
        return DatabaseError(f"database error: {str(exc.orig).splitlines()[0]}; nothing was written")
    return None
