"""`gravicat site`: the catalogue as a static web site (see gravicat.api.site)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from gravicat.cli._base import app_context, reports_errors
from gravicat.cli._output import emit_json

app = typer.Typer()


@app.command("site")
@reports_errors
def site(
    ctx: typer.Context,
    out_dir: Annotated[Path, typer.Argument(metavar="OUT_DIR", help="Folder of the site (created if missing; "
                                                                   "an earlier site there is updated).",
                                            show_default=False)],
    database: Annotated[str | None, typer.Option(
        "--db", metavar="URL", help="Catalogue to render (default: the global --db / GRAVICAT_DB).",
        show_default=False)] = None,
    only: Annotated[list[str] | None, typer.Option(
        "--only", metavar="ID", help="Render only this entry (repeatable); the index lists the entries rendered.",
        show_default=False)] = None,
    jobs: Annotated[int | None, typer.Option("--jobs", "-j", min=1, help="Entries computed at the same time "
                                                                         "[default: the number of cores].",
                                             show_default=False)] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print what was done as JSON.")] = False,
) -> None:
    """Render the catalogue as a static site: an index with search and a page per entry (MathML, orbits,
    checks, history, downloads). Only entries that changed since the last build are rendered again."""
    from dataclasses import replace

    from gravicat.api.site import build_site, collect
    from gravicat.cli._base import AppContext
    from gravicat.engine.fork import default_jobs
    from gravicat.registry import exporters

    app_ctx = app_context(ctx)
    if database is not None:
        app_ctx = AppContext(settings=replace(app_ctx.settings, database=database))
    with app_ctx.transaction() as session:
        entries = collect(session, only)
    app_ctx.engine.dispose()  # no pooled connection is shared with the forked children
    report = build_site(entries, out_dir, exporters=exporters(app_ctx.plugins), jobs=jobs or default_jobs())
    if as_json:
        emit_json(report.to_json())
    else:
        typer.echo(report.line())
        for problem in report.problems:
            typer.echo(f"note: {problem}", err=True)
