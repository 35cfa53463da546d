"""Repair suggestions: gravicat repair FILE (find the slip that makes a metric fail its checks)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from gravicat.cli._base import app_context, open_subject, reports_errors
from gravicat.cli._output import emit_json, short
from gravicat.errors import CheckFailed, InputError

app = typer.Typer()

JsonOpt = Annotated[bool, typer.Option("--json", help="Print JSON (documented shape, see README).")]


def _describe_failure(cr) -> str:
    parts = []
    for r in cr.baseline:
        if r.check in cr.failing:
            cex = r.counterexample or {}
            extra = (f" ({cex.get('component')} = {cex.get('residual')} at a sample point)"
                     if cex.get("component") else "")
            parts.append(f"{r.check}{extra}")
    return "; ".join(parts)


def _check_list(results) -> str:
    return ", ".join(f"{r.check} {r.status.value}" + (" (symbolic)" if r.method.value == "symbolic" else "")
                     for r in results if r.status.value != "skipped")


def _print_text(report, write: bool) -> None:
    if report.status == "nothing-to-repair":
        states = "; ".join(f"{c.chart}: " + (", ".join(f"{r.check} {r.status.value}" for r in c.baseline
                                                        if r.status.value in ("fail", "error")) or "no failure")
                           for c in report.charts)
        typer.echo(f"{report.metric}: nothing to repair: no field-equations, signature or limits check fails "
                   f"({states})")
        return
    rank = 0
    for cr in report.charts:
        if not cr.failing:
            continue
        typer.echo(f"{report.metric} / {cr.chart}: failing: {_describe_failure(cr)}")
        what = f"{cr.candidates} single edits" + (f" and {cr.pairs} pairs" if cr.pairs else "")
        typer.echo(f"  screened {cr.screened} of {what} at {cr.points} sample points in {cr.seconds:.1f} s; "
                   f"{cr.passed_screen} passed the screen, {len(cr.suggestions)} repaired the chart")
        if cr.exhausted:
            typer.echo("  the budget ran out before every candidate was screened (raise --budget)")
        if cr.note:
            typer.echo(f"  note: {cr.note}")
        for s in cr.suggestions:
            rank += 1
            head = f"  {rank}. " if s.size == 1 else f"  {rank}. ({s.size} edits) "
            for k, e in enumerate(s.edits):
                lead = head if k == 0 else " " * len(head)
                typer.echo(f"{lead}{e.field}  [{e.kind}] {e.detail}")
                typer.echo(f"{' ' * len(head)}   was:       {e.original}")
                typer.echo(f"{' ' * len(head)}   suggested: {e.suggested}")
            typer.echo(f"{' ' * len(head)}   repaired chart: {s.status}: {short(_check_list(s.checks), 200)}")
            if s.still_failing:
                typer.echo(f"{' ' * len(head)}   still failing (failed before too): {', '.join(s.still_failing)}")
            if s.doubt:
                typer.echo(f"{' ' * len(head)}   doubtful: {s.doubt}")
    if report.status == "repairs-found":
        from gravicat.repair import HYPOTHESIS_NOTE

        typer.echo(HYPOTHESIS_NOTE)
        if not write:
            typer.echo("Nothing was written (give --write to apply a suggestion).")


def _write(app_ctx, subject: Path | str, is_file: bool, report, pick: int | None) -> list[str]:
    """Apply the chosen suggestion.

    A file is written (in place, or the canonical JSON beside it) and nothing else: the catalogue is
    never touched, even when the file's id names one of its entries (storing is ``gravicat add``).
    A catalogue entry id gets a new revision of that entry, in one transaction.
    """
    from gravicat.repair import write_suggestion

    suggestions = report.suggestions
    credible = [s for s in suggestions if not s.doubt]  # doubtful ones rank last and are applied only by --pick
    if pick is None and len(credible) > 1:
        raise InputError("--write", None, f"{len(credible)} suggestions: choose one with --pick RANK "
                                          "(nothing was written)")
    if pick is not None and not 1 <= pick <= len(suggestions):
        raise InputError("--pick", None, f"{pick} is not a suggestion rank (1 to {len(suggestions)}); "
                                         "nothing was written")
    if pick is None and not credible:
        raise InputError("--write", None, f"all {len(suggestions)} suggestions are doubtful: choose one with "
                                          "--pick RANK (nothing was written)")
    chosen = suggestions[pick - 1] if pick is not None else credible[0]
    message = "repair: " + "; ".join(f"{e.field}: {e.detail}" for e in chosen.edits)
    if is_file:
        written = write_suggestion(Path(subject), chosen)
        if written.mode == "toml-in-place":
            first = f"wrote {written.path} (the repaired expression replaced in place)"
        else:
            first = f"wrote {written.path}: {written.note}"
        return [first, f"the catalogue was not changed (to store the repaired file: gravicat add {written.path})"]
    from gravicat import __version__
    from gravicat.config import load_settings
    from gravicat.format.metricfile import MetricDocument
    from gravicat.store import revisions as store

    doc = MetricDocument(chosen.document.data, f"repair of catalogue:{report.metric}")
    with app_ctx.transaction() as session:
        stored = store.add_document(session, doc, author=load_settings().author, message=message,
                                    tool_version=__version__)
    return [f"{stored.slug}: {stored.action} (revision {stored.number}, {stored.hash[:12]}); message: {message}"]


@app.command("repair")
@reports_errors
def repair(
    ctx: typer.Context,
    file: Annotated[str, typer.Argument(metavar="SUBJECT", help="Metric file (FILE[:CHART]) or catalogue entry "
                                                                "(ID[@REVISION][:CHART]).",
                                        show_default=False)],
    chart: Annotated[list[str] | None, typer.Option("--chart", help="Only this chart (repeatable).")] = None,
    max_edits: Annotated[int, typer.Option("--max-edits", min=1, max=2, help="1: single edits; 2: also pairs "
                                           "of edits (drawn from the single edits that reduce the residual "
                                           "most, within the budget).")] = 1,
    budget: Annotated[float, typer.Option("--budget", min=0.1, help="Seconds for screening candidates; each "
                                          "symbolic proof gets at most this too (and at most 20 s).")] = 60.0,
    jobs: Annotated[int, typer.Option("--jobs", "-j", min=1, help="Worker processes.")] = 1,
    write: Annotated[bool, typer.Option("--write", help="Apply a suggestion: edit the file (or write the "
                                        "canonical JSON beside it; the catalogue is not changed, store it with "
                                        "'gravicat add'), or store a new revision of a catalogue entry given "
                                        "by id.")] = False,
    pick: Annotated[int | None, typer.Option("--pick", min=1, help="With --write: the rank of the suggestion "
                                             "to apply (needed when there are several).", show_default=False)] = None,
    as_json: JsonOpt = False,
) -> None:
    """Suggest repairs of a metric that fails its field-equation, signature or limit check.

    Edits one expression in one place (a sign, a power, a factor of 2, a factor or divisor of 3, 4 or 6,
    a symbol, sin/cos, a dropped term, a parameter squared), screens every candidate by exact evaluation
    at sample points and proves the survivors. A repair that makes the chart flat while a declared
    invariant still fails is listed as doubtful, last, and never applied without --pick. Exit 0 when
    there is nothing to repair or a repair is suggested, 1 when none is found.
    """
    from gravicat.cli.checks import subject_charts
    from gravicat.engine.runner import bundled_documents
    from gravicat.registry import verifiers
    from gravicat.repair import find_repairs

    app_ctx = app_context(ctx)
    subject = file
    found = open_subject(app_ctx, subject)
    doc, is_file = found.document, found.is_file
    target = found.ref.path if is_file else found.ref.entry
    chart = subject_charts(subject, found.chart, chart)
    for name in chart or ():
        if name not in doc.chart_names:
            raise InputError(str(subject), f"charts.{name}", f"no such chart (charts: {', '.join(doc.chart_names)})")
    if pick is not None and not write:
        raise InputError("--pick", None, "only meaningful with --write")
    report = find_repairs(doc, verifiers(app_ctx.plugins), docs=bundled_documents(), charts=chart,
                          max_edits=max_edits, budget=budget, proof_budget=min(20.0, budget), jobs=jobs)
    do_write = write and report.status == "repairs-found"
    if as_json:
        out = report.to_json()
        out["written"] = _write(app_ctx, target, is_file, report, pick) if do_write else []
        emit_json(out)
    else:
        _print_text(report, write)  # the ranks are shown before --write may ask for --pick
        for line in _write(app_ctx, target, is_file, report, pick) if do_write else []:
            typer.echo(line)
    if write and report.status != "repairs-found" and pick is not None and report.suggestions:
        n = len(report.suggestions)
        if not 1 <= pick <= n:
            raise InputError("--pick", None, f"{pick} is not a suggestion rank (1 to {n}); nothing was written")
        raise InputError("--pick", None, f"the {n} suggestion(s) are all doubtful (no repair found); "
                                         "nothing was written")
    if report.status == "no-repair-found":
        if as_json:
            raise typer.Exit(1)
        failing = sorted({c for cr in report.charts for c in cr.failing})
        doubtful = len(report.suggestions)
        extra = f"; {doubtful} doubtful suggestion(s) listed, none applied unasked" if doubtful else ""
        raise CheckFailed(f"{subject}: no repair found for {', '.join(failing)} "
                          f"({sum(cr.screened for cr in report.charts)} candidates screened{extra})")
