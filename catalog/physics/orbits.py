"""Observer physics of a stationary, axisymmetric chart, computed from the metric itself.

Nothing here knows a particular spacetime: every quantity comes from the metric
components of the chart, with the parameters set to numbers.

Adapted coordinates (detected, never assumed by name except ``theta``):

* time: the first coordinate; the metric must not depend on it (stationarity);
* polar angle: a coordinate named ``theta``, if any; everything is evaluated on
  the equator theta = pi/2, which must be a plane of reflection symmetry
  (d g_ab / d theta = 0 there, checked numerically);
* radial: the one coordinate besides ``theta`` the metric depends on;
* azimuth: a coordinate besides the time that the metric does not depend on
  (a second Killing direction); ``phi`` is preferred if several qualify.

On the equator write A = g_tt, B = g_tphi, C = g_phiphi (functions of r) and
primes for d/dr. Then, with u = u^t (1, 0, 0, Omega) for a circular orbit:

* horizons: radii where the orbits of the two Killing vectors become null,
  D = B**2 - A*C = 0 (for a static metric g_tt = 0; for Boyer–Lindquist Kerr
  D = Delta), away from the centre C = 0. A throat where only g^rr vanishes is
  not a horizon, so g^rr is not used. All positive real roots are found exactly
  when D is a rational function of r (real roots of its numerator, with
  multiplicity), otherwise by a sign scan on a logarithmic grid plus a search
  for double roots (sign changes of dD/dr where D vanishes);
* ergosurface on the equator: g_tt = 0; static observers, u^t = 1/sqrt(-g_tt),
  exist where g_tt < 0, outside the static limit (the outermost root);
* zero-angular-momentum observers (when g_tphi is not identically 0):
  omega = -B/C, u^t = sqrt(C/D);
* circular equatorial geodesics: Omega = (-B' +- sqrt(B'**2 - A'C'))/C'
  (the radial geodesic equation for u, since the metric does not depend on t
  and phi); u^t = 1/sqrt(-(A + 2 B Omega + C Omega**2)); E = -(A + B Omega) u^t,
  L = (B + C Omega) u^t. The prograde branch co-rotates with the frame
  dragging (sign of omega far away; Omega > 0 when there is none), so for Kerr
  with a > 0 in Boyer–Lindquist it is the branch with L > 0;
* photon orbit: A + 2 B Omega + C Omega**2 = 0 (the circular orbit becomes
  null); marginally bound orbit: E = 1; innermost stable circular orbit (ISCO):
  dE/dr = 0 (E has its minimum there; dL/dr = 0 at the same radius, and
  dE = Omega dL along the family). dE/dr comes from the chain rule with
  dOmega/dr = -(A'' + 2 B'' Omega + C'' Omega**2)/(2 (B' + C' Omega)).

Roots are bracketed on a float grid (numpy) and refined with mpmath at 40
digits. Each circular orbit is checked against the full metric of the chart:
g(u, u) + 1 and the geodesic acceleration Gamma^mu_ab u^a u^b (times r) must
vanish to rounding.

Units: the model works in the chart's units (G = c = 1). :func:`resolve_parameters`
with ``units="si"`` reads mass parameters as GM in m^3/s^2 and every other
parameter and radius in metres, converting with :mod:`gravicat.physics.units`;
:func:`survey` converts the report back to SI.

The pieces live beside this module, each with its own job; this module re-exports them and
writes the report:

* :mod:`.parameters`: ``NAME=VALUE`` settings, defaults, SI conversion and range checks;
* :mod:`.equatorial`: the chart on its equator, horizons, region, observers, circular orbits;
* :mod:`.roots`: positive roots along r (exact for rational functions, else a refined grid scan);
* :mod:`.landmarks`: the effective potential, its outward barrier and the landmarks;
* :mod:`.clocks`: an orbiting clock against a clock on the rotating surface.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from gravicat.errors import InputError
from gravicat.physics import units as U
from gravicat.physics.clocks import ClockComparison, compare_clocks
from gravicat.physics.equatorial import Equatorial, EquatorialChart
from gravicat.physics.landmarks import DIRECTIONS, EDGE
from gravicat.physics.parameters import Parameters, is_mass_parameter, parse_number, resolve_parameters
from gravicat.physics.roots import DPS, FAR, GRID, NEAR, Root, Roots

__all__ = ["DIRECTIONS", "DPS", "EDGE", "ERGO_CRITERION", "FAR", "GRID", "HORIZON_CRITERION", "NEAR",
           "ClockComparison", "Equatorial", "EquatorialChart", "Parameters", "Root", "Roots", "compare_clocks",
           "is_mass_parameter", "parse_number", "plot_survey", "resolve_parameters", "survey"]

HORIZON_CRITERION = "g_tphi**2 - g_tt*g_phiphi = 0 on the equator (Killing horizon), away from the centre g_phiphi = 0"
ERGO_CRITERION = "g_tt = 0 on the equator"


# --------------------------------------------------------------------------- the report


def survey(model: Equatorial, radii: Sequence[float] = (), *, units: str = "geometrized",
           clocks: Sequence[ClockComparison] = ()) -> dict[str, Any]:
    """The full report (the ``--json`` shape), in the chart's units or in SI."""
    si = units == "si"

    def length(x):
        return None if x is None else float(x)

    def angular(x):
        return None if x is None else (U.angular_velocity_to_si(x) if si else float(x))

    def momentum(x):
        return U.angular_momentum_to_si(x) if si else float(x)

    def rate(obj):
        if si and obj.get("exists"):
            obj["clock_offset_us_per_day"] = U.per_day_microseconds(obj["clock_rate"] - 1)
        return obj

    def velocity(obj, key_time):
        if si and obj.get("exists"):
            obj["u"] = {k: (v if k == key_time else U.angular_velocity_to_si(v)) for k, v in obj["u"].items()}
        return obj

    chart = model.chart
    tname = str(chart.time)
    hz = model.horizons
    ergo = model.ergosurface
    marks = model.landmarks
    limit = model.static_limit
    report: dict[str, Any] = {
        "metric": chart.spec.entry,
        "chart": chart.spec.chart,
        "coordinates": chart.coordinate_names,
        "units": {"system": units, **U.UNIT_NAMES[units]},
        "parameters": {k: float(v) for k, v in model.params.exact.items()},
        "given": dict(model.params.given),
        "defaults_used": list(model.params.defaults_used),
        "horizons": {
            "count": len(hz.roots),
            "radii": [q.radius for q in hz.roots],
            "details": [{"radius": q.radius, "multiplicity": q.multiplicity,
                         "angular_velocity": angular(model.horizon_angular_velocity(q.radius))} for q in hz.roots],
            "criterion": HORIZON_CRITERION,
            "method": hz.method,
        },
        "ergosurface": {"radii": [q.radius for q in ergo.roots], "criterion": ERGO_CRITERION,
                        "method": ergo.method},
        "static_limit": length(limit),
        "static_range": [length(x) for x in model.static_range],
        "cosmological_horizon": length(model.cosmological_horizon),
        "static_radius": length(model.static_radius),
        "clock_reference": model.clock_reference[1],
        "photon_orbits": marks["photon_orbits"],
        "marginally_bound": marks["marginally_bound"],
        "isco": marks["isco"],
        "osco": marks["osco"],
        "search": {"from": model.inner_edge, "to": model.outer_edge},
        "circular": [],
        "static_observers": [],
        "zamo": [] if chart.rotating else None,
    }
    for r in radii:
        for d in DIRECTIONS:
            c = model.circular(r, d)
            if c["exists"]:
                c["Omega"] = angular(c["Omega"])
                c["angular_momentum"] = momentum(c["angular_momentum"])
                velocity(c, tname)
            report["circular"].append(rate(c))
        report["static_observers"].append(rate(model.static_observer(r)))
        if chart.rotating:
            z = model.zamo(r)
            if z["exists"]:
                z["angular_velocity"] = angular(z["angular_velocity"])
                velocity(z, tname)
            report["zamo"].append(rate(z))
    if clocks:
        report["clock_comparison"] = [_clock_json(c, si) for c in clocks]
    report["notes"] = list(model.params.notes) + _structure_notes(model) + list(dict.fromkeys(model.notes))
    return report


def _clock_json(c: ClockComparison, si: bool) -> dict[str, Any]:
    parts = {"net": c.net, "gravitational": c.gravitational, "orbital_velocity": c.orbital_velocity,
             "surface_rotation": c.surface_rotation_part}
    out: dict[str, Any] = {
        "orbit_radius": c.orbit_radius, "direction": c.direction, "surface_radius": c.surface_radius,
        "surface_angular_velocity": U.angular_velocity_to_si(c.surface_rotation) if si else c.surface_rotation,
        "j2": c.j2, "orbit_clock_rate": c.orbit_rate, "surface_clock_rate": c.surface_rate,
        "fractional": parts,
    }
    if si:
        out["us_per_day"] = {k: U.per_day_microseconds(v) for k, v in parts.items()}
    return out


def _structure_notes(model: Equatorial) -> list[str]:
    notes = []
    n = len(model.horizons.roots)
    notes.append(f"{n} horizon{'s' if n != 1 else ''} found ({model.horizons.method})")
    if model.chart.azimuth_note:
        notes.append(model.chart.azimuth_note)
    lo, hi = model.region
    if hi is not None:
        notes.append(f"the region described is the stationary one between the horizons r = {lo:.10g} and the "
                     f"cosmological horizon r = {hi:.10g}; there is no asymptotic region")
    low, high = model.static_range
    outer = lo if lo > 0 else None
    if low is not None and outer is not None and low > outer * (1 + 1e-12):
        notes.append(f"ergoregion on the equator between r = {outer:.10g} and r = {low:.10g}: "
                     "no static observers there")
    if model.static_radius is not None:
        notes.append(f"static radius r = {model.static_radius:.10g}: a static observer there is in free fall "
                     "(d g_tt/dr = 0); no circular geodesics exist beyond it")
    notes.append(f"clock rates are relative to {model.clock_reference[1]}")
    if not model.asymptotically_flat:
        notes.append("bound: the energy lies below the outward barrier of the effective potential at the same "
                     "angular momentum (not E < 1: there is no rest energy at infinity to compare with)")
    return notes


# --------------------------------------------------------------------------- plot


def plot_survey(model: Equatorial, report: dict[str, Any], path: str, *, units: str = "geometrized") -> None:
    """A PNG of E, u^t and Omega of circular orbits against r, with the landmarks marked and labelled."""
    try:
        from matplotlib.figure import Figure
    except ImportError:
        raise InputError("--plot", None, "matplotlib is not installed; install the optional extra: "
                                         "pip install 'gravicat[plot]'") from None
    import numpy as np

    si = units == "si"
    lo = model.inner_edge
    marks = [v for key in ("photon_orbits", "marginally_bound", "isco") for v in report[key].values() if v]
    marks += list(report["horizons"]["radii"]) + list(report["ergosurface"]["radii"])
    asked = [c["radius"] for c in report["static_observers"]]
    top = max(marks + asked + [lo + 10 * model.scale]) * 1.6
    start = 0.9 * lo if lo > 0 else model.scale * 1e-3
    r = np.geomspace(start, top, 2000)
    lname = "m" if si else "chart units"
    fig = Figure(figsize=(8, 10), layout="constrained")
    ax_e, ax_t, ax_w = fig.subplots(3, 1, sharex=True)
    colours = {"prograde": "tab:blue", "retrograde": "tab:red"}
    lowest = 1.0
    for d in DIRECTIONS:
        o = model.orbit_np(r, d)
        with np.errstate(all="ignore"):
            timelike = np.isfinite(o["ut"]) & (o["norm"] < 0)
        energy = np.where(timelike, o["energy"], np.nan)
        if np.isfinite(energy).any():
            lowest = min(lowest, float(np.nanmin(energy)))
        ax_e.plot(r, energy, color=colours[d], label=f"{d} circular orbit")
        ax_t.plot(r, np.where(timelike, o["ut"], np.nan), color=colours[d], label=f"{d} circular orbit")
        ax_w.plot(r, np.where(timelike, o["Omega"], np.nan) * (U.C if si else 1), color=colours[d],
                  label=f"{d} Omega")
    m = model.series_np(r)
    with np.errstate(all="ignore"):
        ax_t.plot(r, 1 / np.sqrt(-m[0]), color="k", lw=1, ls="--", label="static observer")
        if model.chart.rotating:
            ax_w.plot(r, -m[3] / m[6] * (U.C if si else 1), color="k", lw=1, ls="--", label="ZAMO omega")
    ax_e.axhline(1.0, color="grey", lw=0.6)
    ax_e.set_ylabel("specific energy E of circular orbits")
    ax_t.set_ylabel("u^t = dt/dtau")
    ax_w.set_ylabel("Omega = dphi/dt" + (" (rad/s)" if si else " (1/length)"))
    ax_w.set_xlabel(f"{report['coordinates']['radial']} ({lname})")
    ax_e.set_ylim(max(0.0, lowest - 0.05 * (1.3 - lowest)), 1.3)
    ax_t.set_ylim(0.9 if lowest < 1 else 0.0, 6.0)
    ax_w.set_xscale("log")
    if top / start > 1e3:  # Omega spans many decades: logarithmic away from zero
        far = model.orbit_np(np.array([top]), "prograde")["Omega"][0] * (U.C if si else 1)
        if np.isfinite(far) and far != 0:
            ax_w.set_yscale("symlog", linthresh=abs(float(far)))
    styles = [(q, "horizon", "k", "-") for q in report["horizons"]["radii"]]
    if report["static_limit"] is not None and report["static_limit"] not in report["horizons"]["radii"]:
        styles.append((report["static_limit"], "static limit", "0.4", "-."))
    for key, label, ls in (("photon_orbits", "photon orbit", ":"), ("marginally_bound", "marg. bound", "--"),
                           ("isco", "ISCO", "-")):
        values = report[key]
        if values["prograde"] is not None and values["prograde"] == values["retrograde"]:
            styles.append((values["prograde"], label, "tab:purple", ls))
            continue
        for d, v in values.items():
            if v is not None:
                styles.append((v, f"{label} ({d[:5]}.)", colours[d], ls))
    styles += [(x, f"r = {x:.6g}", "tab:green", "-") for x in asked]
    for i, (x, label, colour, ls) in enumerate(sorted(styles)):
        if not r[0] <= x <= r[-1]:
            continue
        for ax in (ax_e, ax_t, ax_w):
            ax.axvline(x, color=colour, ls=ls, lw=0.9, alpha=0.8)
        ax_e.annotate(label, (x, 0.98 - 0.3 * (i % 3)), xycoords=("data", "axes fraction"), rotation=90,
                      fontsize=7, va="top", ha="right", color=colour)
    for ax in (ax_e, ax_t, ax_w):
        ax.legend(fontsize=7, loc="lower right" if ax is ax_e else "upper right")
    params = ", ".join(f"{k} = {v:.6g}" for k, v in report["parameters"].items())
    fig.suptitle(f"{report['metric']} / {report['chart']}: circular equatorial orbits ({params})", fontsize=9)
    try:
        fig.savefig(path, format="png", dpi=110)
    except OSError as exc:
        raise InputError("--plot", str(path), f"cannot write the image ({exc.strerror or exc})") from None
