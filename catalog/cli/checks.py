"""Verification commands: check (a file, nothing stored), verify (catalogue entries), invariants."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from gravicat.cli._base import AppContext, app_context, open_subject, reports_errors
from gravicat.cli._output import emit_json, emit_table, fit_last_column, terminal_width
from gravicat.errors import CheckFailed, InputError

app = typer.Typer()

JsonOpt = Annotated[bool, typer.Option("--json", help="Print JSON (documented shape, see README).")]
BudgetOpt = Annotated[float, typer.Option("--budget", min=0.1, help="CPU seconds per symbolic proof before a check "
                                                                    "is reported inconclusive.")]


def _quick_exit() -> None:
    """Skip the final garbage collections over sympy's many objects when the process ends (~0.3 s).

    ``gc.freeze()`` at exit: the interpreter's last collections then ignore every object that
    exists, which it is about to free anyway. Registered once; harmless in a longer-lived process
    (it only runs at its exit).
    """
    import atexit
    import gc

    if not getattr(_quick_exit, "done", False):
        atexit.register(gc.freeze)
        _quick_exit.done = True


def _print_reports(metric: str, reports, as_json: bool) -> str:
    from gravicat.checks import worst

    overall = worst(r.status for r in reports).value
    if as_json:
        emit_json({"metric": metric, "status": overall, "charts": [r.to_json() for r in reports]})
        return overall
    rows = []
    for rep in reports:
        for res in rep.results:
            rows.append([rep.chart, res.check, res.status.value, res.method.value, f"{res.seconds:.3f}",
                         res.detail.replace("\n", " ")])
    headers = ["chart", "check", "status", "method", "seconds", "detail"]
    # the detail fills the terminal's width; piped (or --json) it is printed whole
    emit_table(fit_last_column(rows, headers, terminal_width()), headers)
    for rep in reports:
        for res in rep.results:
            if res.counterexample:
                typer.echo(f"counterexample ({rep.chart}, {res.check}): {res.counterexample}")
    typer.echo(f"{metric}: {overall}")
    return overall


def load_subject(app_ctx: AppContext, arg: str, revision: str | None = None):
    """The document a subject (``FILE[:CHART]`` or ``ID[@REVISION][:CHART]``) names."""
    return open_subject(app_ctx, arg, revision=revision).document


def subject_charts(text: str, named: str | None, given: list[str] | None) -> list[str] | None:
    """The charts a command with a repeatable ``--chart`` works on: ``:CHART`` in the subject
    means ``--chart CHART``; both given and different is an error."""
    if named is None:
        return given or None
    if given and set(given) != {named}:
        raise InputError(text, None, f"names chart '{named}' but --chart is '{', '.join(given)}'; give one")
    return [named]


def catalogue_exists(app_ctx: AppContext) -> bool:
    """Whether the configured catalogue may hold entries, judged without creating anything: a SQLite
    catalogue whose file does not exist yet (or a URL that does not parse) is not there."""
    text = app_ctx.settings.database
    prefix = "sqlite:///"
    if text.startswith(prefix) and "?" not in text:  # the usual case, decided without importing SQLAlchemy
        name = text[len(prefix):]
        return bool(name) and name != ":memory:" and Path(name).expanduser().exists()
    from sqlalchemy.engine import make_url
    from sqlalchemy.exc import ArgumentError

    try:
        url = make_url(text)
    except ArgumentError:
        return False
    return not (url.get_backend_name() == "sqlite" and url.database and url.database != ":memory:"
                and not Path(url.database).expanduser().exists())


def catalogue_targets(app_ctx: AppContext, doc) -> dict:
    """The latest catalogue documents of the other entries ``doc``'s limits name (entry id -> document).

    Read once here, in the command's process, so that every chart (also one checked in a forked
    child) resolves a ``reduces-to`` target the way ``verify`` does: the file itself, then the
    user's catalogue, then the bundled catalogue. Nothing is read when no limit names another
    entry, and nothing is created: no catalogue (a SQLite file that does not exist, or one never
    initialised) means no catalogue entries. A catalogue that exists but cannot be read is an error,
    as in every other command, rather than a silently different verdict.
    """
    wanted = sorted({lim["reduces-to"].partition(":")[0] for lim in doc.data["limits"].values()} - {doc.id})
    if not wanted or not catalogue_exists(app_ctx):
        return {}
    from gravicat.format.metricfile import MetricDocument
    from gravicat.store import revisions as store
    from gravicat.store.db import current_revision

    if current_revision(app_ctx.engine) is None:  # a database never initialised holds no entries
        return {}
    found = {}
    with app_ctx.transaction() as session:
        for slug in wanted:
            rev = store.head(session, slug)
            if rev is not None:
                found[slug] = MetricDocument(rev.document, f"catalogue:{slug}@{rev.hash[:12]}")
    app_ctx.engine.dispose()  # no pooled connection is inherited by the charts' forked children
    return found


@app.command("check")
@reports_errors
def check(
    ctx: typer.Context,
    file: Annotated[str, typer.Argument(metavar="SUBJECT", help="Metric file (FILE[:CHART]) or catalogue entry "
                                                                "(ID[@REVISION][:CHART]).", show_default=False)],
    chart: Annotated[list[str] | None, typer.Option("--chart", help="Only this chart (repeatable).")] = None,
    only: Annotated[list[str] | None, typer.Option("--only", help="Only this check (repeatable).")] = None,
    budget: BudgetOpt = 20.0,
    jobs: Annotated[int | None, typer.Option(
        "--jobs", "-j", min=1, show_default=False,
        help="Charts checked at the same time, each in its own process with a CPU-time cap "
             "[default: the number of cores].")] = None,
    as_json: JsonOpt = False,
) -> None:
    """Verify a metric file without storing it; exit 1 if any check fails.

    With more than one chart, each chart runs in its own process (at most --jobs at a time) under a
    CPU-time cap of 10 s + budget x its number of checks; checks a chart did not finish within its
    cap are reported inconclusive.
    """
    from gravicat.engine.fork import default_jobs
    from gravicat.engine.runner import bundled_documents, check_document, make_resolver, select_verifiers
    from gravicat.registry import verifiers

    _quick_exit()
    app_ctx = app_context(ctx)
    found = open_subject(app_ctx, file)
    doc = found.document
    chart = subject_charts(file, found.chart, chart)
    for name in chart or ():
        if name not in doc.chart_names:
            raise InputError(str(file), f"charts.{name}", f"no such chart (charts: {', '.join(doc.chart_names)})")
    chosen = select_verifiers(verifiers(app_ctx.plugins), only)
    # the file itself, then the user's catalogue, then the bundled catalogue (reads only what a limit names)
    resolve = make_resolver(bundled_documents().with_catalogue(catalogue_targets(app_ctx, doc)).with_document(doc))
    reports = check_document(doc, chosen, charts=chart, resolve=resolve, budget=budget,
                             jobs=jobs or default_jobs())
    overall = _print_reports(doc.id, reports, as_json)
    if overall in ("fail", "error"):
        raise CheckFailed(f"{file}: {overall} (see the table above)") if not as_json else typer.Exit(1)


@app.command("verify")
@reports_errors
def verify(
    ctx: typer.Context,
    entries: Annotated[list[str] | None, typer.Argument(
        metavar="[ID[@REVISION][:CHART]]...", help="Entries (latest revision unless @REVISION; every chart "
                                                   "unless :CHART).", show_default=False)] = None,
    all_entries: Annotated[bool, typer.Option("--all", help="Every entry of the catalogue.")] = False,
    force: Annotated[bool, typer.Option("--force", help="Recompute even when results are stored.")] = False,
    jobs: Annotated[int, typer.Option("--jobs", "-j", min=1, help="Worker processes.")] = 1,
    cluster: Annotated[str | None, typer.Option(
        "--cluster", metavar="ADDRESS", show_default=False,
        help="Run on a Dask cluster: a scheduler (tcp://host:8786) or local:N (N local worker processes). "
             "Env: GRAVICAT_CLUSTER.")] = None,
    budget: BudgetOpt = 20.0,
    as_json: JsonOpt = False,
) -> None:
    """Verify catalogue entries and store the results against their revision.

    Results already stored for the same revision hash and verifier version are reused unless --force.
    With --cluster, each (revision, chart) is one unit of work for a Dask worker, under the same
    CPU-time cap as locally, and is stored as soon as it completes (an interrupted run resumes).
    """
    from gravicat.engine.runner import select_verifiers
    from gravicat.registry import verifiers
    from gravicat.store import revisions as store

    _quick_exit()
    app_ctx = app_context(ctx)
    if not entries and not all_entries:
        raise InputError("ID", None, "name entries to verify, or give --all")
    chosen = select_verifiers(verifiers(app_ctx.plugins), None)
    cluster = cluster or app_ctx.settings.cluster or None
    if cluster is not None:
        from gravicat.api.cluster import parse_address

        parse_address(cluster)  # a malformed address is refused before anything is read
        if jobs != 1:
            raise InputError("--jobs", None, "does not apply with --cluster (the cluster's workers run the units)")
    run = {}
    summary = verify_revisions(app_ctx, lambda session: ([_entry_subject(session, e) for e in entries] if entries
                                                         else [(r, None) for r in store.list_entries(session)]),
                               chosen, force=force, budget=budget, jobs=jobs, cluster=cluster, run=run)
    failed = [s["metric"] for s in summary if s["status"] in ("fail", "error")]
    if as_json:
        emit_json({"entries": summary, "status": "fail" if failed or run.get("failures") else "pass"}
                  | ({"cluster": run} if cluster is not None else {}))
    else:
        emit_table([[s["metric"], s["revision"][:12], s["status"],
                     "reused" if not s["computed"] else f"{s['computed']} chart(s) computed"] for s in summary],
                   ["entry", "revision", "status", "results"])
    if run.get("failures") and not as_json:
        for line in run["failures"]:
            typer.echo(f"failed: {line}", err=True)
    if failed or run.get("failures"):
        if as_json:
            raise typer.Exit(1)
        if not failed:
            raise CheckFailed(f"{len(run['failures'])} unit(s) of the cluster run failed (see above)")
        raise CheckFailed(f"{len(failed)} entr{'y' if len(failed) == 1 else 'ies'} failed: {', '.join(failed)}")


def verify_revisions(app_ctx: AppContext, pick, chosen, *, force: bool, budget: float, jobs: int,
                     cluster: str | None = None, run: dict | None = None) -> list[dict]:
    """Verify what ``pick(session)`` returns ((stored revision, chart or None) pairs) and store the
    results, as ``verify`` does; one summary row per revision (the ``verify --json`` shape).

    The units are read in one transaction, run outside any (forked children under CPU-time caps),
    and their results stored in a second one. With ``cluster`` (a Dask address), the units run on
    that cluster and each is stored in its own transaction as it completes; ``run`` (a dict) then
    receives the cluster summary (:class:`gravicat.api.cluster.ClusterRun` as JSON)."""
    from gravicat.api.verifying import units_for
    from gravicat.engine.runner import result_from_json
    from gravicat.store import revisions as store

    with app_ctx.transaction() as session:
        revs, only = {}, {}  # each revision once; the charts named with :CHART (None: every chart)
        for rev, chart in pick(session):
            revs.setdefault(rev.id, rev)
            only[rev.id] = None if chart is None or only.get(rev.id, set()) is None else {*only.get(rev.id, ()), chart}
        units, keys = units_for(session, list(revs.values()), chosen, force=force, budget=budget,
                                blocked=app_ctx.settings.disable_plugins)
        units = [u for u in units if only[u["key"]] is None or u["chart"] in only[u["key"]]]
    if units:  # results to store: refused before any work on a read-only catalogue (issue 14 item 8)
        from gravicat.store.db import refuse_if_read_only

        refuse_if_read_only(app_ctx.engine, "verify (to store its results)")
    app_ctx.engine.dispose()  # no pooled connection is inherited by the forked children
    if cluster is not None:
        outputs = []
        result = _run_on_cluster(app_ctx, cluster, units, chosen, force=force)
        if run is not None:
            run.update(result.to_json())
    else:
        outputs = _run_units(units, jobs, chosen)
    with app_ctx.transaction() as session:
        for out in outputs:
            rev = session.get(store.Revision, out["key"])
            store.save_results(session, rev, out["chart"], [result_from_json(r) for r in out["results"]])
        summary = []
        current = {(v.name, v.version) for v in chosen}
        for rid, (slug, digest) in keys.items():
            rev = session.get(store.Revision, rid)
            rows = [r for r in store.results_for(session, rev) if (r.verifier, r.verifier_version) in current]
            summary.append({"metric": slug, "revision": digest,
                            "status": store.status_by_revision(session, [rid]).get(rid, "unverified"),
                            "computed": sum(1 for u in units if u["key"] == rid),
                            "checks": [store.record_to_json(r) for r in rows]})
    return summary


def _entry_subject(session, text: str):
    """(stored revision, chart or None) of a ``verify`` subject: results are stored against a
    catalogue revision, so a file is refused (``check`` verifies a file)."""
    from gravicat.api.subjects import check_chart, find_revision, parse_subject
    from gravicat.store import revisions as store

    ref = parse_subject(text)
    if ref.is_file:
        raise InputError(text, None, "verify stores results against catalogue entries; "
                                     "use 'gravicat check FILE' for a file (or 'gravicat add' it first)")
    rev = find_revision(session, ref)
    return rev, check_chart(ref, store.document_of(rev))


def _run_units(units: list[dict], jobs: int, chosen) -> list[dict]:
    """Run the units through the library's runner (each chart in a forked child under its CPU-time
    cap, :func:`gravicat.api.verifying.run_units`); a progress bar on a terminal, quiet otherwise."""
    from gravicat.api.verifying import run_units

    if not units or not sys.stderr.isatty():
        return run_units(units, jobs, chosen)
    outputs: list[dict] = []
    with typer.progressbar(length=len(units), label="verifying", file=sys.stderr) as bar:
        for start in range(0, len(units), jobs):  # one batch of --jobs charts at a time, to show progress
            batch = units[start:start + jobs]
            outputs.extend(run_units(batch, jobs, chosen))
            bar.update(len(batch))
    return outputs


def _run_on_cluster(app_ctx: AppContext, address: str, units: list[dict], chosen, *, force: bool):
    """Run the units on a Dask cluster (:mod:`gravicat.api.cluster`), storing each unit in its own
    transaction as it completes; a progress bar (units done / total, failures) on a terminal."""
    from gravicat.api import cluster

    def store(out: dict) -> int:
        with app_ctx.transaction() as session:
            return cluster.store_output(session, out, force=force)

    versions = {v.name: v.version for v in chosen}
    if not units or not sys.stderr.isatty():
        return cluster.verify_units(address, units, versions, store=store)
    with typer.progressbar(length=len(units), label="verifying on the cluster", file=sys.stderr,
                           item_show_func=lambda run: run and f"{run.done}/{run.units}, "
                                                              f"{len(run.failures)} failure(s)") as bar:
        def progress(run) -> None:
            bar.update(1, run)

        return cluster.verify_units(address, units, versions, store=store, progress=progress)


@app.command("invariants")
@reports_errors
def invariants(
    ctx: typer.Context,
    subject: Annotated[str, typer.Argument(help="Metric file (FILE[:CHART]) or catalogue entry "
                                                "(ID[@REVISION][:CHART]).", show_default=False)],
    chart: Annotated[list[str] | None, typer.Option("--chart", help="Only this chart (repeatable).")] = None,
    budget: Annotated[float, typer.Option("--budget", min=0.1, help="CPU seconds for each chart (building it and "
                                                                    "computing both scalars); a chart not done "
                                                                    "within them ends the command (exit 1).")] = 60.0,
    as_json: JsonOpt = False,
) -> None:
    """The Ricci scalar and the Kretschmann scalar of each chart, in closed form.

    Each chart is built and computed in its own process under a CPU-time cap of --budget seconds and
    the memory cap (setting memory-cap); if any chart does not finish, nothing is printed and one line
    says which and why (exit 1).
    """
    from gravicat.engine import fork

    _quick_exit()
    app_ctx = app_context(ctx)
    found = open_subject(app_ctx, subject)
    doc = found.document
    names = subject_charts(subject, found.chart, chart) or doc.chart_names
    for name in names:
        if name not in doc.chart_names:
            raise InputError(subject, f"charts.{name}", f"no such chart (charts: {', '.join(doc.chart_names)})")
    if "engine" in app_ctx.__dict__:
        app_ctx.engine.dispose()  # no pooled connection is inherited by the forked children
    import gravicat.engine.geometry  # noqa: F401 - sympy and flint once, inherited by every child

    outs = fork.run_many([lambda emit, name=name: _invariants_of(doc, name) for name in names],
                         jobs=min(len(names), fork.default_jobs()), cpu_seconds=budget)
    for name, o in zip(names, outs, strict=True):
        if o.finished:
            continue
        if o.error is not None:
            o.reraise()  # bad input found while building the chart is its own one line; a bug keeps its traceback
        why = fork.describe_limit(o, budget, 4 * budget + 30)
        raise CheckFailed(f"{doc.id}:{name}: the invariants were not computed ({why}); nothing printed"
                          + ("; give a larger --budget" if o.limit in ("cpu", "wall") else ""))
    out = [o.value | {"chart": name} for name, o in zip(names, outs, strict=True)]
    if as_json:
        emit_json({"metric": doc.id, "charts": [{k: c[k] for k in ("chart", "ricci_scalar", "kretschmann")}
                                                for c in out]})
        return
    for c in out:
        typer.echo(f"{doc.id} / {c['chart']}:\n  Ricci scalar = {c['ricci_scalar']}\n"
                   f"  Kretschmann  = {c['kretschmann']}")


def _invariants_of(doc, name: str) -> dict:
    """The closed forms of one chart (run in a forked child of :func:`invariants`)."""
    from gravicat.engine.geometry import Geometry
    from gravicat.format.metricfile import build_chart

    geo = Geometry(build_chart(doc, name))
    return {"ricci_scalar": str(geo.to_sympy(geo.ricci_scalar)), "kretschmann": str(geo.to_sympy(geo.kretschmann))}
