"""Geodesic probe in Hamiltonian form: null geodesics and charged test particles.

With H(x, p) = 1/2 g^ab (p_a - q A_a)(p_b - q A_b) (q = 0 for a geodesic, q the charge per unit mass of a
charged particle in the chart's declared potential A_a) the orbit obeys

    dx^a/dl = dH/dp_a,        dp_a/dl = -dH/dx^a,

the right-hand side of :class:`gravicat.export.hamiltonian.HamiltonianSystem` (the exact inverse metric of
the engine, its derivatives by sympy: the same expressions the ``geodesic-c`` and ``geodesic-numpy``
export targets print). It is integrated by scipy's ``solve_ivp`` (DOP853) with the probe's events
(:mod:`gravicat.physics.probe_stops`), domain edge, horizon of the time coordinate and step and CPU caps.
H is conserved exactly (0 for light, -1/2 for a particle with l its proper time): its change is the
drift reported for every orbit, with that of the canonical momenta p_k of the coordinates neither the
metric nor the potential depends on (E = -p_t, L = p_phi; with a charge, E includes q A_t).

Start of a null geodesic (the affine parameter scaled so that E = -p_t = 1 where t is cyclic):

* ``--velocity``: the spatial components of dx/dl (a direction); dx^t/dl follows from g(k, k) = 0
  (the future root);
* ``--impact b``: p_t = -1, p_phi = b, p_theta = ``--theta-impact`` (default 0), the radial momentum
  from H = 0, moving inwards (``--outgoing``: outwards). At a turning point (H = 0 leaves a root of
  at most 1e-12 of the terms' size) the radial velocity is 0: a circular photon orbit where b is its
  impact parameter.
"""

from __future__ import annotations

import math
import time
from typing import Any

from gravicat.errors import InputError

TURNING = 1e-12  # relative size below which a negative discriminant is a turning point (0)
MIN_SAMPLES = 2000


def _null_direction(g, k, coords):
    """k^t > 0 with g(k, k) = 0, the spatial components given."""
    a = g[0, 0]
    b = 2 * float(g[0, 1:] @ k[1:])
    c = float(k[1:] @ g[1:, 1:] @ k[1:])
    if a == 0:
        roots = [-c / b] if b != 0 else []
    else:
        disc = b * b - 4 * a * c
        if -TURNING * (b * b + abs(4 * a * c)) < disc < 0:
            disc = 0.0
        roots = [] if disc < 0 else [(-b + s * math.sqrt(disc)) / (2 * a) for s in (1, -1)]
    future = [r for r in roots if r > 0]
    if not future:
        raise InputError("--velocity", None, f"no future-directed null direction has these components "
                                             f"(g_{coords[0]}{coords[0]} = {a:.6g} here)")
    return min(future) if a > 0 else max(future)


def _impact_start(ginv, coords, radial, polar, psi, impact, theta_impact, outgoing):
    """Covariant p with p_t = -1, p_psi = b, p_polar = q and the radial one from H = 0."""
    import numpy as np

    n = len(coords)
    p = np.zeros(n)
    p[0], p[psi] = -1.0, impact
    if theta_impact:
        p[polar] = theta_impact
    r = radial
    others = [i for i in range(n) if i != r]
    A = ginv[r, r]
    B = 2 * sum(ginv[r, b] * p[b] for b in others)
    C = sum(ginv[a, b] * p[a] * p[b] for a in others for b in others)
    if A == 0:
        if B == 0:
            raise InputError("--impact", None, f"g^{coords[r]}{coords[r]} = 0 here: the radial momentum is not "
                                               "fixed by H = 0")
        p[r] = -C / B
    else:
        disc = B * B - 4 * A * C
        if -TURNING * (B * B + abs(4 * A * C)) < disc < 0:
            disc = 0.0
        if disc < 0:
            raise InputError("--impact", None, f"no null ray with impact {impact:g}"
                                               + (f" and theta impact {theta_impact:g}" if theta_impact else "")
                                               + f" passes here ({coords[r]} is beyond its turning point)")
        root = math.sqrt(disc)
        p[r] = (-B + root) / (2 * A) if outgoing else (-B - root) / (2 * A)
    return p


def probe_rays(document, exporter, context, *, chart, spec, values, coords, x0, killing, env, psi, orbit,
               velocity, impact, theta_impact, outgoing, charge, tau, rtol, atol, max_steps, max_cpu,
               stops_request) -> dict[str, Any]:
    """A null geodesic (``orbit == "null"``) or a charged timelike orbit (``radial``/``custom`` with a
    charge), in the JSON shape of ``gravicat probe --json``. Called by :func:`gravicat.physics.probe.probe`
    after the common checks (start point, parameters, azimuth)."""
    import numpy as np
    from scipy.integrate import solve_ivp

    from gravicat.export.codegen import provenance
    from gravicat.export.hamiltonian import hamiltonian_system
    from gravicat.format.assign import parse_assignments
    from gravicat.physics import probe_separable
    from gravicat.physics import probe_stops as ps
    from gravicat.physics.probe import EDGE, HORIZON_GROWTH, _Caps, _show, _time_component

    n = len(coords)
    null = orbit == "null"
    system = hamiltonian_system(spec, values, source=document.source, charge=charge or 0.0)
    if system.domain_exprs:
        margins = system.domain_margins(x0)
        outside = [t for (t, _, _), m in zip(system.domain_exprs, margins, strict=True) if not m > 0]
        if outside:
            raise InputError("--from", None, f"the point {_show(coords, x0)} is outside the domain of chart "
                                             f"{chart} ({outside[0]})")
    with np.errstate(all="ignore"):
        g0 = system.metric(x0[:, None])[:, :, 0]
        ginv0 = system.inverse(x0[:, None])[:, :, 0]
    if not (np.all(np.isfinite(g0)) and np.all(np.isfinite(ginv0))):
        raise InputError("--from", None, f"the metric is not finite at {_show(coords, x0)}")
    plan = ps.plan(document, spec, values, coords, x0, stops_request, env)
    if charge:
        fields = set().union(*(e.free_symbols for e in system.potential_exprs.values())) \
            if system.potential_exprs else set()
        killing = [i for i in killing if not any(str(s) == f"x{i}" for s in fields)]
    spatial = {c: i for i, c in enumerate(coords) if i > 0}
    if null:
        if impact is not None:
            if velocity:
                raise InputError("--impact", None, "give --impact or --velocity, not both")
            if 0 not in killing or psi is None or psi not in killing:
                raise InputError("--impact", None, f"impact parameters need a metric independent of {coords[0]} "
                                                   "and of an azimuth (b = L/E)")
            if plan.radial is None:
                raise InputError("--impact", None, "this chart has no radial coordinate to solve H = 0 for")
            if theta_impact and plan.polar is None:
                raise InputError("--theta-impact", None, "this chart has no polar coordinate theta")
            p0 = _impact_start(ginv0, coords, plan.radial, plan.polar, psi, impact, theta_impact, outgoing)
            k0 = ginv0 @ p0
            if not k0[0] > 0:
                raise InputError("--impact", None, f"with E = 1 this ray runs into the past here "
                                                   f"(d{coords[0]}/dl = {k0[0]:.6g})")
        else:
            if theta_impact or outgoing:
                raise InputError("--theta-impact" if theta_impact else "--outgoing", None,
                                 "only with --impact (with --velocity the direction is given in full)")
            if not velocity:
                raise InputError("--velocity", None, "a null geodesic needs a direction: --velocity (e.g. "
                                                     "r=-1,phi=0.01) or --impact B")
            comps = parse_assignments(velocity, "--velocity", spatial, env, kind="spatial coordinate")
            k0 = np.zeros(n)
            for name, value in comps.items():
                k0[spatial[name]] = float(value)
            if not np.any(k0[1:]):
                raise InputError("--velocity", None, "the direction of a null geodesic cannot be zero")
            k0[0] = _null_direction(g0, k0, coords)
            p0 = g0 @ k0
            if 0 in killing and p0[0] < 0:  # affine parameter with E = 1
                p0, k0 = p0 / -p0[0], k0 / -p0[0]
        u_start = k0
        P0 = p0
    else:
        comps = parse_assignments(velocity or "", "--velocity", spatial, env, kind="spatial coordinate") \
            if velocity else {}
        if orbit == "radial" and len(comps) > 1:
            raise InputError("--velocity", None, "a radial orbit has at most one spatial component; "
                                                 "use --orbit custom")
        if orbit == "custom" and not comps:
            raise InputError("--velocity", None, "give the spatial components, e.g. r=0,phi=0.04")
        u_start = np.zeros(n)
        for name, value in comps.items():
            u_start[spatial[name]] = float(value)
        u_start[0] = _time_component(g0, u_start, coords)
        P0 = g0 @ u_start
        A0 = system.potential(x0) if charge else np.zeros(n)
        p0 = P0 + charge * A0
    if tau is None:
        from gravicat.physics.probe import DEFAULT_TAU

        tau = DEFAULT_TAU
    if not (tau > 0 and math.isfinite(tau)):
        raise InputError("--tau", None, f"{tau} is not a positive {'affine parameter' if null else 'proper time'}")

    def rhs(_t, y):
        dx, dp = system.rhs(y[:n], y[n:])
        return np.concatenate([dx, dp])

    def velocity_of(y):
        return system.rhs(y[:n], y[n:])[0]

    evs, stops, turning = ps.events(plan, velocity_of, n)
    n_stops = len(stops)
    extra = evs[n_stops:]  # turning points
    evs = evs[:n_stops]
    edge = EDGE * (1.0 + float(np.max(np.abs(x0))))
    leaves_at = horizon_at = None
    if system.domain_exprs:
        def leaves(_t, y):
            with np.errstate(all="ignore"):
                m = float(np.min(system.domain_margins(y[:n])))
            return m - edge if math.isfinite(m) else -1.0

        leaves.terminal, leaves.direction = True, -1
        leaves_at = len(evs)
        evs.append(leaves)
    growth = HORIZON_GROWTH * max(1.0, abs(float(u_start[0])))

    def horizon(_t, y):
        with np.errstate(all="ignore"):
            value = abs(float(velocity_of(y)[0]))
        return growth - value if math.isfinite(value) else -1.0

    horizon.terminal, horizon.direction = True, -1
    horizon_at = len(evs)
    evs.append(horizon)
    caps = _Caps(max_steps, max_cpu, tau)
    caps_at = len(evs)
    evs.append(caps)
    turn_at = len(evs)
    evs.extend(extra)
    started = time.perf_counter()
    with np.errstate(all="ignore"):
        sol = solve_ivp(rhs, (0.0, tau), np.concatenate([x0, p0]), method="DOP853", rtol=rtol, atol=atol,
                        events=evs, dense_output=True)
    seconds = time.perf_counter() - started
    lam = "lambda" if null else "tau"
    x_end = sol.y[:n, -1]
    stop = ps.fired(sol, 0, stops)
    if sol.status == -1:
        termination, detail = "failed", f"{sol.message} (at {lam} = {sol.t[-1]:.12g}, {_show(coords, x_end)})"
    elif sol.status == 1 and caps.reason is not None and len(sol.t_events[caps_at]):
        termination = caps.reason
        what = (f"the step cap of {max_steps} steps" if caps.reason == "step-limit"
                else f"the CPU-time cap of {max_cpu:g} s")
        option = "--max-steps" if caps.reason == "step-limit" else "--max-cpu"
        detail = (f"stopped by {what} at {lam} = {sol.t[-1]:.12g} of {tau:.12g}, {_show(coords, x_end)}; "
                  f"raise {option} or shorten --tau")
    elif stop is not None:
        termination, detail = stop.termination, ps.detail(stop, coords, float(sol.t[-1]), x_end, lam)
    elif sol.status == 1 and len(sol.t_events[horizon_at]):
        termination = "horizon"
        detail = (f"approached a horizon: d{coords[0]}/d{lam} grew beyond {HORIZON_GROWTH:g} times its start "
                  f"value at {lam} = {sol.t[-1]:.12g}, {_show(coords, x_end)} (the time coordinate is singular "
                  f"there: a horizon, or a curvature singularity)")
    elif sol.status == 1 and leaves_at is not None and len(sol.t_events[leaves_at]):
        k = int(np.argmin(system.domain_margins(x_end)))
        termination = "domain-edge"
        detail = (f"reached the edge of the chart's domain ({system.domain_exprs[k][0]}) at {lam} = "
                  f"{sol.t[-1]:.12g}, {_show(coords, x_end)}")
    else:
        termination, detail = "completed", f"integrated to {lam} = {sol.t[-1]:.12g}"
    taus = np.union1d(sol.t, np.linspace(0.0, sol.t[-1], MIN_SAMPLES)) if sol.sol is not None else sol.t
    states = sol.sol(taus) if sol.sol is not None else sol.y
    xs, pps = states[:n], states[n:]
    with np.errstate(all="ignore"):
        hs = system.hamiltonian(xs, pps)
        k_end = velocity_of(sol.y[:, -1])
    h0 = float(system.hamiltonian(x0, p0))
    conserved = {}
    for i in killing:
        series = pps[i]
        change = np.max(np.abs(series - series[0]))
        conserved[coords[i]] = {"initial": float(series[0]), "max_abs_change": float(change),
                                "max_rel_change": float(change / abs(series[0])) if series[0] != 0 else None}
    drift: dict[str, Any] = {"hamiltonian": float(np.max(np.abs(hs - h0))), "conserved": conserved}
    drift["normalisation"] = float(np.max(np.abs(2 * hs))) if null else float(np.max(np.abs(2 * hs + 1)))
    if 0 in killing:
        drift["energy"] = conserved[coords[0]]["max_rel_change"]
    if psi is not None and psi in killing:
        drift["angular_momentum"] = conserved[coords[psi]]["max_rel_change"]
    separation = None if charge else probe_separable.report(system, plan.radial, plan.polar, x0, xs, pps,
                                                             0.0 if null else 1.0)
    if separation is not None:
        drift["separation"] = separation[1]
    prov = provenance(document, context, exporter, chart)
    out: dict[str, Any] = {
        "metric": document.id,
        "chart": chart,
        "revision": prov.revision,
        "status": prov.status,
        "code": "Hamiltonian form: exact inverse metric from the engine, derivatives by sympy "
                "(the expressions of the geodesic-numpy target)",
        "parameters": dict(system.values),
        "orbit": orbit,
        "kind": "null" if null else "timelike",
        "parameter": "affine (E = 1)" if null and 0 in killing else ("affine" if null else "proper time"),
        "azimuth": coords[psi] if psi is not None else None,
        "start": dict(zip(coords, map(float, x0), strict=True)),
        "velocity": dict(zip(coords, map(float, u_start), strict=True)),
        "momentum": dict(zip(coords, map(float, p0), strict=True)),
        "end": dict(zip(coords, map(float, x_end), strict=True)),
        "end_velocity": dict(zip(coords, map(float, k_end), strict=True)),
        "end_momentum": dict(zip(coords, map(float, sol.y[n:, -1]), strict=True)),
        "extent": {c: [float(np.min(xs[i])), float(np.max(xs[i]))] for i, c in enumerate(coords)},
        "tau_requested": float(tau),
        "tau": float(sol.t[-1]),
        "termination": termination,
        "detail": detail,
        "steps": int(len(sol.t) - 1),
        "samples": int(len(taus)),
        "rhs_evaluations": int(sol.nfev),
        "integrator": {"method": "DOP853", "rtol": rtol, "atol": atol, "max_steps": max_steps,
                       "max_cpu_seconds": max_cpu},
        "stops": [{"termination": s.termination, "coordinate": coords[s.index], "value": s.value,
                   "reason": s.reason} for s in stops],
        "horizons": plan.horizons,
        "turning_points": ps.turning_points(sol, turn_at, turning, coords),
        "drift": drift,
        "seconds": round(seconds, 3),
    }
    if separation is not None:
        out["separation"] = separation[0]
    if charge:
        out["charge"] = float(charge)
        out["kinetic_momentum"] = dict(zip(coords, map(float, P0), strict=True))
    if null and impact is not None:
        out["impact"] = {"b": float(impact), "theta": float(theta_impact or 0.0),
                         "direction": "outgoing" if outgoing else "ingoing"}
    if psi is not None:
        out["turns"] = float(abs(x_end[psi] - x0[psi]) / (2 * math.pi))
    if 0 in killing:
        out["energy"] = -conserved[coords[0]]["initial"]
    if psi is not None and psi in killing:
        out["angular_momentum"] = conserved[coords[psi]]["initial"]
    return out
