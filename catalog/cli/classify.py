"""classify: Petrov type, symmetries, matter and energy conditions of each chart."""

from __future__ import annotations

from typing import Annotated, Any

import typer

from gravicat.cli._base import app_context, open_subject, reports_errors
from gravicat.cli._output import emit_json, emit_table, safe_text
from gravicat.errors import CheckFailed, InputError

app = typer.Typer()

CAP_SECONDS = 10.0  # CPU seconds of a chart's child besides its proofs
PROOFS = 6  # proofs per chart the cap allows for (type, its specialisations, the conditions twice...)


@app.command("classify")
@reports_errors
def classify(
    ctx: typer.Context,
    subject: Annotated[str, typer.Argument(metavar="SUBJECT", help="Metric file (FILE[:CHART]) or catalogue entry "
                                                                  "(ID[@REVISION][:CHART]).", show_default=False)],
    chart: Annotated[list[str] | None, typer.Option("--chart", metavar="NAME",
                                                    help="Only this chart (repeatable).")] = None,
    settings: Annotated[list[str] | None, typer.Option(
        "--set", metavar="NAME=VALUE", help="Parameter value (repeatable): classify the chart with it fixed.")] = None,
    budget: Annotated[float, typer.Option("--budget", min=0.1, help="CPU seconds per symbolic proof before a "
                                                                    "statement is reported as sampled.")] = 20.0,
    as_json: Annotated[bool, typer.Option("--json", help="Print JSON (shape in docs/classify.md).")] = False,
) -> None:
    """Petrov type, Killing vectors, matter and energy conditions of each chart; exit 1 if a
    statement the file declares (petrov-type, killing, killing-tensors, energy-conditions) is wrong.

    Each chart runs in its own process under a CPU-time cap (10 s + 6 x budget) and the memory cap."""
    from gravicat.cli.checks import subject_charts

    app_ctx = app_context(ctx)
    found = open_subject(app_ctx, subject)
    doc = found.document
    from gravicat.format.charts import require_spacetime

    require_spacetime(doc, "classify")
    names = subject_charts(subject, found.chart, chart) or doc.chart_names
    for name in names:
        if name not in doc.chart_names:
            raise InputError(subject, f"charts.{name}", f"no such chart (charts: {', '.join(doc.chart_names)})")
    charts, wrong = run_classification(doc, names, settings or [], budget)
    report = {"metric": doc.id, "charts": charts}
    if wrong:
        report["wrong_declarations"] = wrong
    if as_json:
        emit_json(report)
    else:
        _print(report)
    if wrong:
        if as_json:
            raise typer.Exit(1)
        raise CheckFailed(f"{subject}: {len(wrong)} declared statement(s) do not hold (see above)")


def run_classification(doc, names: list[str], settings: list[str], budget: float) -> tuple[list[dict], list[str]]:
    """Classify the charts ``names`` of ``doc``, each in a forked child (CPU-time and memory caps):
    (one JSON object per chart, the declared statements found wrong)."""
    from gravicat.engine.fork import default_jobs, run_many
    from gravicat.format.metricfile import build_chart
    from gravicat.physics.classify import (
        classify_chart,
        declared_statements,
        fixed_values,
        specialise,
        wrong_declarations,
    )

    specs = {}
    for name in names:  # bad --set values are refused before anything runs
        spec = build_chart(doc, name)
        fixed = fixed_values(doc, spec, settings)
        specs[name] = (specialise(spec, fixed, chart=name), fixed)

    def task(name):
        spec, fixed = specs[name]
        return lambda emit: classify_chart(spec, budget=budget, doc=doc, fixed=fixed)

    cap = CAP_SECONDS + PROOFS * budget
    outs = run_many([task(n) for n in names], jobs=default_jobs(), cpu_seconds=cap)
    charts, wrong = [], []
    for name, out in zip(names, outs, strict=True):
        if out.finished:
            result = out.value
        elif out.exception is not None and hasattr(out.exception, "exit_code"):
            out.reraise()  # a CatalogError of the chart (bad input): its one line
        else:
            result = {"chart": name, "error": _stopped(out, cap)}
        charts.append(result)
        if "error" not in result:
            wrong += [f"{name}: {w}" for w in wrong_declarations(declared_statements(doc, name), result,
                                                                 fixed=bool(specs[name][1]))]
    return charts, wrong


def _stopped(out, cap: float) -> str:
    if out.limit == "memory":
        return "not decided: the chart reached the memory cap"
    if out.limit in ("cpu", "wall"):
        return f"not decided within the CPU-time cap of {cap:g} s (raise --budget)"
    if out.error is not None:
        return f"not decided: the computation failed ({out.error.splitlines()[0][:200]})"
    return "not decided: the chart's process ended without a result"


# ---------------------------------------------------------------------------
# text output


def _status(item: dict) -> str:
    text = item["status"]
    if item.get("method") and item["method"] != "none":
        text += f" ({item['method']})"
    if item["status"] == "violated" and "whole domain" in item.get("where", ""):
        text += " everywhere"
    return text


def _print(report: dict[str, Any]) -> None:
    for c in report["charts"]:
        head = f"{report['metric']} / {c['chart']}"
        if "error" in c:
            typer.echo(safe_text(f"{head}: {c['error']}"))
            continue
        fixed = c.get("parameters")
        typer.echo(safe_text(head + (f" ({', '.join(f'{k} = {v}' for k, v in fixed.items())})" if fixed else "")))
        p = c["petrov"]
        if p["type"] is None:
            typer.echo(safe_text(f"  Petrov type: {p['where']}"))
        else:
            typer.echo(safe_text(f"  Petrov type: {p['type']} ({p['method']}; {p['where']})"))
            if p.get("weyl_scalars"):
                psi = ", ".join(f"{k} = {v}" for k, v in p["weyl_scalars"].items())
                typer.echo(safe_text(f"  Weyl scalars at {_point(p['tetrad'].get('point'))}: {psi}"))
                typer.echo(safe_text(f"  tetrad: {p['tetrad']['description']}"))
            if p.get("invariants"):
                typer.echo(safe_text(f"  I = {p['invariants']['I']}, J = {p['invariants']['J']}"))
            pnd = p.get("principal_null_directions")
            if isinstance(pnd, dict):
                for d in pnd["directions"]:
                    typer.echo(safe_text(f"  principal null direction (multiplicity {d['multiplicity']}): "
                                         f"({', '.join(d['vector'])})"))
            elif p["type"] in ("D", "N"):
                typer.echo("  principal null directions: not stated")
            for s in p.get("specialisations", []):
                typer.echo(safe_text(f"  where {s['where']}: type {s['type'] or '?'} ({s['method']})"))
        obvious = ", ".join(k["vector"] for k in c["killing_vectors"] if k["source"] != "declared") or "none"
        typer.echo(safe_text(f"  Killing vectors (obvious, proved): {obvious}"))
        for k in c["killing_vectors"] + c["killing_tensors"]:
            if k["source"] == "declared":
                what = f"Killing vector {k['vector']}" if "vector" in k else f"Killing tensor {k['tensor']}"
                typer.echo(safe_text(f"  declared {what}: {_status(k)}"))
        _print_matter(c["matter"], c["energy_conditions"], "")
        lam = c.get("lambda_as_matter")
        if lam:
            _print_matter(lam["matter"], lam["energy_conditions"], " (Lambda as matter)")
    for line in report.get("wrong_declarations", []):
        typer.echo(safe_text(f"wrong declaration: {line}"))


def _print_matter(matter: dict, conds: dict, label: str) -> None:
    ev = matter.get("eigenvalues")
    he = matter.get("hawking_ellis_type")
    typer.echo(f"  matter{label}: {matter['convention']}")
    if he:
        typer.echo(safe_text(f"  Hawking-Ellis type {he} {matter.get('hawking_ellis_where', '')}".rstrip()))
    if ev:
        ps = ", ".join(f"p[{k}] = {v}" for k, v in ev["pressures"].items()) or "all p_i = 0"
        typer.echo(safe_text(f"  rho = {ev['rho']}; {ps}"))
    rows = []
    for cond, item in conds.items():
        cex = item.get("counterexample")
        detail = ""
        if cex:
            detail = (f"{cex['quantity']} = {cex['value']} at {_point(cex['point'])}; "
                      f"{cex.get('vector_kind', 'vector')} ({', '.join(cex['vector'])})")
        rows.append([cond, _status(item), detail])
    emit_table(rows, ["energy condition" + label, "status", "counterexample"])


def _point(point: dict | None) -> str:
    if not point:
        return "-"
    return ", ".join(f"{k} = {v}" for k, v in point.items() if "(" not in k)
