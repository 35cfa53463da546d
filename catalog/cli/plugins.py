"""`gravicat plugins`: what is loaded, with versions."""

from __future__ import annotations

from typing import Annotated

import typer

from gravicat.cli._base import app_context, reports_errors
from gravicat.cli._output import emit_json, emit_table

app = typer.Typer()


@app.command("plugins")
@reports_errors
def list_plugins(ctx: typer.Context,
                 as_json: Annotated[bool, typer.Option("--json", help="Print JSON.")] = False) -> None:
    """List loaded plugins, their verifiers and exporters with versions."""
    from gravicat.config import config_path
    from gravicat.registry import exporters, plugin_names, verifiers

    pm = app_context(ctx).plugins
    found_verifiers = verifiers(pm)
    found_exporters = exporters(pm)
    rows = [{"kind": "verifier", "name": n, "version": v.version, "module": type(v).__module__}
            for n, v in found_verifiers.items()]
    rows += [{"kind": "exporter", "name": n, "version": e.version, "module": type(e).__module__}
             for n, e in found_exporters.items()]
    if as_json:
        emit_json({"plugins": [{"name": n, "from": d} for n, d in plugin_names(pm)], "items": rows,
                   "config": str(config_path())})
        return
    emit_table([[r["kind"], r["name"], r["version"], r["module"]] for r in rows],
               ["kind", "name", "version", "module"])
    if not found_verifiers:
        typer.echo("No verifier loaded: is gravicat installed (pip install -e .)?", err=True)
    typer.echo(f"\nplugins: {', '.join(n for n, _ in plugin_names(pm))}")
    typer.echo(f"config file: {config_path()}")
