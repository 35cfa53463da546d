"""Geodesic probe: integrate a timelike geodesic with the exported Python code and measure drift.

What a simulation relies on, measured on the exported code itself: the probe loads the functions
``gravicat export --to python`` writes for the chart (the same generated code, compiled without the
file's header, docstring and data text, so no catalogue text is ever executed: see
:func:`exported_module`), and integrates

    dx^a/dtau = u^a,    du^a/dtau = -Gamma^a_bc u^b u^c

with scipy's ``solve_ivp`` (DOP853, rtol = atol = 1e-12 by default) over a proper time, using the
module's ``christoffel``. At every step and on the dense output in between (at least 2000
points, 64 per orbit) it measures the drift of the normalisation g(u, u) + 1 and of the
momenta p_k = g_ka u^a conjugate to the coordinates the metric does not depend on (Killing
vectors d/dx^k): the energy E = -p_t when the time coordinate is one of them and the angular
momentum L = p_phi for the azimuth. The integration stops just before the orbit reaches the
edge of the chart's domain (a horizon, an axis: an event on the domain margins, 1e-6 inside), on
approach to a horizon where the time coordinate is singular (u^t beyond 1e6 times its start value),
and at a cap on the integrator's steps (default 200000) or CPU time (default 60 s). The stopping events
of :mod:`gravicat.physics.probe_stops` (a radius, escape beyond a radius, approach to a horizon the orbits
physics knows, a coordinate range) and the turning points of the radial and polar coordinates are shared
with the Hamiltonian integration of null geodesics and charged particles
(:mod:`gravicat.physics.probe_rays`).

Orbits:

* ``circular``: u = u^t (d_t + Omega d_phi) at the start point; Omega solves
  d_i g_tt + 2 Omega d_i g_tphi + Omega^2 d_i g_phiphi = 0 for every coordinate x^i the metric
  depends on (the geodesic equation for such a velocity), prograde Omega > 0 or retrograde
  Omega < 0; u^t = 1/sqrt(-(g_tt + 2 Omega g_tphi + Omega^2 g_phiphi)).
* ``radial``: every spatial component zero (released from rest in the chart), or the single
  component given with ``velocity``;
* ``custom``: the spatial components given with ``velocity``.

In every case u^t is fixed by g(u, u) = -1 (the future root, u^t > 0).
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping, Sequence
from typing import Any

from gravicat.checks import ExportContext
from gravicat.errors import InputError
from gravicat.physics import probe_stops
from gravicat.physics.probe_stops import StopRequest

ORBITS = ("circular", "radial", "custom", "null")
DIRECTIONS = ("prograde", "retrograde")
DEFAULT_ORBITS = 10
DEFAULT_TAU = 100.0
EDGE = 1e-6  # stop this close (relative to 1 + max|x0|) to the edge of the chart's domain
MIN_SAMPLES, SAMPLES_PER_ORBIT, MAX_SAMPLES = 2000, 64, 20000  # points where the drifts are measured
MAX_STEPS = 200_000  # default cap on the integrator's accepted steps
MAX_CPU = 60.0  # default cap on the CPU seconds of the integration
HORIZON_GROWTH = 1e6  # stop when u^t exceeds this many times its start value: a horizon of the time coordinate
LIMITS = {"step-limit", "cpu-limit"}  # terminations that leave the requested integration unfinished


class _Caps:
    """A terminal event of ``solve_ivp`` that stops the integration after ``max_steps`` accepted steps or
    ``max_cpu`` CPU seconds. It is called at the start point and once per accepted step; when a cap is
    reached at the end of a step it becomes ``t_stop - t`` with ``t_stop`` that step's end, so the event's
    root, and the end of the solution, is exactly the last accepted step: a cap of N steps reports N.
    A cap reached by the step that ends the integration (at ``t_end``) does not stop it: it is complete."""

    def __init__(self, max_steps: int, max_cpu: float, t_end: float = math.inf):
        self.max_steps, self.max_cpu, self.t_end = max_steps, max_cpu, t_end
        self.calls, self.t_stop, self.reason = 0, None, None
        self.cpu0 = time.process_time()
        self.terminal, self.direction = True, -1

    def __call__(self, t, _y):
        if self.t_stop is not None:
            return self.t_stop - t
        self.calls += 1
        if self.calls == 1 or t == self.t_end:  # the start point; or the last step, already complete
            return 1.0
        if self.calls > self.max_steps:  # after step k, calls = k + 1
            self.reason = "step-limit"
        elif time.process_time() - self.cpu0 > self.max_cpu:
            self.reason = "cpu-limit"
        if self.reason is None:
            return 1.0
        self.t_stop = t
        return 0.0


_MODULES: dict = {}


def exported_module(document, exporter, context: ExportContext | Mapping[str, Any]):
    """The functions of the ``python`` export of this chart as a module (cached per revision and chart).

    No exported text is executed: the code comes from :func:`gravicat.export.python_code.build`, the
    generator the ``python`` exporter writes its functions with, and :func:`gravicat.export.python_code.load`
    compiles only that function code (printed from sympy expressions, identifiers checked) and sets the
    data (entry, title, coordinates, domain...) as values. No title, note, range or other catalogue text is
    ever compiled, so a hostile entry cannot run code here. ``exporter`` is recorded for provenance."""
    from gravicat.export.python_code import build, load

    context = ExportContext.coerce(context)
    key = (document.hash, context.chart, exporter.name, exporter.version)
    if key not in _MODULES:
        built = build(document, context.replace(params=None, allow_unverified=True), exporter)
        module = load(built, f"gravicat_probe_{document.id.replace('-', '_')}")
        if len(_MODULES) > 16:
            _MODULES.clear()
        _MODULES[key] = module
    return _MODULES[key]


def _killing(spec) -> list[int]:
    """Indices of the coordinates the metric does not depend on."""
    free = set().union(*(e.free_symbols for e in spec.metric))
    return [i for i, c in enumerate(spec.coords) if c not in free]


def _float_values(values: Mapping[Any, Any]) -> dict[str, float]:
    return {str(k): float(v) for k, v in values.items()}


def probe(document, exporter, *, chart: str | None = None, params=None, start: str = "", orbit: str = "circular",
          direction: str = "prograde", velocity: str | None = None, azimuth: str | None = None,
          tau: float | None = None, orbits: float | None = None, rtol: float = 1e-12, atol: float = 1e-12,
          max_steps: int = MAX_STEPS, max_cpu: float = MAX_CPU,
          context: ExportContext | Mapping[str, Any] | None = None, params_option: str = "--set",
          impact: float | None = None, theta_impact: float | None = None, outgoing: bool = False,
          charge: float | None = None, stop_radius: float | None = None, escape_radius: float | None = None,
          stop_below: Sequence[str] = (), stop_above: Sequence[str] = (),
          cross_horizons: bool = False) -> dict[str, Any]:
    """Integrate one orbit and report drifts (the JSON shape of ``gravicat probe --json``).

    A timelike geodesic (``circular``, ``radial``, ``custom``) is integrated here with the exported
    Christoffel symbols; a null geodesic (``orbit="null"``, with ``velocity`` or ``impact``) or a charged
    particle (``charge``, radial or custom) in Hamiltonian form by :mod:`gravicat.physics.probe_rays`.
    Both stop on the events of :mod:`gravicat.physics.probe_stops` (``stop_radius``, ``escape_radius``,
    ``stop_below``/``stop_above`` NAME=VALUE texts, a horizon known from the orbits physics unless
    ``cross_horizons``).

    The integration stops at the edge of the chart's domain, on approach to a horizon of the time coordinate
    (u^t beyond HORIZON_GROWTH times its start value), after ``max_steps`` accepted steps or after ``max_cpu``
    CPU seconds; ``termination`` says which (``step-limit`` and ``cpu-limit`` leave it unfinished).

    ``params``: None (the file's defaults), ``NAME=VALUE`` option text, a list of such texts (one per
    repetition of ``--set``) or a mapping name -> value; ``start`` and ``velocity`` are ``NAME=VALUE``
    texts too. All are read by the one parser, :mod:`gravicat.format.assign`; its errors name
    ``params_option``, ``--from`` or ``--velocity``."""
    import numpy as np
    from scipy.integrate import solve_ivp

    from gravicat.export.codegen import chart_name, numeric_parameters, provenance
    from gravicat.format.assign import parse_assignments
    from gravicat.format.metricfile import build_chart

    if orbit not in ORBITS:
        raise InputError("--orbit", None, f"'{orbit}' is not one of {', '.join(ORBITS)}")
    if direction not in DIRECTIONS:
        raise InputError("--direction", None, f"'{direction}' is not one of {', '.join(DIRECTIONS)}")
    for name, value in (("--rtol", rtol), ("--atol", atol)):
        if not (0 < value < 1):
            raise InputError(name, None, f"{value} is not a tolerance between 0 and 1")
    if not (isinstance(max_steps, int) and max_steps >= 1):
        raise InputError("--max-steps", None, f"{max_steps} is not a positive number of steps")
    if not (max_cpu > 0 and math.isfinite(max_cpu)):
        raise InputError("--max-cpu", None, f"{max_cpu} is not a positive number of CPU seconds")
    context = ExportContext.coerce(context or ExportContext(revision=document.hash))
    chart = chart_name(document, chart)
    context = context.replace(chart=chart)
    spec = build_chart(document, chart)
    if spec.functions:
        raise InputError(document.source, f"charts.{chart}.functions",
                         f"the metric depends on the arbitrary function(s) {', '.join(map(str, spec.functions))}; "
                         f"the probe needs numeric code")
    if isinstance(params, (list, tuple)):  # repetitions of --set: the same as one comma-separated text
        params = ",".join(params)
    values = numeric_parameters(document, spec, params, params_option)
    pvals = _float_values(values)
    coords = [str(c) for c in spec.coords]
    n = len(coords)
    killing = _killing(spec)
    env = {str(k): v for k, v in values.items()}
    given = parse_assignments(start, "--from", {c: c for c in coords}, env, kind="coordinate of this chart")
    missing = [coords[i] for i in range(n) if i not in killing and coords[i] not in given]
    if missing:
        raise InputError("--from", missing[0], f"give a value for {missing[0]} (the metric depends on it)")
    x0 = np.array([float(given.get(c, 0)) for c in coords])
    if not math.isfinite(float(charge or 0.0)):
        raise InputError("--charge", None, f"{charge} is not a finite charge per unit mass")
    if charge and orbit in ("circular", "null"):
        raise InputError("--charge", None, "a charged particle is followed on a radial or custom orbit "
                                           "(circular orbits are geodesics; light carries no charge)")
    if orbit != "null":
        for name, value in (("--impact", impact), ("--theta-impact", theta_impact), ("--outgoing", outgoing)):
            if value:
                raise InputError(name, None, "only for a null geodesic (--orbit null)")
    request = StopRequest(stop_radius=stop_radius, escape_radius=escape_radius, below=tuple(stop_below or ()),
                          above=tuple(stop_above or ()), cross_horizons=cross_horizons)
    if orbit == "null" or charge:
        from gravicat.physics.probe_rays import probe_rays

        if orbits is not None:
            raise InputError("--orbits", None, "only a circular orbit is counted in orbits; give --tau")
        if azimuth:
            psi = _azimuth(coords, killing, azimuth)
        else:
            try:
                psi = _azimuth(coords, killing, None)
            except InputError:
                psi = None
        return probe_rays(document, exporter, context, chart=chart, spec=spec, values=values, coords=coords, x0=x0,
                          killing=killing, env=env, psi=psi, orbit=orbit, velocity=velocity, impact=impact,
                          theta_impact=theta_impact, outgoing=outgoing, charge=float(charge or 0.0), tau=tau,
                          rtol=rtol, atol=atol, max_steps=max_steps, max_cpu=max_cpu, stops_request=request)
    module = exported_module(document, exporter, context)
    order = tuple(module.PARAMETERS)
    p = tuple(pvals[name] for name in order)
    if not bool(module.in_domain(x0, p)):
        raise InputError("--from", None, f"the point {_show(coords, x0)} is outside the domain of chart {chart} "
                                         f"({'; '.join(module.DOMAIN)})")
    g0 = module.metric(x0, p)
    spatial = {c: i for i, c in enumerate(coords) if i > 0}
    result: dict[str, Any] = {}
    if orbit == "circular" and 0 not in killing:
        raise InputError("--orbit", None, f"circular orbits need a metric independent of {coords[0]} "
                                          f"(chart {chart} is not stationary in these coordinates)")
    if orbit == "circular" or azimuth:
        psi = _azimuth(coords, killing, azimuth)
    else:
        try:
            psi = _azimuth(coords, killing, None)
        except InputError:  # no azimuth: L is not reported
            psi = None
    if orbit == "circular":
        if velocity:
            raise InputError("--velocity", None, "a circular orbit fixes the velocity; use --orbit custom")
        u0, omega = _circular(module, x0, p, g0, killing, psi, direction, coords)
        result["circular"] = {f"u^{coords[0]}": float(u0[0]), f"u^{coords[psi]}": float(u0[psi]),
                              "Omega": float(omega), "direction": direction}
    else:
        comps = parse_assignments(velocity or "", "--velocity", spatial, env, kind="spatial coordinate") \
            if velocity else {}
        if orbit == "radial" and len(comps) > 1:
            raise InputError("--velocity", None, "a radial orbit has at most one spatial component; "
                                                 "use --orbit custom")
        if orbit == "custom" and not comps:
            raise InputError("--velocity", None, "give the spatial components, e.g. r=0,phi=0.04")
        u0 = np.zeros(n)
        for name, value in comps.items():
            u0[spatial[name]] = float(value)
        u0[0] = _time_component(g0, u0, coords)
    if tau is None:
        if orbit == "circular":
            count = DEFAULT_ORBITS if orbits is None else orbits
            tau = count * 2 * math.pi / abs(u0[psi])
        elif orbits is not None:
            raise InputError("--orbits", None, "only a circular orbit is counted in orbits; give --tau")
        else:
            tau = DEFAULT_TAU
    elif orbits is not None:
        raise InputError("--orbits", None, "give --tau or --orbits, not both")
    if not (tau > 0 and math.isfinite(tau)):
        raise InputError("--tau", None, f"{tau} is not a positive proper time")

    def rhs(_t, y):
        gam = module.christoffel(y[:n], p)
        u = y[n:]
        return np.concatenate([u, -(gam @ u) @ u])

    plan = probe_stops.plan(document, spec, values, coords, x0, request, env)
    events, stops, turning = probe_stops.events(plan, lambda y: y[n:], n)
    extra = events[len(stops):]  # turning points (not terminal): after the terminal events
    events = events[:len(stops)]
    edge = EDGE * (1.0 + float(np.max(np.abs(x0))))
    if len(module.DOMAIN):
        def leaves(_t, y):
            return float(np.min(module.domain_margins(y[:n], p))) - edge

        leaves.terminal, leaves.direction = True, -1
        events.append(leaves)
    ut_limit = HORIZON_GROWTH * max(1.0, abs(float(u0[0])))

    def horizon(_t, y):
        value = abs(y[n])
        return ut_limit - value if math.isfinite(value) else -1.0

    horizon.terminal, horizon.direction = True, -1
    horizon_at = len(events)
    events.append(horizon)
    caps = _Caps(max_steps, max_cpu, tau)
    caps_at = len(events)
    events.append(caps)
    turn_at = len(events)
    events.extend(extra)
    started = time.perf_counter()
    with np.errstate(all="ignore"):
        sol = solve_ivp(rhs, (0.0, tau), np.concatenate([x0, u0]), method="DOP853", rtol=rtol, atol=atol,
                        events=events or None, dense_output=True)
    seconds = time.perf_counter() - started
    stop = probe_stops.fired(sol, 0, stops)
    if sol.status == -1:
        termination, detail = "failed", f"{sol.message} (at tau = {sol.t[-1]:.12g}, {_show(coords, sol.y[:n, -1])})"
    elif sol.status == 1 and caps.reason is not None and len(sol.t_events[caps_at]):
        termination = caps.reason
        what = (f"the step cap of {max_steps} steps" if caps.reason == "step-limit"
                else f"the CPU-time cap of {max_cpu:g} s")
        option = "--max-steps" if caps.reason == "step-limit" else "--max-cpu"
        detail = (f"stopped by {what} at tau = {sol.t[-1]:.12g} of {tau:.12g}, {_show(coords, sol.y[:n, -1])}; "
                  f"raise {option} or shorten --tau")
    elif stop is not None:
        termination = stop.termination
        detail = probe_stops.detail(stop, coords, float(sol.t[-1]), sol.y[:n, -1])
    elif sol.status == 1 and len(sol.t_events[horizon_at]):
        termination = "horizon"
        detail = (f"approached a horizon: u^{coords[0]} = {abs(sol.y[n, -1]):.6g} grew beyond {HORIZON_GROWTH:g} "
                  f"times its start value at tau = {sol.t[-1]:.12g}, {_show(coords, sol.y[:n, -1])} "
                  f"(the time coordinate is singular there)")
    elif sol.status == 1:
        k = int(np.argmin(module.domain_margins(sol.y[:n, -1], p)))
        termination = "domain-edge"
        detail = (f"reached the edge of the chart's domain ({module.DOMAIN[k]}) at tau = {sol.t[-1]:.12g}, "
                  f"{_show(coords, sol.y[:n, -1])}")
    else:
        termination, detail = "completed", f"integrated to tau = {sol.t[-1]:.12g}"
    # diagnostics at every step and on the dense output in between
    count = int(min(MAX_SAMPLES, max(MIN_SAMPLES, SAMPLES_PER_ORBIT * (orbits or 0))))
    taus = np.union1d(sol.t, np.linspace(0.0, sol.t[-1], count)) if sol.sol is not None else sol.t
    states = sol.sol(taus) if sol.sol is not None else sol.y
    xs, us = states[:n].T, states[n:].T
    with np.errstate(all="ignore"):
        gs = module.metric(xs, p)
    norm = np.einsum("ka,kab,kb->k", us, gs, us) + 1.0
    momenta = np.einsum("kab,kb->ka", gs, us)
    conserved = {}
    for i in killing:
        series = momenta[:, i]
        change = np.max(np.abs(series - series[0]))
        conserved[coords[i]] = {"initial": float(series[0]), "max_abs_change": float(change),
                                "max_rel_change": float(change / abs(series[0])) if series[0] != 0 else None}
    drift: dict[str, Any] = {"normalisation": float(np.max(np.abs(norm))), "conserved": conserved}
    if 0 in killing:
        drift["energy"] = conserved[coords[0]]["max_rel_change"]
    if psi is not None and psi in killing:
        drift["angular_momentum"] = conserved[coords[psi]]["max_rel_change"]
    if orbit == "circular":
        drift["coordinates"] = {coords[i]: float(np.max(np.abs(xs[:, i] - x0[i])) / max(abs(x0[i]), 1e-300))
                                for i in range(n) if i not in killing}
        elapsed = xs[-1, 0] - xs[0, 0]
        result["circular"]["Omega_measured"] = float((xs[-1, psi] - xs[0, psi]) / elapsed) if elapsed else None
        result["circular"]["orbits"] = float(abs(xs[-1, psi] - xs[0, psi]) / (2 * math.pi))
    separation = None
    if plan.polar is not None and np.ptp(xs[:, plan.polar]) > 1e-9 * (1.0 + abs(float(x0[plan.polar]))):
        from gravicat.export.hamiltonian import hamiltonian_system
        from gravicat.physics import probe_separable

        try:  # the exact inverse metric; beyond its budget the orbit is reported without the constant
            system = hamiltonian_system(spec, values, source=document.source)
        except InputError:
            system = None
        if system is not None:
            separation = probe_separable.report(system, plan.radial, plan.polar, x0, xs.T, momenta.T, 1.0)
        if separation is not None:
            drift["separation"] = separation[1]
    prov = provenance(document, context, exporter, chart)
    out = {
        "metric": document.id,
        "chart": chart,
        "revision": prov.revision,
        "status": prov.status,
        "code": f"exporter {exporter.name} {exporter.version}, inverse {module.INVERSE}",
        "parameters": {name: pvals[name] for name in pvals},
        "orbit": orbit,
        "kind": "timelike",
        "parameter": "proper time",
        "azimuth": coords[psi] if psi is not None else None,
        "start": dict(zip(coords, map(float, x0), strict=True)),
        "velocity": dict(zip(coords, map(float, u0), strict=True)),
        "momentum": dict(zip(coords, map(float, g0 @ u0), strict=True)),
        "end": dict(zip(coords, map(float, sol.y[:n, -1]), strict=True)),
        "end_velocity": dict(zip(coords, map(float, sol.y[n:, -1]), strict=True)),
        "end_momentum": dict(zip(coords, map(float, module.metric(sol.y[:n, -1], p) @ sol.y[n:, -1]), strict=True)),
        "extent": {c: [float(np.min(xs[:, i])), float(np.max(xs[:, i]))] for i, c in enumerate(coords)},
        **result,
        "tau_requested": float(tau),
        "tau": float(sol.t[-1]),
        "termination": termination,
        "detail": detail,
        "steps": int(len(sol.t) - 1),
        "samples": int(len(taus)),
        "rhs_evaluations": int(sol.nfev),
        "integrator": {"method": "DOP853", "rtol": rtol, "atol": atol, "max_steps": max_steps,
                       "max_cpu_seconds": max_cpu},
        "stops": [{"termination": st.termination, "coordinate": coords[st.index], "value": st.value,
                   "reason": st.reason} for st in stops],
        "horizons": plan.horizons,
        "turning_points": probe_stops.turning_points(sol, turn_at, turning, coords),
        "drift": drift,
        "seconds": round(seconds, 3),
    }
    if separation is not None:
        out["separation"] = separation[0]
    if 0 in killing:
        out["energy"] = -conserved[coords[0]]["initial"]
    if psi is not None:
        out["angular_momentum"] = conserved[coords[psi]]["initial"]
    return out


def _show(coords, x) -> str:
    return ", ".join(f"{c}={v:g}" for c, v in zip(coords, x, strict=True))


def _azimuth(coords, killing, name) -> int:
    if name is not None:
        if name not in coords[1:]:
            raise InputError("--azimuth", name, f"'{name}' is not a spatial coordinate ({', '.join(coords[1:])})")
        i = coords.index(name)
        if i not in killing:
            raise InputError("--azimuth", name, f"the metric depends on {name}: it is not an azimuth")
        return i
    candidates = [i for i in killing if i > 0]
    for i in candidates:
        if coords[i] in ("phi", "varphi"):
            return i
    if len(candidates) == 1:
        return candidates[0]
    raise InputError("--azimuth", None, "name the azimuthal coordinate (the metric must not depend on it); "
                                        f"candidates: {', '.join(coords[i] for i in candidates) or 'none'}")


def _time_component(g, u, coords) -> float:
    """u^t > 0 with g(u, u) = -1, the spatial components given."""
    a = g[0, 0]
    b = 2 * float(g[0, 1:] @ u[1:])
    c = float(u[1:] @ g[1:, 1:] @ u[1:]) + 1.0
    if a == 0:
        roots = [-c / b] if b != 0 else []
    else:
        disc = b * b - 4 * a * c
        roots = [] if disc < 0 else [(-b + s * math.sqrt(disc)) / (2 * a) for s in (1, -1)]
    future = [r for r in roots if r > 0]
    if not future:
        raise InputError("--velocity", None, f"no future-directed timelike velocity has these components "
                                             f"(g_{coords[0]}{coords[0]} = {a:.6g} here)")
    return min(future) if a > 0 else max(future)


def _circular(module, x0, p, g0, killing, psi, direction, coords):
    """(u0, Omega) of the circular geodesic through x0, or a one-line error."""
    import numpy as np

    dg = module.metric_derivatives(x0, p)
    n = len(coords)
    others = [i for i in range(1, n) if i not in killing]
    eqs = [(dg[i, psi, psi], 2 * dg[i, 0, psi], dg[i, 0, 0]) for i in others]
    scale = max((max(abs(c) for c in eq) for eq in eqs), default=0.0)
    if scale == 0:
        raise InputError("--from", None, "the metric does not change here: every Omega is a geodesic "
                                         "(flat chart?); use --orbit custom")
    main = max(range(len(eqs)), key=lambda k: max(abs(c) for c in eqs[k]))
    a, b, c = eqs[main]
    if abs(a) <= 1e-14 * scale:
        roots = [-c / b] if abs(b) > 1e-14 * scale else []
    else:
        disc = b * b - 4 * a * c
        roots = [] if disc < 0 else [(-b + s * math.sqrt(disc)) / (2 * a) for s in (1, -1)]
    found = []
    for om in roots:
        ok = all(abs(e[0] * om * om + e[1] * om + e[2]) <= 1e-8 * scale * max(1.0, om * om) for e in eqs)
        v = g0[0, 0] + 2 * om * g0[0, psi] + om * om * g0[psi, psi]
        if ok and v < 0 and ((om > 0) == (direction == "prograde")) and om != 0:
            found.append((om, v))
    if not found:
        where = _show(coords, x0)
        raise InputError("--from", None, f"no timelike {direction} circular geodesic at {where} "
                                         f"(inside the photon orbit, off the plane of symmetry, or no such orbit)")
    om, v = found[0]
    u = np.zeros(n)
    u[0] = 1.0 / math.sqrt(-v)
    u[psi] = om * u[0]
    return u, om
