"""`gravicat export`: hand a stored metric (or a metric file) to other programs through exporter plugins.

Exporters receive a :class:`gravicat.checks.ExportContext`; ``-o PATH`` writes through a safely created
temporary file in PATH's directory (:func:`write_atomically`).
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from gravicat.checks import ExportContext
from gravicat.cli._base import AppContext, app_context, deprecated, merge_set_options, open_subject, reports_errors
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
    subject: Annotated[str | None, typer.Argument(metavar="SUBJECT", help="Catalogue entry (ID[@REVISION][:CHART]) "
                                                                         "or metric file (FILE[:CHART]).",
                                                  show_default=False)] = None,
    to: Annotated[str, typer.Option("--to", help="Export target (see --list).")] = "json",
    chart: Annotated[str | None, typer.Option("--chart", help="Chart to export (code targets; default: the "
                                                              "first).")] = None,
    settings: Annotated[list[str] | None, typer.Option(
        "--set", metavar="NAME=VALUE", help="Fix a parameter value in the code (repeatable, or comma-separated: "
                                            "--set M=1,a=0.9; default: runtime parameters).",
        show_default=False)] = None,
    params: Annotated[str | None, typer.Option("--params", hidden=True,
                                               help="Deprecated spelling of --set (M=1,a=0.9, or 'symbolic' "
                                                    "for the default).")] = None,
    output: Annotated[Path | None, typer.Option("--output", "-o", help="Write here instead of stdout.")] = None,
    revision: Annotated[str | None, typer.Option("--revision", help="Revision hash prefix or number.")] = None,
    allow_unverified: Annotated[bool, typer.Option("--allow-unverified", help="Export a revision whose checks "
                                                   "failed or were never run (the header says so).")] = False,
    christoffel: Annotated[bool, typer.Option("--christoffel", help="latex: also the nonzero Christoffel "
                                                                    "symbols.")] = False,
    budget: Annotated[float, typer.Option("--budget", min=0.1, help="CPU seconds for the export's symbolic "
                                                                   "work (derivatives, Christoffel symbols).")]
    = 60.0,
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
        raise InputError("SUBJECT", None, "give the entry (ID[@REVISION][:CHART]) or metric file to export (or --list)")
    if to not in targets:
        raise NotFound(f"--to: no export target '{to}' (available: {', '.join(sorted(targets)) or 'none'})")
    if params is not None and params.strip() == "symbolic":  # the default: every parameter stays a symbol
        deprecated("note: --params is deprecated and will be removed; parameters stay symbols unless --set")
        params = None
    texts = merge_set_options(settings, params, "--params")
    params = ",".join(texts) if texts else None
    found = open_subject(app_ctx, subject, chart=chart, revision=revision)
    doc, chart = found.document, found.chart
    if found.is_file:
        path = found.ref.path
        stored = _catalogue_checks(app_ctx, doc)
        revision, checks = doc.hash, (stored[1] if stored else [])
        source = f"{path}" + (" (identical to the catalogue revision)" if stored else
                              " (not in the catalogue: no stored checks)")
    else:
        revision, checks = found.revision_hash, found.checks
        source = f"catalogue entry {found.ref.entry}, revision {found.revision_number}"
    context = ExportContext(revision=revision, checks=tuple(checks), source=source, chart=chart, params=params,
                            allow_unverified=allow_unverified, christoffel=christoffel, budget=budget)
    from gravicat.engine.fork import run_bounded

    exporter = targets[to]
    # the exporter works on file content: in a child under the CPU-time cap and the memory cap
    # (the Christoffel symbols of latex get ``budget`` of their own, in a grandchild)
    text = run_bounded(lambda: exporter.export(doc, context), cpu_seconds=budget,
                       what=f"{doc.id}: export --to {to}",
                       hint="give a larger --budget, or setting memory-cap for memory (see docs/limits.md)")
    if output is None:
        typer.echo(text, nl=False)
        return
    write_atomically(output, text)
    typer.echo(f"wrote {output}", err=True)


def write_atomically(output: Path, text: str) -> None:
    """Write ``text`` to ``output`` whole or not at all.

    The text goes to a new temporary file in the target's directory, created with O_CREAT | O_EXCL under
    a random name (``tempfile.mkstemp``: an existing file or a planted symlink is never opened, let
    alone followed), then renamed over ``output`` (a symlink at ``output`` itself is replaced, not
    followed). On any failure the temporary file is removed and ``output`` is left as it was. The new
    file gets the mode of the file it replaces, else the usual mode under the umask.
    """
    import contextlib
    import os
    import stat
    import tempfile

    directory = output.parent
    try:
        mode = stat.S_IMODE(os.lstat(output).st_mode) if output.is_file() and not output.is_symlink() else None
        fd, tmp = tempfile.mkstemp(dir=directory, prefix=f".{output.name}.", suffix=".part")
    except OSError as exc:
        raise InputError(str(output), None, f"cannot write ({exc.strerror or exc})") from None
    try:
        if mode is None:
            umask = os.umask(0)
            os.umask(umask)
            mode = 0o666 & ~umask
        os.fchmod(fd, mode)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fd = -1
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, output)
    except BaseException as exc:
        if fd >= 0:
            with contextlib.suppress(OSError):
                os.close(fd)
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise InputError(str(output), None, f"cannot write ({exc.strerror or exc})") from None
        raise
