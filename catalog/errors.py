"""Errors gravicat reports to its users.

Every error a user can cause is a :class:`CatalogError`; its ``str()`` is the
whole one-line message (what went wrong, where, and what to do next), and its
``exit_code`` is what the CLI exits with. Anything else escaping a command is
a bug and keeps its traceback.

    CatalogError (exit 2: bad input or usage)
    ├── InputError          a file, field or option value is wrong (names the source and field)
    │   └── UnsafeExpression  an expression uses something outside the whitelist
    ├── NotFound            no such entry, chart, revision or export target
    ├── DatabaseError       the database cannot be opened or written (URL hidden of passwords)
    │   └── SchemaOutdated  the schema is older than this version and may not be upgraded here
    ├── Conflict            another writer stored the same entry at the same moment; nothing was written
    ├── PluginError         a plugin failed to load or broke the hook contract
    ├── ClusterError        the Dask scheduler cannot be reached, or was lost mid-run (stored results kept)
    └── CheckFailed (exit 1) a command ran fine and found a problem
"""

from __future__ import annotations


def one_line(text: str) -> str:
    """``text`` with control characters escaped, so a message from file content stays one line."""
    return "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in text)


class CatalogError(Exception):
    """Base of every user-facing error. ``str(exc)`` is the message, always one line."""

    exit_code = 2

    def __str__(self) -> str:
        return one_line(super().__str__())


class InputError(CatalogError):
    """Bad input: ``source`` (file or option), ``field`` (dotted path), ``problem``."""

    def __init__(self, source: str, field: str | None, problem: str):
        self.source, self.field, self.problem = source, field, problem
        where = f"{source}: {field}" if field else source
        super().__init__(f"{where}: {problem}")


class UnsafeExpression(InputError):
    """An expression contains a construct or a name the whitelist refuses."""


class NotFound(CatalogError):
    """The named entry, chart, revision or target does not exist."""


class DatabaseError(CatalogError):
    """The database cannot be opened, created or written."""


class SchemaOutdated(DatabaseError):
    """The database schema is older than this version needs."""


class Conflict(CatalogError):
    """A concurrent writer changed the same entry first (optimistic concurrency on the revision
    parent); this command wrote nothing and can simply be run again."""


class PluginError(CatalogError):
    """A plugin could not be loaded or broke the hook contract."""


class ClusterError(CatalogError):
    """The Dask scheduler of ``verify --cluster`` cannot be reached, or was lost mid-run. Exit 2, like a
    database that cannot be opened: the command could not do its work (it found no problem in a
    metric). Every unit stored before the failure stays stored; running the command again resumes."""

    exit_code = 2


class CheckFailed(CatalogError):
    """A command ran and found a problem (a failed check)."""

    exit_code = 1
