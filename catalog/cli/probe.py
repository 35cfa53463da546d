"""`gravicat probe`: follow a timelike or null geodesic or a charged particle; report where it ends and the drifts."""

from __future__ import annotations

from typing import Annotated

import typer

from gravicat.checks import ExportContext
from gravicat.cli._base import AppContext, app_context, merge_set_options, open_subject, reports_errors
from gravicat.cli._output import emit_json, emit_table
from gravicat.errors import CheckFailed, NotFound

app = typer.Typer()


def subject_with_checks(app_ctx: AppContext, arg: str, chart: str | None = None):
    """(document, chart or None, export context): a metric file (no stored checks) or a catalogue
    entry (its stored checks), named by the one subject syntax."""
    found = open_subject(app_ctx, arg, chart=chart)
    if found.is_file:
        context = ExportContext(revision=found.document.hash, source=str(found.ref.path))
    else:
        context = ExportContext(revision=found.revision_hash, checks=tuple(found.checks), source="catalogue")
    return found.document, found.chart, context


@app.command("probe")
@reports_errors
def probe(
    ctx: typer.Context,
    subject: Annotated[str, typer.Argument(help="Metric file (FILE[:CHART]) or catalogue entry "
                                                "(ID[@REVISION][:CHART]).", show_default=False)],
    start: Annotated[str, typer.Option("--from", help="Start point, e.g. r=10,theta=pi/2 (coordinates the metric "
                                                     "does not depend on default to 0).", show_default=False)],
    chart: Annotated[str | None, typer.Option("--chart", help="Chart (default: the first).")] = None,
    settings: Annotated[list[str] | None, typer.Option(
        "--set", metavar="NAME=VALUE", help="Parameter value (repeatable, or comma-separated: --set M=1,a=0.9; "
                                            "default: the file's defaults).", show_default=False)] = None,
    params: Annotated[str | None, typer.Option("--params", hidden=True,
                                               help="Deprecated spelling of --set.")] = None,
    orbit: Annotated[str, typer.Option("--orbit", help="circular, radial or custom (timelike), or null.")]
    = "circular",
    direction: Annotated[str, typer.Option("--direction", help="prograde or retrograde (circular orbits).")]
    = "prograde",
    velocity: Annotated[str | None, typer.Option("--velocity", help="Spatial components u^i, e.g. r=0,phi=0.04 "
                                                                    "(u^t follows from g(u,u) = -1).")] = None,
    azimuth: Annotated[str | None, typer.Option("--azimuth", help="The azimuthal coordinate (default: phi).")]
    = None,
    impact: Annotated[float | None, typer.Option("--impact", help="Null: impact parameter b = L/E (E = 1); "
                                                                  "the radial momentum follows from H = 0.")] = None,
    theta_impact: Annotated[float | None, typer.Option("--theta-impact", help="Null, with --impact: p_theta/E at "
                                                                              "the start (default 0).")] = None,
    outgoing: Annotated[bool, typer.Option("--outgoing", help="Null, with --impact: start moving outwards "
                                                              "(default inwards).")] = False,
    charge: Annotated[float | None, typer.Option("--charge", help="Charge per unit mass q of a timelike particle "
                                                                  "(radial or custom), in the entry's potential.")]
    = None,
    stop_radius: Annotated[float | None, typer.Option("--stop-radius", help="Stop when the radial coordinate "
                                                                            "falls to R.")] = None,
    escape_radius: Annotated[float | None, typer.Option("--escape-radius", help="Stop when the radial coordinate "
                                                                                "rises to R (escape).")] = None,
    stop_below: Annotated[list[str] | None, typer.Option("--stop-below", metavar="NAME=VALUE",
                                                         help="Stop when coordinate NAME falls to VALUE "
                                                              "(repeatable).", show_default=False)] = None,
    stop_above: Annotated[list[str] | None, typer.Option("--stop-above", metavar="NAME=VALUE",
                                                         help="Stop when coordinate NAME rises to VALUE "
                                                              "(repeatable).", show_default=False)] = None,
    cross_horizons: Annotated[bool, typer.Option("--cross-horizons", help="Do not stop on approach to a "
                                                                          "horizon.")] = False,
    tau: Annotated[float | None, typer.Option("--tau", help="Proper time (null: affine parameter) to integrate "
                                                            "over.")] = None,
    orbits: Annotated[float | None, typer.Option("--orbits", help="Number of orbits (circular; default 10).")]
    = None,
    rtol: Annotated[float, typer.Option("--rtol", help="Relative tolerance of the integrator.")] = 1e-12,
    atol: Annotated[float, typer.Option("--atol", help="Absolute tolerance of the integrator.")] = 1e-12,
    max_steps: Annotated[int, typer.Option("--max-steps", help="Stop after this many integrator steps "
                                                               "(exit 1: unfinished).")] = 200_000,
    max_cpu: Annotated[float, typer.Option("--max-cpu", help="Stop after this many CPU seconds (exit 1: "
                                                             "unfinished).")] = 60.0,
    budget: Annotated[float, typer.Option("--budget", min=0.1, help="CPU seconds to prepare the chart's code "
                                                                   "(its derivatives), besides --max-cpu.")]
    = 60.0,
    max_drift: Annotated[float | None, typer.Option("--max-drift", help="Exit 1 if the normalisation or a "
                                                                        "conserved momentum drifts more.")] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print JSON (documented shape).")] = False,
) -> None:
    """Follow a geodesic (timelike, null) or a charged particle; report where it ends and the drift of g(u,u) + 1
    (or H), E and L."""
    from gravicat.physics.probe import probe as run_probe
    from gravicat.registry import exporters

    app_ctx = app_context(ctx)
    doc, chart, context = subject_with_checks(app_ctx, subject, chart)
    params = merge_set_options(settings, params, "--params") or None
    exporter = exporters(app_ctx.plugins).get("python")
    if exporter is None:
        raise NotFound("the probe runs the code of the 'python' export target, which is not loaded "
                       "(see 'gravicat plugins')")
    from gravicat.engine.fork import run_bounded

    # the whole probe (preparing the code from file content, then integrating) in a child under the caps
    def work():
        return run_probe(doc, exporter, chart=chart, params=params, start=start, orbit=orbit, direction=direction,
                         velocity=velocity, azimuth=azimuth, tau=tau, orbits=orbits, rtol=rtol, atol=atol,
                         max_steps=max_steps, max_cpu=max_cpu, context=context, impact=impact,
                         theta_impact=theta_impact, outgoing=outgoing, charge=charge, stop_radius=stop_radius,
                         escape_radius=escape_radius, stop_below=stop_below or (), stop_above=stop_above or (),
                         cross_horizons=cross_horizons)

    report = run_bounded(work, cpu_seconds=budget + max_cpu, what=f"{doc.id}: probe",
                         hint="give a larger --budget, or setting memory-cap for memory (see docs/limits.md)")
    problems = _problems(report, max_drift)
    if as_json:
        emit_json(report)
        if problems:
            raise typer.Exit(1)
        return
    _print(report)
    if problems:
        raise CheckFailed(f"{doc.id}:{report['chart']}: {problems[0]}")


def _problems(report, max_drift) -> list[str]:
    out = []
    if report["termination"] == "failed":
        out.append(f"the integration failed: {report['detail']}")
    if report["termination"] in ("step-limit", "cpu-limit"):
        out.append(f"the integration is unfinished: {report['detail']}")
    if max_drift is not None:
        drift = report["drift"]
        worst = [("normalisation", drift["normalisation"])]
        if "hamiltonian" in drift:
            worst.append(("H", drift["hamiltonian"]))
        if "separation" in drift:
            sep = drift["separation"]
            worst.append(("K", sep["max_rel_change"] if sep["max_rel_change"] is not None else sep["max_abs_change"]))
        worst += [(f"p_{k}", v["max_rel_change"] if v["max_rel_change"] is not None else v["max_abs_change"])
                  for k, v in drift["conserved"].items()]
        for name, value in worst:
            if value > max_drift:
                out.append(f"drift of {name} {value:.3g} exceeds --max-drift {max_drift:g}")
    return out


def _print(r) -> None:
    coords = list(r["start"])
    typer.echo(f"{r['metric']} / {r['chart']} (revision {r['revision'][:12]}, status {r['status']}); "
               f"{r['code']}")
    if r["parameters"]:
        typer.echo("parameters: " + ", ".join(f"{k} = {v:.15g}" for k, v in r["parameters"].items()))
    kind = r["orbit"] + (f", charge q = {r['charge']:.15g} per unit mass" if "charge" in r else "")
    typer.echo(f"orbit: {kind} from " + ", ".join(f"{k}={v:.15g}" for k, v in r["start"].items()))
    name = "k" if r["kind"] == "null" else "u"
    typer.echo(f"{name} = (" + ", ".join(f"{v:.15g}" for v in r["velocity"].values()) + f") in ({', '.join(coords)})")
    if "impact" in r:
        i = r["impact"]
        typer.echo(f"impact: b = {i['b']:.15g}, theta impact {i['theta']:.15g}, {i['direction']}")
    if "circular" in r:
        c = r["circular"]
        parts = [f"{k} = {v:.15g}" for k, v in c.items() if isinstance(v, float) and k != "orbits"]
        typer.echo(f"circular ({c['direction']}): " + ", ".join(parts))
    typer.echo(f"{r['termination']}: {r['detail']}; {r['steps']} steps, {r['rhs_evaluations']} evaluations "
               f"(DOP853, rtol {r['integrator']['rtol']:g}, atol {r['integrator']['atol']:g})")
    turning = r.get("turning_points", {"count": 0, "points": []})
    if turning["count"]:
        shown = ", ".join(f"{p['coordinate']} = {p['value']:.12g} ({p['kind']})" for p in turning["points"][:6])
        more = f" and {turning['count'] - 6} more" if turning["count"] > 6 else ""
        typer.echo(f"turning points: {shown}{more}")
    d = r["drift"]
    if r["kind"] == "null":
        rows = [["H = g(k,k)/2", "0", f"{d['hamiltonian']:.3e}", ""]]
    else:
        rows = [["g(u,u) + 1", "", f"{d['normalisation']:.3e}", ""]]
    for name, v in d["conserved"].items():
        label = f"p_{name}"
        if name == coords[0]:
            label = f"energy E = -p_{name}"
        elif name == r["azimuth"]:
            label = f"angular momentum L = p_{name}"
        rel = "" if v["max_rel_change"] is None else f"{v['max_rel_change']:.3e}"
        value = -v["initial"] if name == coords[0] else v["initial"]
        rows.append([label, f"{value:.15g}", f"{v['max_abs_change']:.3e}", rel])
    if "separation" in r:
        v = d["separation"]
        rel = "" if v["max_rel_change"] is None else f"{v['max_rel_change']:.3e}"
        rows.append(["separation constant K (Carter)", f"{r['separation']['initial']:.15g}",
                     f"{v['max_abs_change']:.3e}", rel])
    for name, v in d.get("coordinates", {}).items():
        rows.append([f"{name} (circular orbit)", f"{r['start'][name]:.15g}", "", f"{v:.3e}"])
    lam = "lambda" if r["kind"] == "null" else "tau"
    typer.echo(f"drift over {r['samples']} samples up to {lam} = {r['tau']:.12g}:")
    emit_table(rows, ["quantity", "value", "max abs change", "max rel change"])
