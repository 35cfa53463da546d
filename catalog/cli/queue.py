"""Queue commands: worker (run queued verification jobs) and queue (show the jobs by state).

Jobs are recorded by ``gravicat verify --all --enqueue``; see :mod:`gravicat.api.queue`.
"""

from __future__ import annotations

from typing import Annotated

import typer

from gravicat.cli._base import app_context, reports_errors
from gravicat.cli._output import emit_json, emit_table, short

app = typer.Typer()

JsonOpt = Annotated[bool, typer.Option("--json", help="Print JSON (documented shape, see README).")]


@app.command("worker")
@reports_errors
def worker(
    ctx: typer.Context,
    jobs: Annotated[int, typer.Option("--jobs", "-j", min=1, help="Worker processes on this machine.")] = 1,
    once: Annotated[bool, typer.Option("--once", help="Stop when no job is pending or running, instead of "
                                                      "waiting for new ones.")] = False,
    lease: Annotated[float, typer.Option("--lease", min=1.0, help="Seconds a claimed job stays reserved without "
                                                                  "a heartbeat; after that another worker may "
                                                                  "take it over.")] = 120.0,
    poll: Annotated[float, typer.Option("--poll", min=0.05, help="Seconds between looks at an empty "
                                                                 "queue.")] = 2.0,
) -> None:
    """Run queued verification jobs and store their results (see 'verify --all --enqueue').

    Any machine with gravicat and the same plugins installed can run workers on a shared
    PostgreSQL catalogue: it needs only the database URL (--db or GRAVICAT_DB).
    """
    from functools import partial

    from gravicat.api import queue
    from gravicat.engine.runner import select_verifiers
    from gravicat.registry import make_plugin_manager, verifiers

    app_ctx = app_context(ctx)
    engine = app_ctx.open()
    select_verifiers(verifiers(app_ctx.plugins), None)  # no verifier at all: one clear error, before forking
    factory = partial(make_plugin_manager, blocked=tuple(app_ctx.settings.disable_plugins))
    stats = queue.run_workers(app_ctx.settings.database, jobs, factory, once=once, lease=lease, poll=poll,
                              echo=typer.echo, engine=engine)
    s = stats.to_json()
    typer.echo(f"worker finished: {s['done']} done, {s['failed'] + s['abandoned']} failed, {s['retried']} "
               f"to retry, {s['lost']} lost to another worker")


@app.command("queue")
@reports_errors
def queue_status(
    ctx: typer.Context,
    failed: Annotated[bool, typer.Option("--failed", help="Also list the failed jobs with their error.")] = False,
    retry_failed: Annotated[bool, typer.Option("--retry-failed", help="Put every failed job back in the queue "
                                                                      "with fresh attempts.")] = False,
    as_json: JsonOpt = False,
) -> None:
    """Show how many verification jobs are pending, running, done and failed."""
    from gravicat.api import queue

    app_ctx = app_context(ctx)
    with app_ctx.transaction() as session:
        retried = queue.retry_failed(session) if retry_failed else None
        info = queue.summary(session)
    if as_json:
        emit_json(info | ({"retried": retried} if retried is not None else {}))
        return
    if retried is not None:
        typer.echo(f"{retried} failed job(s) queued again")
    emit_table([[state, str(info[state])] for state in queue.STATES] + [["total", str(info["total"])]],
               ["state", "jobs"])
    if info["running_jobs"]:
        typer.echo("")
        emit_table([[j["entry"], j["chart"], f"{j['verifier']} {j['version']}", j["worker"] or "",
                     str(j["attempts"]), "expired" if j["lease_expired"] else j["lease_until"]]
                    for j in info["running_jobs"]],
                   ["entry", "chart", "verifier", "worker", "attempt", "lease until"])
    if failed and info["failed_jobs"]:
        typer.echo("")
        emit_table([[j["entry"], j["chart"], f"{j['verifier']} {j['version']}", str(j["attempts"]),
                     short(j["error"] or "", 70)] for j in info["failed_jobs"]],
                   ["entry", "chart", "verifier", "attempts", "error"])
    elif info["failed_jobs"] and not failed:
        typer.echo(f"\n{len(info['failed_jobs'])} failed job(s): see 'gravicat queue --failed'")
