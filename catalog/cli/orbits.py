"""Observer physics: horizons, static and zero-angular-momentum observers, circular orbits, landmarks."""

from __future__ import annotations

from enum import StrEnum
from pathlib import Path
from typing import Annotated, Any

import typer

from gravicat.cli._base import app_context, open_subject, reports_errors
from gravicat.cli._output import emit_json, emit_table
from gravicat.errors import InputError

app = typer.Typer()


class Units(StrEnum):
    geometrized = "geometrized"
    si = "si"


def _fmt(value: Any, digits: int = 12) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.{digits}g}"
    return str(value)


@app.command("orbits")
@reports_errors
def orbits(
    ctx: typer.Context,
    subject: Annotated[str, typer.Argument(metavar="SUBJECT", help="Catalogue entry (ID[@REVISION][:CHART]) or "
                                                                  "metric file (FILE[:CHART]).",
                                           show_default=False)],
    chart: Annotated[str | None, typer.Option("--chart", metavar="NAME",
                                              help="Chart to use (default: the entry's first chart).")] = None,
    settings: Annotated[list[str] | None, typer.Option(
        "--set", metavar="NAME=VALUE", help="Parameter value (repeatable); missing ones take the file's default. "
                                            "With --units si a mass is GM in m^3/s^2, anything else metres.")] = None,
    radius: Annotated[list[str] | None, typer.Option(
        "--radius", metavar="R", help="Radius for circular orbits and observers (repeatable; a number, or an "
                                      "expression in the parameters such as 6*M).")] = None,
    units: Annotated[Units, typer.Option("--units", help="Units of --set, --radius and the output.")] =
        Units.geometrized,
    surface_radius: Annotated[str | None, typer.Option(
        "--surface-radius", metavar="R", help="Compare each orbiting clock with a clock on the equator of the "
                                              "body's surface at this radius.")] = None,
    surface_rotation: Annotated[str, typer.Option(
        "--surface-rotation", metavar="W", help="Angular velocity of that surface (rad/s with --units si, "
                                                "else 1/length).")] = "0",
    surface_j2: Annotated[str, typer.Option(
        "--surface-j2", metavar="J2", help="Quadrupole moment J2 of the body, added to the surface potential "
                                           "(weak field).")] = "0",
    as_json: Annotated[bool, typer.Option("--json", help="Print JSON (documented shape, see README).")] = False,
    azimuth: Annotated[str | None, typer.Option(
        "--azimuth", metavar="NAME", help="The azimuthal coordinate of the circular orbits when the chart has "
                                          "several Killing angles (default: phi or varphi).")] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", metavar="PATH.png", help="Write a PNG of E, u^t and Omega against r with the landmarks "
                                           "(needs matplotlib: pip install 'gravicat[plot]').")] = None,
) -> None:
    """Horizons, observers and circular orbits of a stationary, axisymmetric chart, from its metric."""
    from gravicat.format.metricfile import build_chart
    from gravicat.physics import orbits as lib
    from gravicat.physics import units as U

    app_ctx = app_context(ctx)
    found = open_subject(app_ctx, subject, chart=chart)
    doc, chart = found.document, found.chart
    from gravicat.format.charts import require_spacetime

    require_spacetime(doc, "orbits")
    spec = build_chart(doc, chart)
    system = units.value
    params = lib.resolve_parameters(doc, spec, settings or (), units=system)
    model = lib.EquatorialChart(spec, doc.chart_names, azimuth=azimuth).bind(params)
    names = {str(p): params.exact[str(p)] for p in spec.params}
    radii = []
    for text in radius or ():
        value = float(lib.parse_number(text, source="--radius", field=text, env=names))
        if not value > 0:
            raise InputError("--radius", text, "a radius must be positive")
        radii.append(value)
    clocks = []
    if surface_radius is None and (surface_rotation.strip() != "0" or surface_j2.strip() != "0"):
        raise InputError("--surface-rotation" if surface_rotation.strip() != "0" else "--surface-j2", None,
                         "needs --surface-radius")
    if surface_radius is not None:
        if not radii:
            raise InputError("--surface-radius", None, "give the orbits to compare with: --radius R")
        big_r = float(lib.parse_number(surface_radius, source="--surface-radius", field=surface_radius, env=names))
        if not big_r > 0:
            raise InputError("--surface-radius", surface_radius, "a radius must be positive")
        spin = float(lib.parse_number(surface_rotation, source="--surface-rotation", field=surface_rotation))
        if system == "si":
            spin = U.angular_velocity_from_si(spin)
        j2 = float(lib.parse_number(surface_j2, source="--surface-j2", field=surface_j2))
        for r in radii:
            for d in lib.DIRECTIONS:
                if model.circular(r, d)["exists"]:
                    clocks.append(lib.compare_clocks(model, r, big_r, spin, j2=j2, direction=d))
    report = lib.survey(model, radii, units=system, clocks=clocks)
    if plot is not None:
        lib.plot_survey(model, report, str(plot), units=system)
        report["plot"] = str(plot)
    if as_json:
        emit_json(report)
        return
    _print_report(report)


def _print_report(rep: dict[str, Any]) -> None:
    si = rep["units"]["system"] == "si"
    coords = rep["coordinates"]
    r, t, phi = coords["radial"], coords["time"], coords["azimuthal"]
    params = ", ".join(f"{k} = {_fmt(v)}" for k, v in rep["parameters"].items()) or "no parameters"
    plane = f", equator {coords['polar']} = pi/2" if coords["polar"] else ""
    length = " m" if si else ""
    typer.echo(f"{rep['metric']} / {rep['chart']}: time {t}, radial {r}, azimuth {phi}{plane}")
    typer.echo(f"parameters: {params} ({'SI: lengths in metres' if si else 'geometrized units, G = c = 1'})")
    hz = rep["horizons"]
    listed = ", ".join(_fmt(q["radius"]) + (f" (multiplicity {q['multiplicity']})" if q["multiplicity"] > 1 else "")
                       for q in hz["details"])
    typer.echo(f"horizons: {hz['count']} found{': ' + r + ' = ' + listed + length if hz['count'] else ''} "
               f"[{hz['method']}]")
    ergo = ", ".join(_fmt(x) for x in rep["ergosurface"]["radii"]) or "none"
    low, high = rep["static_range"]
    if low is None:
        where = "no static observers in this region"
    elif high is None:
        where = f"static observers exist for {r} > {_fmt(low)}{length}"
    else:
        where = f"static observers exist for {_fmt(low)} < {r} < {_fmt(high)}{length}"
    typer.echo(f"ergosurface on the equator (g_tt = 0): {r} = {ergo}{length if ergo != 'none' else ''}; {where}")
    if rep["cosmological_horizon"] is not None:
        typer.echo(f"cosmological horizon: {r} = {_fmt(rep['cosmological_horizon'])}{length}")
    if rep["static_radius"] is not None:
        typer.echo(f"static radius (a static observer is in free fall): {r} = {_fmt(rep['static_radius'])}{length}")
    typer.echo("")
    landmarks = [("photon orbit", "photon_orbits"), ("marginally bound orbit", "marginally_bound"), ("ISCO", "isco")]
    if any(v is not None for v in rep["osco"].values()):
        landmarks.append(("outermost stable orbit", "osco"))
    emit_table([[label, _fmt(rep[key]["prograde"]), _fmt(rep[key]["retrograde"])] for label, key in landmarks],
               ["landmark" + (" (m)" if si else ""), "prograde", "retrograde"])
    omega_unit = " (rad/s)" if si else ""
    if rep["circular"]:
        typer.echo("\ncircular equatorial geodesics:")
        rows = []
        for c in rep["circular"]:
            if not c["exists"]:
                rows.append([_fmt(c["radius"]), c["direction"], "-", "-", "-", "-", "-", "-", "-", c["reason"]])
                continue
            extra = f"{c['clock_offset_us_per_day']:+.6g} us/day" if si else ""
            rows.append([_fmt(c["radius"]), c["direction"], _fmt(c["Omega"]), _fmt(c["u"][t], 15), _fmt(c["u"][phi]),
                         _fmt(c["energy"], 15), _fmt(c["angular_momentum"]), _fmt(c["stable"]), _fmt(c["bound"]),
                         f"|g(u,u)+1| = {c['norm_residual']:.1e} {extra}".rstrip()])
        emit_table(rows, [r, "direction", "Omega" + omega_unit, f"u^{t}", f"u^{phi}", "E",
                          "L" + (" (m^2/s)" if si else ""), "stable", "bound", "check / clock"])
        typer.echo(f"\nstatic observers (clock rate relative to {rep['clock_reference']}):")
        emit_table([[_fmt(s["radius"]), _fmt(s["u"][t], 15), _fmt(s["clock_rate"], 15)]
                    + ([f"{s['clock_offset_us_per_day']:+.6g}"] if si else []) if s["exists"]
                    else [_fmt(s["radius"]), "-", "-", s["reason"]] for s in rep["static_observers"]],
                   [r, f"u^{t}", "clock rate"] + (["us/day"] if si else []))
        if rep["zamo"] is not None:
            typer.echo("\nzero-angular-momentum observers:")
            emit_table([[_fmt(z["radius"]), _fmt(z["angular_velocity"]), _fmt(z["u"][t], 15), _fmt(z["clock_rate"], 15)]
                        if z["exists"] else [_fmt(z["radius"]), "-", "-", z["reason"]] for z in rep["zamo"]],
                       [r, "omega" + omega_unit, f"u^{t}", "clock rate"])
    if rep.get("clock_comparison"):
        key = "us_per_day" if si else "fractional"
        scale = "microseconds per day" if si else "fractional rate"
        typer.echo(f"\norbiting clock against a clock on the rotating surface ({scale}):")
        emit_table([[_fmt(c["orbit_radius"]), c["direction"], f"{c[key]['net']:+.6g}",
                     f"{c[key]['gravitational']:+.6g}", f"{c[key]['orbital_velocity']:+.6g}",
                     f"{c[key]['surface_rotation']:+.6g}"] for c in rep["clock_comparison"]],
                   [r, "direction", "net", "gravitational", "orbital velocity", "surface rotation"])
    if rep.get("plot"):
        typer.echo(f"\nplot written to {rep['plot']}")
    for note in rep["notes"]:
        typer.echo(f"note: {note}")
