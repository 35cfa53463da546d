"""cli: the gravicat command line (the top room): wiring only.

Each command group lives in its own module; a command parses its options, calls the rooms
below and renders. Only this room turns a ``CatalogError`` into text and an exit code.

May import every room. Heavy libraries (sympy, alembic, SQLAlchemy's ORM) are imported inside
command bodies only, so ``gravicat --help`` stays fast.
"""

from __future__ import annotations

from typing import Annotated

import typer

from gravicat.cli import checks, classify, entries, export, history, image, orbits, plugins, probe, repair, site, split
from gravicat.cli._base import AppContext, reports_errors

app = typer.Typer(no_args_is_help=True, rich_markup_mode=None, pretty_exceptions_enable=False,
                  add_completion=False, help="Catalogue, verify and export spacetime metrics.")
for module in (entries, checks, classify, repair, history, export, probe, orbits, image, site, split, plugins):
    app.add_typer(module.app)


@app.callback()
@reports_errors
def root(
    ctx: typer.Context,
    database: Annotated[str | None, typer.Option(
        "--db", metavar="URL", help="Database URL (SQLAlchemy form). Env: GRAVICAT_DB.", show_default=False)] = None,
    disable_plugin: Annotated[list[str] | None, typer.Option(
        "--disable-plugin", metavar="NAME", help="Do not load this plugin (repeatable). Env: GRAVICAT_DISABLE_PLUGINS.",
        show_default=False)] = None,
) -> None:
    """Catalogue, verify and export spacetime metrics."""
    from gravicat.config import load_settings

    ctx.obj = AppContext(settings=load_settings(database=database, disable_plugins=disable_plugin))


def main() -> None:
    app(prog_name="gravicat")
