"""`gravicat split`: the 3+1 split of a chart (lapse, shift, spatial metric, extrinsic curvature), its
Hamiltonian and momentum constraints proved, the ADM mass and angular momentum, and the fields on a
grid (``--grid ... -o FILE.h5``).

Each chart is split in its own forked child (:mod:`gravicat.engine.fork`) under a CPU-time cap of
30 s + 4 x budget and the memory cap of every child; the physics is in :mod:`gravicat.physics.split`
and :mod:`gravicat.physics.adm`, the grid writer in :mod:`gravicat.export.grid`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from gravicat.cli._base import app_context, open_subject, reports_errors
from gravicat.cli._output import emit_json, emit_table, safe_text
from gravicat.errors import CatalogError, CheckFailed, InputError

app = typer.Typer()


def _cap(budget: float) -> float:
    return 30.0 + 4 * budget


def _split_settings(texts: list[str], time_names: set[str]) -> tuple[str | None, dict[str, str]]:
    """(the parameter assignments as one ``--set`` text or None, {time coordinate: value text})."""
    from gravicat.format.assign import split_assignments

    params, times = [], {}
    for text in texts:
        for name, value in split_assignments(text, "--set"):
            if name in time_names:
                times[name] = value
            else:
                params.append(f"{name}={value}")
    return (",".join(params) or None), times


def _chart_report(doc, spec, *, time, budget, values, value_error, source) -> dict:
    """Split one chart, prove its constraints, measure ADM (runs in the forked child)."""
    from gravicat.engine.geometry import BudgetExceeded
    from gravicat.physics.adm import adm_quantities
    from gravicat.physics.split import prove_constraints, spatial_ricci_scalar, split_report

    sl = _slice(spec, time=time, budget=budget, source=source)
    constraints = prove_constraints(sl, budget=budget)
    try:
        ricci = spatial_ricci_scalar(sl, budget=budget)
    except BudgetExceeded:
        ricci = None
    if value_error is not None:
        adm = {"mass": None, "angular_momentum": None, "mass_check": None, "angular_momentum_check": None,
               "note": f"not computed: {value_error}"}
    elif len(sl.spatial) != 3:
        adm = {"mass": None, "angular_momentum": None, "mass_check": None, "angular_momentum_check": None,
               "note": f"not computed: the ADM integrals are written for three spatial dimensions, "
                       f"these slices have {len(sl.spatial)}"}
    else:
        adm = adm_quantities(sl, values, asymptotically_flat="asymptotically-flat" in (doc.data.get("tags") or ()))
    report = split_report(doc.id, sl, constraints, adm, ricci)
    report["fixed_parameters"] = {k: str(v) for k, v in spec.extra.get("fixed", {}).items()}
    return report


def _slice(spec, *, time, budget, source):
    from gravicat.physics.split import split_chart

    if spec.extra.get("kind") == "initial-data":  # data given on the slice (docs/initial-data.md)
        from gravicat.physics.initial_data import initial_slice

        if time is not None:
            raise InputError("--time", None, "an initial-data entry is one slice already; --time does not apply")
        return initial_slice(spec, budget=budget)
    return split_chart(spec, time=time, budget=budget, source=source)


def _run(tasks: list, budget: float) -> list:
    from gravicat.engine.fork import default_jobs, run_many

    cap = _cap(budget)
    return run_many(tasks, jobs=min(len(tasks), default_jobs()), cpu_seconds=cap, wall_seconds=3 * cap + 30)


def _failure(outcome, where: str, budget: float) -> CatalogError:
    """The one-line error of a chart's child that did not finish (a bug keeps its traceback)."""
    if outcome.exception is not None:
        if isinstance(outcome.exception, CatalogError):
            return outcome.exception
        outcome.reraise()
    if outcome.limit == "memory":
        return CatalogError(f"{where}: the split needed more memory than the cap of each child; nothing was computed")
    if outcome.limit is not None:
        return CatalogError(f"{where}: the split did not finish within {_cap(budget):g} CPU seconds "
                            "(30 + 4 x --budget)")
    return CatalogError(f"{where}: the split stopped unexpectedly ({outcome.error or f'exit code {outcome.exitcode}'})")


@app.command("split")
@reports_errors
def split(
    ctx: typer.Context,
    subject: Annotated[str, typer.Argument(metavar="SUBJECT", help="Metric file (FILE[:CHART]) or catalogue entry "
                                                                  "(ID[@REVISION][:CHART]).", show_default=False)],
    chart: Annotated[str | None, typer.Option("--chart", metavar="NAME",
                                              help="Only this chart (default: every chart).")] = None,
    time: Annotated[str | None, typer.Option("--time", metavar="COORD", help="The coordinate whose level sets are "
                                             "the slices (default: the chart's first).")] = None,
    settings: Annotated[list[str] | None, typer.Option(
        "--set", metavar="NAME=VALUE", help="Fix a parameter (repeatable, or comma-separated); with --grid also the "
                                            "time of the slice (default 0).", show_default=False)] = None,
    budget: Annotated[float, typer.Option("--budget", min=0.1, help="CPU seconds for each exact proof.")] = 20.0,
    grid: Annotated[list[str] | None, typer.Option(
        "--grid", metavar="COORD=LO:HI:N", help="Write the fields on a grid of the chart's spatial coordinates "
                                                "(one per coordinate; needs -o).", show_default=False)] = None,
    output: Annotated[Path | None, typer.Option(
        "--output", "-o", metavar="FILE", help="Grid file: .h5/.hdf5 (HDF5) or .npz.", show_default=False)] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print JSON (documented shape, see docs/json.md).")] = False,
) -> None:
    """The 3+1 split of each chart: lapse, shift, spatial metric, K_ij, the constraints proved, ADM mass and J.

    Exit 1 when a constraint is violated, 2 for bad input (also slices that are not spacelike).
    """
    from gravicat.format.metricfile import build_chart

    app_ctx = app_context(ctx)
    if grid and output is None:
        raise InputError("--grid", None, "needs -o FILE (.h5, .hdf5 or .npz)")
    if output is not None and not grid:
        raise InputError("-o", None, "applies with --grid (the split itself is printed)")
    if output is not None:
        from gravicat.export.grid import SUFFIXES

        if output.suffix.lower() not in SUFFIXES:
            raise InputError(str(output), None, f"unknown grid format '{output.suffix or '(none)'}' "
                                                f"(use {', '.join(SUFFIXES)})")
    found = open_subject(app_ctx, subject, chart=chart)
    if not found.is_file:
        app_ctx.engine.dispose()  # no pooled connection is inherited by the charts' forked children
    doc = found.document
    names = [found.chart] if found.chart else list(doc.chart_names)
    texts = [t for t in settings or [] if t.strip()]
    if grid:
        _write_grid(found, doc, found.chart or doc.chart_names[0], texts, time, budget, grid, output, as_json)
        return
    errors = []
    if time is not None and len(names) > 1:  # every chart: only those that have the coordinate --time names
        have = [n for n in names if time in doc.data["charts"][n].get("coordinates", ())]
        if not have:
            raise InputError("--time", None, f"'{time}' is not a coordinate of any chart of {doc.id}")
        errors = [{"chart": n, "error": f"--time: no coordinate '{time}' in this chart"}
                  for n in names if n not in have]
        names = have
    specs, values, value_errors = [], {}, {}
    for name in names:
        spec, vals, err = _chart_inputs(doc, build_chart(doc, name), texts, time_allowed=False)
        specs.append(spec)
        values[name], value_errors[name] = vals, err
    tasks = [(lambda emit, spec=spec: _chart_report(doc, spec, time=time, budget=budget, values=values[spec.chart],
                                                     value_error=value_errors[spec.chart], source=subject))
             for spec in specs]
    reports = []
    for name, outcome in zip(names, _run(tasks, budget), strict=True):
        if outcome.finished:
            reports.append(outcome.value)
            continue
        exc = _failure(outcome, f"{doc.id}:{name}", budget)
        if len(names) == 1 and not errors:
            raise exc
        errors.append({"chart": name, "error": str(exc)})
    if not reports:
        raise InputError(subject, None, "no chart could be split: " + "; ".join(f"{e['chart']}: {e['error']}"
                                                                                for e in errors))
    violated = [f"{r['chart']} ({k})" for r in reports for k, c in r["constraints"].items()
                if c["status"] == "violated"]
    if as_json:
        statuses = {c["status"] for r in reports for c in r["constraints"].values()}
        overall = next((s for s in ("violated", "inconclusive", "proved") if s in statuses), "skipped")
        emit_json({"metric": doc.id, "charts": reports, "refused": errors, "status": overall})
    else:
        for rep in reports:
            _print_chart(doc.id, rep)
        for e in errors:
            typer.echo(f"{doc.id} / {e['chart']}: not split: {safe_text(e['error'])}")
    if violated:
        if as_json:
            raise typer.Exit(1)
        raise CheckFailed(f"{doc.id}: the constraints are violated on {', '.join(violated)}")


def _chart_inputs(doc, spec, texts, *, time_allowed: bool, time_name: str | None = None):
    """(spec with the --set parameters fixed, numeric values of every parameter for the ADM integrals or
    the grid, why there are none or None, [the time value text])."""
    from gravicat.export.parameters import fixed_parameters, numeric_parameters
    from gravicat.physics.split import fix_parameters

    param_text, times = _split_settings(texts, {time_name} if time_allowed and time_name else set())
    fixed = fixed_parameters(doc, spec, param_text)
    try:
        values = {str(k): v for k, v in numeric_parameters(doc, spec, param_text).items()}
        err = None
    except InputError as exc:
        values, err = {}, str(exc)
    out = fix_parameters(spec, fixed)
    if time_allowed:
        return out, values, err, times.get(time_name)
    return out, values, err


def _text(value) -> str:
    return safe_text(value if value is not None else "-")


def _print_chart(metric: str, rep: dict[str, Any]) -> None:
    coords = rep["coordinates"]
    fixed = ", ".join(f"{k} = {v}" for k, v in rep.get("fixed_parameters", {}).items())
    typer.echo(f"{metric} / {rep['chart']}: slices {rep['time']} = const, coordinates ({', '.join(coords)})"
               + (f"; fixed {fixed}" if fixed else ""))
    typer.echo(f"convention: {rep['convention']}")
    typer.echo(f"lapse alpha = {_text(rep['lapse'])}")
    for label, key in (("shift beta^", "shift"), ("shift beta_", "shift_lower")):
        for c, v in zip(coords, rep[key], strict=True):
            typer.echo(f"{label}{c} = {_text(v)}")
    for label, key in (("gamma", "spatial_metric"), ("K", "extrinsic_curvature")):
        for i, ci in enumerate(coords):
            for j in range(i, len(coords)):
                typer.echo(f"{label}[{ci},{coords[j]}] = {_text(rep[key][i][j])}")
    typer.echo(f"trace K = {_text(rep['trace_K'])}")
    typer.echo(f"spatial Ricci scalar = {_text(rep['spatial_ricci_scalar'])}")
    if rep["energy_density"] is not None:
        typer.echo(f"energy density rho = {_text(rep['energy_density'])}")
        for c, v in zip(coords, rep["momentum_density"], strict=True):
            typer.echo(f"momentum density S_{c} = {_text(v)}")
    rows = [[k, c["status"], c["method"], _text(c.get("detail"))] for k, c in rep["constraints"].items()]
    emit_table(rows, ["constraint", "status", "method", "detail"])
    for k, c in rep["constraints"].items():
        if c.get("counterexample"):
            typer.echo(f"counterexample ({k}): {_text(c['counterexample'])}")
    adm = rep["adm"] or {}
    if adm.get("mass") is None:
        typer.echo(f"ADM: {_text(adm.get('note'))}")
    else:
        mass = f"{adm['mass']:.8g}" + (f" ({adm['mass_check']})" if adm.get("mass_check") else "")
        spin = f"{adm['angular_momentum']:.8g}" + (f" ({adm['angular_momentum_check']})"
                                                   if adm.get("angular_momentum_check") else "")
        values = ", ".join(f"{k} = {v:g}" for k, v in adm.get("parameters", {}).items())
        typer.echo(f"ADM mass = {mass}; ADM angular momentum J_z = {spin}"
                   + (f" [at {values}]" if values else ""))
    typer.echo("")


def _write_grid(found, doc, name, texts, time, budget, grid, output, as_json) -> None:
    """``--grid``: split one chart, prove its constraints (a violated one writes nothing), evaluate the fields
    on the grid and write them (in the chart's forked child)."""
    from gravicat.format.metricfile import build_chart

    spec = build_chart(doc, name)
    tname = time if time is not None else str(spec.coords[0])
    spec, values, err, time_text = _chart_inputs(doc, spec, texts, time_allowed=True, time_name=tname)
    if err is not None:
        raise InputError("--set", None, f"the grid needs a number for every parameter: {err}")
    revision = found.revision_hash or doc.hash
    source = str(found.ref.path) if found.is_file else f"catalogue entry {found.ref.entry}, revision " \
                                                          f"{found.revision_number}"
    if found.is_file:
        stored = "a metric file (no stored checks)"
    elif not found.checks:
        stored = "unverified (no checks stored for this revision)"
    else:
        from gravicat.checks import worst

        stored = worst(c["status"] for c in found.checks).value

    def work(emit):
        return _grid_work(doc, spec, name=name, time=time, budget=budget, grid=grid, output=output, values=values,
                          time_text=time_text, revision=revision, source=source, stored=stored)

    outcome = _run([work], budget)[0]
    if not outcome.finished:
        raise _failure(outcome, f"{doc.id}:{name}", budget)
    summary = outcome.value
    if as_json:
        emit_json(summary)
    else:
        shape = " x ".join(str(a["points"]) for a in summary["axes"])
        typer.echo(f"wrote {safe_text(output)}: alpha, beta, gamma, K of {doc.id} / {name} on {shape} points of "
                   f"({', '.join(a['name'] for a in summary['axes'])}) at {summary['time']} = {summary['time_value']}; "
                   f"constraints: hamiltonian {summary['constraints']['hamiltonian']}, "
                   f"momentum {summary['constraints']['momentum']}")


def _grid_work(doc, spec, *, name, time, budget, grid, output, values, time_text, revision, source,
               stored) -> dict:
    import sympy as sp

    from gravicat import __version__
    from gravicat.export.grid import evaluate, parse_axes, write_grid
    from gravicat.physics.split import CONVENTION, prove_constraints

    sl = _slice(spec, time=time, budget=budget, source=str(output))
    coords = [str(c) for c in sl.coords]
    axes = parse_axes(grid, coords)
    constraints = prove_constraints(sl, budget=budget)
    bad = [k for k, c in constraints.items() if c["status"] == "violated"]
    if bad:
        raise CheckFailed(f"{doc.id}:{name}: the {' and '.join(bad)} constraint{'s are' if len(bad) > 1 else ' is'} "
                          f"violated ({constraints[bad[0]]['detail']}); nothing was written")
    tsym = sl.time_symbol
    if time_text is not None:
        from gravicat.physics.parameters import parse_number

        tval = parse_number(time_text, source="--set", field=str(tsym))
    else:
        tval = sp.Integer(0)
    subs = {p: sp.sympify(values[str(p)]) for p in sl.spatial_spec.params if str(p) in values}
    subs[tsym] = tval
    fields = {"alpha": sl.lapse, "beta": sl.shift, "gamma": sl.spatial_metric, "K": sl.extrinsic}
    domain = [r for r in (*spec.domain, *spec.param_ranges) if r.free_symbols & set(sl.coords)]
    arrays = evaluate(fields, list(sl.coords), axes, subs, domain=domain)
    attributes = {
        "entry": doc.id, "title": doc.title, "revision": revision, "source": source, "chart": name,
        "stored_checks": stored,
        "time_coordinate": str(tsym), "time_value": float(tval), "coordinates": coords,
        "parameters": {k: float(v) for k, v in values.items()},
        "generator": f"gravicat {__version__}", "convention": CONVENTION,
        "layout": "alpha[grid], beta[i][grid] (upper index), gamma[i][j][grid], K[i][j][grid] (lower indices); "
                  "grid index order = coordinate order, axis_<coordinate> holds each axis",
        "constraints": {k: c["status"] for k, c in constraints.items()},
        "axes": [a.to_json() for a in axes],
    }
    write_grid(Path(output), arrays, axes, attributes)
    return {"metric": doc.id, "chart": name, "output": str(output), "time": str(tsym), "time_value": float(tval),
            "axes": [a.to_json() for a in axes], "datasets": sorted(arrays) + [f"axis_{c}" for c in coords],
            "constraints": attributes["constraints"], "parameters": attributes["parameters"]}

