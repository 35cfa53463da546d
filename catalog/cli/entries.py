"""Catalogue commands: init, add, list, show, remove."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from gravicat.cli._base import app_context, reports_errors
from gravicat.cli._output import emit_json, emit_table, safe_text, short
from gravicat.errors import InputError

app = typer.Typer()

JsonOpt = Annotated[bool, typer.Option("--json", help="Print JSON (documented shape, see README).")]


@app.command("init")
@reports_errors
def init(ctx: typer.Context,
         empty: Annotated[bool, typer.Option("--empty", help="Do not load the bundled catalogue.")] = False,
         no_verify: Annotated[bool, typer.Option("--no-verify", help="Load the bundled entries without verifying "
                                                                     "them (then run 'gravicat verify --all' "
                                                                     "before exporting).")] = False,
         jobs: Annotated[int | None, typer.Option(
             "--jobs", "-j", min=1, show_default=False,
             help="Charts verified at the same time [default: the number of cores].")] = None) -> None:
    """Create or upgrade the catalogue, load the bundled reference entries and verify them.

    Verification is the same as 'gravicat verify' (each chart in its own process under a CPU-time
    cap) and reuses stored results, so a second 'init' verifies nothing already verified. A progress
    bar is shown on a terminal.
    """
    from gravicat.api.catalogue import Catalogue
    from gravicat.store import revisions as store
    from gravicat.store.db import safe_url

    app_ctx = app_context(ctx)
    with Catalogue(app_ctx.settings.database, disable_plugins=app_ctx.settings.disable_plugins) as cat:
        counts = cat.init(bundled=not empty)
    total = counts["total"]
    from gravicat.store.db import missing_tables

    missing = missing_tables(app_ctx.engine)
    if missing:  # issue 14 item 12: "ready" only when every table is there
        from gravicat.errors import DatabaseError

        raise DatabaseError(f"--db {safe_url(app_ctx.settings.database)}: the catalogue lacks the table(s) "
                            f"{', '.join(missing)}; it is damaged (restore it from a copy, or start a new one)")
    typer.echo(f"catalogue ready at {safe_url(app_ctx.settings.database)}: {total} entries"
               + ("" if empty else f" (bundled: {counts['new']} new, {counts['revised']} updated, "
                                   f"{counts['unchanged']} unchanged)"))
    if empty:
        return
    if no_verify:
        typer.echo("the bundled entries are not verified yet: run 'gravicat verify --all' before exporting "
                   "(or export with --allow-unverified)")
        return
    _verify_bundled(app_ctx, [d.id for d in store.iter_all_bundled_documents()], jobs)


def _verify_bundled(app_ctx, slugs: list[str], jobs: int | None) -> None:
    """Verify the latest revision of each bundled entry, reusing stored results (as 'verify')."""
    from gravicat.cli.checks import verify_revisions
    from gravicat.engine.fork import default_jobs
    from gravicat.engine.runner import select_verifiers
    from gravicat.registry import verifiers
    from gravicat.store import revisions as store

    chosen = select_verifiers(verifiers(app_ctx.plugins), None)
    summary = verify_revisions(app_ctx, lambda session: [(store.head(session, s), None) for s in slugs],
                               chosen, force=False, budget=20.0, jobs=jobs or default_jobs())
    computed = sum(1 for s in summary if s["computed"])
    passing = sum(1 for s in summary if s["status"] == "pass")
    others = [f"{s['metric']} ({s['status']})" for s in summary if s["status"] != "pass"]
    typer.echo(f"verified the bundled entries: {passing} of {len(summary)} pass"
               + (f" ({computed} computed now, the rest already stored)" if computed < len(summary) else "")
               + (f"; not passing: {', '.join(others)} (see 'gravicat show ID')" if others else ""))


def validate_files(paths: list[Path], pm) -> list:
    """Read, validate and build every chart of every file; raises on the first bad one."""
    from gravicat.format.metricfile import build_chart, load_file

    docs = []
    for path in paths:
        doc = load_file(path, pm)
        for chart in doc.chart_names:
            build_chart(doc, chart)  # refuses a line element that is not a quadratic form
        docs.append(doc)
    return docs


@app.command("add")
@reports_errors
def add(
    ctx: typer.Context,
    files: Annotated[list[Path], typer.Argument(help="Metric files (.toml or .json).", show_default=False)],
    author: Annotated[str | None, typer.Option("--author", help="Author of the new revisions. "
                                               "Env: GRAVICAT_AUTHOR; default: login name.")] = None,
    message: Annotated[str, typer.Option("--message", "-m", help="What changed.")] = "",
) -> None:
    """Validate metric files and store them; an unchanged file is a no-op, a changed one a new revision."""
    from gravicat import __version__
    from gravicat.config import load_settings
    from gravicat.store import revisions as store

    app_ctx = app_context(ctx)
    who = load_settings(author=author).author
    docs = validate_files(files, app_ctx.plugins)
    with app_ctx.transaction() as session:
        results = [store.add_document(session, doc, author=who, message=message, tool_version=__version__)
                   for doc in docs]
    for res in results:
        typer.echo(f"{res.slug}: {res.action} (revision {res.number}, {res.hash[:12]})")


def _list_row(rev, status: str) -> dict:
    return {
        "id": rev.entry.slug,
        "title": rev.title,
        "field_equations": rev.field_equations,
        "tags": sorted(t.name for t in rev.tags),
        "charts": [c.name for c in rev.charts],
        "parameters": [p.name for p in rev.parameters],
        "revision": rev.hash,
        "status": status,
    }


@app.command("list")
@reports_errors
def list_entries(
    ctx: typer.Context,
    tag: Annotated[str | None, typer.Option("--tag", help="Only entries with this tag.")] = None,
    equations: Annotated[str | None, typer.Option("--equations", help="Only this field-equation claim.")] = None,
    param: Annotated[str | None, typer.Option("--param", help="Only entries with this parameter name.")] = None,
    search: Annotated[str | None, typer.Option("--search", help="Text in id, title or summary.")] = None,
    status: Annotated[str | None, typer.Option("--status", help="pass, fail, inconclusive or unverified.")] = None,
    as_json: JsonOpt = False,
) -> None:
    """List catalogue entries (latest revisions), filtered."""
    from gravicat.format.metricfile import FIELD_EQUATIONS
    from gravicat.store.search import Query, find_entries

    if equations is not None and equations not in FIELD_EQUATIONS:
        raise InputError("--equations", None, f"'{equations}' is not one of {', '.join(FIELD_EQUATIONS)}")

    with app_context(ctx).transaction() as session:
        page = find_entries(session, Query(tags=(tag,) if tag else (), equations=(equations,) if equations else (),
                                           params=(param,) if param else (), text=search, status=status,
                                           limit=None))
        rows = [_list_row(h.revision, h.status) for h in page.hits]
    if as_json:
        emit_json(rows)
        return
    emit_table([[r["id"], short(r["title"], 36), r["field_equations"], r["status"], ", ".join(r["charts"]),
                 short(", ".join(r["tags"]), 36)] for r in rows],
               ["id", "title", "equations", "status", "charts", "tags"])


def _pretty(text: str, coords: list[str]) -> str:
    """A readable line element: '^' for powers, no spaces around '*'."""
    return text.replace(" ** ", "^").replace(" * ", "*").replace(" / ", "/")


@app.command("show")
@reports_errors
def show(
    ctx: typer.Context,
    entry: Annotated[str, typer.Argument(metavar="ID[@REVISION][:CHART]", help="Catalogue entry (latest "
                                                                             "revision unless @REVISION).",
                                         show_default=False)],
    chart: Annotated[str | None, typer.Option("--chart", help="Only this chart.")] = None,
    revision: Annotated[str | None, typer.Option("--revision", help="Revision hash prefix or number.")] = None,
    as_json: JsonOpt = False,
) -> None:
    """Show an entry: metadata, parameters with ranges, charts and the latest check results."""
    from gravicat.api.subjects import check_chart, find_revision, parse_subject
    from gravicat.errors import InputError, NotFound
    from gravicat.store import revisions as store

    ref = parse_subject(entry, chart=chart, revision=revision)
    if ref.is_file:
        raise InputError(entry, None, "show reads catalogue entries; for a file use 'gravicat check' or "
                                      "'gravicat export --to json'")
    chart = ref.chart
    with app_context(ctx).transaction() as session:
        rev = find_revision(session, ref)
        check_chart(ref, store.document_of(rev))
        data = rev.document
        checks = [store.record_to_json(r) for r in store.results_for(session, rev)]
        prov = rev.provenance
        info = {
            "id": rev.entry.slug, "title": data["title"], "summary": data["summary"],
            "field_equations": data["field-equations"], "tags": data["tags"], "references": data["references"],
            "notes": data["notes"], "revision": rev.hash, "number": rev.number,
            "created_at": rev.created_at.isoformat(), "author": prov.author if prov else None,
            "parameters": [{"name": k, **v} for k, v in data["parameters"].items()],
            "charts": [], "limits": data["limits"], "flat_when": data["flat-when"], "checks": checks,
        }
    if chart is not None and chart not in data["charts"]:
        raise NotFound(f"{entry}: no chart '{chart}' (charts: {', '.join(data['charts'])})")
    for name, c in data["charts"].items():
        if chart is not None and name != chart:
            continue
        info["charts"].append({"name": name, "coordinates": c["coordinates"], "domain": c["domain"],
                               "define": c["define"], "line_element": c.get("line-element"),
                               "metric": c.get("metric") or _matrix_strings(data, name),
                               "functions": c["functions"]})
    if as_json:
        emit_json(info)
        return
    typer.echo(f"{info['id']}: {safe_text(info['title'])}  [{info['field_equations']}]")
    if info["summary"]:
        typer.echo(f"  {safe_text(info['summary'])}")
    typer.echo(f"  revision {info['number']} {info['revision'][:12]} by {safe_text(info['author'])} "
               f"at {info['created_at']}")
    if info["tags"]:
        typer.echo(f"  tags: {', '.join(info['tags'])}")
    if info["parameters"]:
        typer.echo("\nparameters:")
        emit_table([[p["name"], p.get("range", ""), p.get("default", ""), ", ".join(p["assume"]),
                     short(p["description"], 40)] for p in info["parameters"]],
                   ["name", "range", "default", "assume", "description"])
    for c in info["charts"]:
        typer.echo(f"\nchart {c['name']} ({', '.join(c['coordinates'])})")
        if c["domain"]:
            typer.echo(f"  domain: {'; '.join(c['domain'])}")
        for k, v in c["define"].items():
            typer.echo(f"  {k} = {_pretty(v, c['coordinates'])}")
        if c["line_element"]:
            typer.echo(f"  ds^2 = {_pretty(c['line_element'], c['coordinates'])}")
        else:
            for i, row in enumerate(c["metric"]):
                typer.echo(f"  g[{i}] = [{', '.join(_pretty(x, c['coordinates']) for x in row)}]")
    if info["references"]:
        typer.echo("\nreferences:")
        for r in info["references"]:
            typer.echo(f"  - {safe_text(r['citation'])}" + (f" doi:{safe_text(r['doi'])}" if r.get("doi") else ""))
    typer.echo("\nchecks:")
    if checks:
        emit_table([[c["chart"], c["check"], c["status"], c["method"], short(c["detail"], 60)] for c in checks],
                   ["chart", "check", "status", "method", "detail"])
    else:
        typer.echo("  not verified yet")


def _matrix_strings(data: dict, chart: str) -> list[list[str]]:
    """The full metric matrix of a line-element chart, as strings (needs sympy)."""
    from gravicat.format.metricfile import MetricDocument, build_chart

    spec = build_chart(MetricDocument(data, data["id"]), chart)
    return [[str(spec.metric[i, j]) for j in range(spec.metric.cols)] for i in range(spec.metric.rows)]


@app.command("remove")
@reports_errors
def remove(
    ctx: typer.Context,
    entry: Annotated[str, typer.Argument(metavar="ID[@REVISION][:CHART]", help="Catalogue entry (latest "
                                                                             "revision unless @REVISION).",
                                         show_default=False)],
    yes: Annotated[bool, typer.Option("--yes", "-y", help="Do not ask.")] = False,
) -> None:
    """Remove an entry with all its revisions and results."""
    import sys

    from gravicat.store import revisions as store

    if not yes:
        if not sys.stdin.isatty():
            raise InputError("--yes", None, f"refusing to remove '{entry}' without --yes (no terminal to ask)")
        if not typer.confirm(f"Remove '{entry}' and all its revisions?"):
            typer.echo("nothing removed")
            raise typer.Exit(1)
    with app_context(ctx).transaction() as session:
        count = store.remove_entry(session, entry)
    typer.echo(f"removed {entry} ({count} revision{'s' if count != 1 else ''})")
