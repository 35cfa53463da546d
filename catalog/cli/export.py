"""`gravicat export`: hand a stored metric to other programs through exporter plugins."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from gravicat.cli._base import app_context, reports_errors
from gravicat.errors import InputError, NotFound

app = typer.Typer()


@app.command("export")
@reports_errors
def export(
    ctx: typer.Context,
    entry: Annotated[str | None, typer.Argument(help="Entry id.", show_default=False)] = None,
    to: Annotated[str, typer.Option("--to", help="Export target (see --list).")] = "json",
    output: Annotated[Path | None, typer.Option("--output", "-o", help="Write here instead of stdout.")] = None,
    revision: Annotated[str | None, typer.Option("--revision", help="Revision hash prefix or number.")] = None,
    list_targets: Annotated[bool, typer.Option("--list", help="List export targets and exit.")] = False,
) -> None:
    """Export an entry (default target: the canonical JSON form with its stored check results)."""
    from gravicat import store
    from gravicat.registry import exporters

    app_ctx = app_context(ctx)
    targets = exporters(app_ctx.plugins)
    if list_targets:
        for name, exp in sorted(targets.items()):
            typer.echo(f"{name}\t{exp.version}\t{exp.suffix}")
        return
    if entry is None:
        raise InputError("ID", None, "give the entry id to export (or --list)")
    if to not in targets:
        raise NotFound(f"--to: no export target '{to}' (available: {', '.join(sorted(targets)) or 'none'})")
    with app_ctx.transaction() as session:
        rev = store.revision(session, entry, revision)
        doc = store.document_of(rev)
        context = {"revision": rev.hash, "checks": [store.record_to_json(r) for r in store.results_for(session, rev)]}
        text = targets[to].export(doc, context)
    if output is None:
        typer.echo(text, nl=False)
        return
    try:
        tmp = output.with_name(output.name + ".part")
        tmp.write_text(text, encoding="utf-8")
        tmp.replace(output)
    except OSError as exc:
        raise InputError(str(output), None, f"cannot write ({exc.strerror or exc})") from None
    typer.echo(f"wrote {output}", err=True)
