"""`gravicat export`: hand a stored metric (or a metric file) to other programs through exporter plugins.

The export context the code exporters receive is documented in catalog/export/codegen.py.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from gravicat.cli._base import AppContext, app_context, reports_errors
from gravicat.errors import CatalogError, InputError, NotFound

app = typer.Typer()


def _description(exporter) -> str:
    text = type(exporter).__doc__ or getattr(sys.modules.get(type(exporter).__module__), "__doc__", None) or ""
    lines = text.strip().splitlines()
    return lines[0].rstrip(".") if lines else ""


def _catalogue_checks(app_ctx: AppContext, doc) -> tuple[str, list[dict]] | None:
    """(revision hash, stored checks) of the catalogue revision with the same content, if there is one.

    A file identical to a stored revision (same canonical hash) is that revision, so its stored
    results apply. Nothing is created: a SQLite catalogue that does not exist yet is not opened.
    """
    from gravicat.cli.checks import catalogue_exists

    if not catalogue_exists(app_ctx):
        return None
    from gravicat.store import revisions as store

    try:
        with app_ctx.transaction() as session:
            found = store.results_of_content(session, doc.hash)
            if found is None:
                return None
            return doc.hash, [store.record_to_json(r) for r in found]
    except CatalogError:
        return None


@app.command("export")
@reports_errors
def export(
    ctx: typer.Context,
    subject: Annotated[str | None, typer.Argument(metavar="ID_OR_FILE", help="Entry id or metric file.",
                                                  show_default=False)] = None,
    to: Annotated[str, typer.Option("--to", help="Export target (see --list).")] = "json",
    chart: Annotated[str | None, typer.Option("--chart", help="Chart to export (code targets; default: the "
                                                              "first).")] = None,
    params: Annotated[str | None, typer.Option("--params", help="Fix parameter values, e.g. M=1,a=0.9, or "
                                                                "'symbolic' (default: runtime parameters).")] = None,
    output: Annotated[Path | None, typer.Option("--output", "-o", help="Write here instead of stdout.")] = None,
    revision: Annotated[str | None, typer.Option("--revision", help="Revision hash prefix or number.")] = None,
    allow_unverified: Annotated[bool, typer.Option("--allow-unverified", help="Export a revision whose checks "
                                                   "failed or were never run (the header says so).")] = False,
    christoffel: Annotated[bool, typer.Option("--christoffel", help="latex: also the nonzero Christoffel "
                                                                    "symbols.")] = False,
    budget: Annotated[float, typer.Option("--budget", min=0.1, help="latex --christoffel: seconds for the "
                                                                   "symbolic computation.")] = 60.0,
    list_targets: Annotated[bool, typer.Option("--list", help="List export targets and exit.")] = False,
) -> None:
    """Export an entry or a metric file (default target: the canonical JSON form with its stored checks)."""
    from gravicat.registry import exporters

    app_ctx = app_context(ctx)
    targets = exporters(app_ctx.plugins)
    if list_targets:
        for name, exp in sorted(targets.items()):
            typer.echo(f"{name}\t{exp.version}\t{exp.suffix}\t{_description(exp)}")
        return
    if subject is None:
        raise InputError("ID_OR_FILE", None, "give the entry id or metric file to export (or --list)")
    if to not in targets:
        raise NotFound(f"--to: no export target '{to}' (available: {', '.join(sorted(targets)) or 'none'})")
    path = Path(subject)
    if path.exists() or path.suffix.lower() in (".toml", ".json"):
        from gravicat.format.metricfile import load_file

        if revision is not None:
            raise InputError("--revision", None, "applies to catalogue entries, not to a file")
        doc = load_file(path, app_ctx.plugins)
        found = _catalogue_checks(app_ctx, doc)
        context = {"revision": doc.hash, "checks": found[1] if found else [],
                   "source": f"{path}" + (" (identical to the catalogue revision)" if found else
                                          " (not in the catalogue: no stored checks)")}
    else:
        from gravicat.store import revisions as store

        with app_ctx.transaction() as session:
            rev = store.revision(session, subject, revision)
            doc = store.document_of(rev)
            context = {"revision": rev.hash, "source": f"catalogue entry {subject}, revision {rev.number}",
                       "checks": [store.record_to_json(r) for r in store.results_for(session, rev)]}
    context.update({"chart": chart, "params": params, "allow_unverified": allow_unverified,
                    "christoffel": christoffel, "budget": budget})
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
