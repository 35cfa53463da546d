"""Stopping events and turning points of the geodesic probe, shared by its two integrations.

The probe integrates one orbit with scipy's ``solve_ivp``: a timelike geodesic with the Christoffel
symbols of the exported python code (:mod:`gravicat.physics.probe`), or a null geodesic or a charged
particle in Hamiltonian form (:mod:`gravicat.physics.probe_rays`). Both stop on the same events, each
a terminal event of ``solve_ivp`` (so the end point is located on the dense output, not at the end of
a step) and each reported as the end reason:

* ``stop-radius``: the radial coordinate falls to ``--stop-radius R``;
* ``escape``: it rises to ``--escape-radius R`` (moving outwards, by the direction of the crossing);
* ``horizon``: it comes within a relative HORIZON_MARGIN of a horizon the orbits physics finds
  (:class:`gravicat.physics.equatorial.Equatorial`: the roots of the horizon function of a stationary,
  axisymmetric chart) below the start, or of a cosmological horizon above it; ``--cross-horizons``
  turns this off (a horizon-penetrating chart may follow the orbit inside);
* ``range``: a coordinate leaves the interval given with ``--stop-below NAME=VALUE`` and
  ``--stop-above NAME=VALUE``.

The radial coordinate is the one of the equatorial model (the same one ``gravicat orbits`` uses), or
a coordinate named ``r`` or ``rho`` in other charts. Turning points of the radial and polar coordinates
(where their velocity changes sign) are non-terminal events, located on the dense output too.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

from gravicat.errors import InputError

HORIZON_MARGIN = 1e-3  # stop at r_h (1 + HORIZON_MARGIN) (below the start), r_c (1 - HORIZON_MARGIN) (above)
MAX_TURNING_POINTS = 200  # listed in the report (the count is always given)


@dataclass
class StopRequest:
    """What the user asked for (option texts are parsed by :func:`plan`)."""

    stop_radius: float | None = None
    escape_radius: float | None = None
    below: Sequence[str] = ()  # NAME=VALUE texts (repeatable option)
    above: Sequence[str] = ()
    cross_horizons: bool = False


@dataclass
class Stop:
    """One terminal event: coordinate ``index`` crosses ``value`` downwards (-1) or upwards (+1)."""

    termination: str  # stop-radius | escape | horizon | range
    index: int
    value: float
    direction: int
    reason: str  # what the value is, for the detail line


@dataclass
class Plan:
    stops: list[Stop] = field(default_factory=list)
    radial: int | None = None
    polar: int | None = None
    horizons: list[float] = field(default_factory=list)  # from the orbits physics (empty: not known)
    horizon_note: str | None = None  # why no horizon is known, when none is


def _model(document, spec, values):
    """The equatorial model of the chart bound to ``values`` (name -> number), or (None, reason)."""
    from gravicat.physics.equatorial import EquatorialChart

    try:
        chart = EquatorialChart(spec, document.chart_names)
        return chart, chart.bind({str(k): v for k, v in values.items()}), None
    except InputError as exc:
        return None, None, str(exc)


def plan(document, spec, values, coords: list[str], x0, request: StopRequest, env: dict) -> Plan:
    """The stops of this probe; one-line errors name the option (a stop the start already violates,
    a radius without a radial coordinate)."""
    from gravicat.format.assign import parse_assignments

    out = Plan()
    chart, model, why = _model(document, spec, values)
    if chart is not None:
        out.radial = coords.index(str(chart.radial))
        out.polar = coords.index(str(chart.polar)) if chart.polar is not None else None
    else:
        out.radial = next((coords.index(c) for c in ("r", "rho") if c in coords), None)
        out.polar = coords.index("theta") if "theta" in coords else None
        out.horizon_note = why
    r = out.radial
    for option, value, direction, name in (("--stop-radius", request.stop_radius, -1, "stop-radius"),
                                           ("--escape-radius", request.escape_radius, 1, "escape")):
        if value is None:
            continue
        if not math.isfinite(value):
            raise InputError(option, None, f"{value} is not a finite radius")
        if r is None:
            raise InputError(option, None, "this chart has no radial coordinate (none named r or rho, and it is "
                                           "not stationary and axisymmetric); use --stop-below/--stop-above NAME=VALUE")
        if (x0[r] - value) * direction >= 0:
            where = "below" if direction < 0 else "above"
            raise InputError(option, None, f"{value:g} is not {where} the start {coords[r]} = {x0[r]:.12g}")
        out.stops.append(Stop(name, r, float(value), direction, f"{option} {value:g}"))
    if model is not None and r is not None:
        try:
            radii = [float(q.radius) for q in model.horizons.roots]
        except InputError as exc:
            radii, out.horizon_note = [], str(exc)
        out.horizons = radii
        if not request.cross_horizons:
            inner = [h for h in radii if h * (1 + HORIZON_MARGIN) < x0[r]]
            outer = [h for h in radii if h * (1 - HORIZON_MARGIN) > x0[r]]
            if inner:
                h = max(inner)
                out.stops.append(Stop("horizon", r, h * (1 + HORIZON_MARGIN), -1,
                                      f"the horizon at {coords[r]} = {h:.12g} (stopped {HORIZON_MARGIN:g} outside it)"))
            if outer:
                h = min(outer)
                out.stops.append(Stop("horizon", r, h * (1 - HORIZON_MARGIN), 1,
                                      f"the horizon at {coords[r]} = {h:.12g} (stopped {HORIZON_MARGIN:g} inside it)"))
    for option, texts, direction in (("--stop-below", request.below, -1), ("--stop-above", request.above, 1)):
        for text in texts:
            given = parse_assignments(text, option, {c: c for c in coords}, env, kind="coordinate of this chart")
            for name, value in given.items():
                i = coords.index(name)
                v = float(value)
                if (x0[i] - v) * direction >= 0:
                    where = "below" if direction < 0 else "above"
                    raise InputError(option, name, f"{v:g} is not {where} the start {name} = {x0[i]:.12g}")
                out.stops.append(Stop("range", i, v, direction, f"{option} {name}={v:g}"))
    return out


def events(plan_: Plan, velocity: Callable[[Any], Any], n: int) -> tuple[list, list[Stop], list[int]]:
    """``solve_ivp`` events: the terminal stops (in the order of ``plan_.stops``), then one non-terminal
    event per coordinate whose turning points are wanted (the radial and polar ones). ``velocity(y)``
    gives dx/dl of a state."""
    out = []
    for stop in plan_.stops:
        def crossing(_t, y, i=stop.index, v=stop.value):
            return float(y[i]) - v

        crossing.terminal, crossing.direction = True, stop.direction
        out.append(crossing)
    turning = [i for i in (plan_.radial, plan_.polar) if i is not None]
    for i in turning:
        def turn(_t, y, i=i):
            return float(velocity(y)[i])

        turn.terminal, turn.direction = False, 0
        out.append(turn)
    return out, list(plan_.stops), turning


def fired(sol, first: int, stops: list[Stop]) -> Stop | None:
    """The stop that ended ``sol`` (its events from index ``first`` on are the stops), or None."""
    if sol.status != 1 or sol.t_events is None:
        return None
    for k, stop in enumerate(stops):
        if len(sol.t_events[first + k]):
            return stop
    return None


def turning_points(sol, first: int, indices: list[int], coords: list[str]) -> dict[str, Any]:
    """``{"count", "points": [{"coordinate", "value", "kind": "minimum" | "maximum", "tau"}]}``, in order."""
    import numpy as np

    points = []
    if sol.t_events is not None:
        for k, i in enumerate(indices):
            values = sol.y[i]
            if np.max(values) - np.min(values) <= 1e-9 * (1.0 + abs(values[0])):
                continue  # the coordinate did not move (equatorial plane): its velocity changes sign by rounding only
            for t, y in zip(sol.t_events[first + k], sol.y_events[first + k], strict=True):
                points.append((float(t), coords[i], float(y[i]), i))
    points.sort()
    listed = []
    for t, name, value, i in points[:MAX_TURNING_POINTS]:
        # which side: the coordinate just before the event (just after, at the start), from the dense output
        kind = None
        if sol.sol is not None:
            h = 1e-6 * max(abs(t), 1.0)
            side = float(sol.sol(t - h)[i]) if t - h > sol.t[0] else float(sol.sol(min(t + h, sol.t[-1]))[i])
            kind = "minimum" if side > value else "maximum"
        listed.append({"coordinate": name, "value": value, "kind": kind, "tau": t})
    return {"count": len(points), "points": listed}


def detail(stop: Stop, coords: list[str], tau: float, x, parameter: str = "tau") -> str:
    what = {"stop-radius": "reached", "escape": "escaped to", "horizon": "approached", "range": "left the range at"}
    where = ", ".join(f"{c}={v:g}" for c, v in zip(coords, x, strict=True))
    return (f"{what[stop.termination]} {coords[stop.index]} = {stop.value:.12g} ({stop.reason}) at "
            f"{parameter} = {tau:.12g}, {where}")
