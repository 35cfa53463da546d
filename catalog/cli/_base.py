"""Shared CLI state and the single place where errors become text and exit codes."""

from __future__ import annotations

import functools
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING

import typer

from gravicat.errors import CatalogError, DatabaseError, InputError

if TYPE_CHECKING:
    import pluggy
    from sqlalchemy.engine import Engine
    from sqlalchemy.orm import Session

    from gravicat.config import Settings


@dataclass
class AppContext:
    """Reaches every command as ``ctx.obj``; nothing is opened until used, so --help stays instant."""

    settings: Settings

    def __post_init__(self) -> None:
        apply_memory_cap(self.settings)

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


def apply_memory_cap(settings: Settings) -> None:
    """Give the one child-process runner the ``memory-cap`` setting (unset: its default cap)."""
    from gravicat.engine.fork import DEFAULT_MEMORY_CAP_BYTES, set_memory_cap

    set_memory_cap(DEFAULT_MEMORY_CAP_BYTES if settings.memory_cap is None else settings.memory_cap)


def app_context(ctx: typer.Context) -> AppContext:
    return ctx.ensure_object(AppContext) if ctx.obj is None else ctx.obj


def open_subject(app_ctx: AppContext, text: str, *, chart: str | None = None, revision: str | None = None):
    """The one reading of a command's subject (``FILE[:CHART]`` or ``ID[@REVISION][:CHART]``, see
    :mod:`gravicat.api.subjects`): a :class:`~gravicat.api.subjects.Resolved`. Only an entry opens
    the database (one read-only transaction)."""
    from gravicat.api.subjects import parse_subject, resolve_subject

    ref = parse_subject(text, chart=chart, revision=revision)
    if ref.is_file:
        return resolve_subject(ref, plugins=app_ctx.plugins)
    with app_ctx.transaction() as session:
        return resolve_subject(ref, plugins=app_ctx.plugins, session=session)


_DEPRECATIONS: list[str] = []  # notes about old option spellings, printed when the command ends without error


def deprecated(note: str) -> None:
    """A one-line note on stderr about an old spelling, printed once when the command ends (not after an
    error, which stays the one line on stderr)."""
    _DEPRECATIONS.append(note)


def reports_errors(fn):
    """Turn a CatalogError (and database failures) into one stderr line and its exit code."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        _DEPRECATIONS.clear()
        failed = False
        try:
            return fn(*args, **kwargs)
        except CatalogError as exc:
            failed = True
            typer.echo(f"Error: {exc}", err=True)
            raise typer.Exit(exc.exit_code) from None
        except Exception as exc:
            converted = _database_failure(exc)  # lazily: the api (and SQLAlchemy) only on a failure
            if converted is None:
                raise
            failed = True
            typer.echo(f"Error: {converted}", err=True)
            raise typer.Exit(converted.exit_code) from None
        finally:  # a deprecation note only when there is no error: an error stays the one stderr line
            if not failed:
                for note in dict.fromkeys(_DEPRECATIONS):
                    typer.echo(note, err=True)
            _DEPRECATIONS.clear()

    return wrapper


def _database_failure(exc: Exception) -> DatabaseError | None:
    """A SQLAlchemy failure as its one line: the api's one conversion
    (:func:`gravicat.api.catalogue.database_failure`), imported only when something failed."""
    if not type(exc).__module__.startswith("sqlalchemy"):
        return None
    from gravicat.api.catalogue import database_failure

    return database_failure(exc)


def merge_set_options(given: list[str] | None, old: str | list[str] | None, old_name: str) -> list[str]:
    """``--set NAME=VALUE`` texts (repeatable, each may be comma-separated) merged with an older
    spelling of the same option (``--params``, ``--match``), kept as a hidden alias for one
    release: using it prints a one-line deprecation note on stderr; a name given by both with
    different values is an :class:`InputError`, the same value twice counts once."""
    from gravicat.format.assign import split_assignments

    texts = [t for t in (given or []) if t.strip()]
    old_texts = [old] if isinstance(old, str) else list(old or [])
    if not old_texts:
        return texts
    deprecated(f"note: {old_name} is deprecated and will be removed; use --set NAME=VALUE (repeatable)")
    new_values = {name: value for t in texts for name, value in split_assignments(t, "--set")}
    for text in old_texts:
        for name, value in split_assignments(text, old_name):
            if name in new_values:
                if new_values[name].replace(" ", "") != value.replace(" ", ""):
                    raise InputError("--set", name, f"is {new_values[name]} but {old_name} gives {value}; give one")
                continue
            texts.append(f"{name}={value}")
    return texts
