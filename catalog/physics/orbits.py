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
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

from gravicat.errors import InputError
from gravicat.physics import units as U

DIRECTIONS = ("prograde", "retrograde")
_ORBIT_KEYS = ("disc", "Omega", "norm", "ut", "energy", "L", "dE", "dL", "dOmega")
DPS = 40  # working digits of the mpmath refinement
GRID = 4000  # points of the logarithmic scan grid
FAR = 1e6  # landmarks are searched up to FAR times the length scale of the parameters
NEAR = 1e-9  # ... and from NEAR times that scale beyond the inner edge
EDGE = 1e-6  # a root closer than this (relative) to the horizon is taken to coincide with it

HORIZON_CRITERION = "g_tphi**2 - g_tt*g_phiphi = 0 on the equator (Killing horizon), away from the centre g_phiphi = 0"
ERGO_CRITERION = "g_tt = 0 on the equator"


# --------------------------------------------------------------------------- parameters


@dataclass(frozen=True)
class Parameters:
    """Numeric parameter values in the chart's geometrized units.

    ``exact``: name -> exact sympy number; ``given``: name -> the text given on the
    command line; ``defaults_used``: names filled from the file's ``default``;
    ``notes``: what was assumed or converted, one sentence each.
    """

    exact: dict[str, Any]
    given: dict[str, str] = field(default_factory=dict)
    defaults_used: tuple[str, ...] = ()
    units: str = "geometrized"
    notes: tuple[str, ...] = ()

    @property
    def values(self) -> dict[str, float]:
        return {k: float(v) for k, v in self.exact.items()}


def parse_number(text: str, *, source: str, field: str, env: Mapping[str, Any] | None = None):
    """A real, finite number from untrusted text (whitelist parser; ``env`` names allowed)."""
    import sympy

    from gravicat.format.expr import Names, check_expression, to_sympy

    env = dict(env or {})
    tree = check_expression(text, Names(symbols=frozenset(env)), source=source, field=field)
    value = to_sympy(tree, env)
    if not getattr(value, "is_number", False):
        raise InputError(source, field, f"'{text}' is not a number")
    if value.has(sympy.zoo, sympy.oo, -sympy.oo, sympy.nan):
        raise InputError(source, field, f"'{text}' is not a finite number")
    re_part, im_part = value.evalf(30).as_real_imag()
    if im_part != 0 or not re_part.is_number or not re_part.is_finite:
        raise InputError(source, field, f"'{text}' is not a real number")
    return value if value.is_real else re_part


def is_mass_parameter(doc, name: str) -> bool:
    """A parameter read as GM (m^3/s^2) with --units si: its description names a mass, or it is
    an undescribed ``M``."""
    description = doc.data["parameters"].get(name, {}).get("description", "")
    return bool(re.search(r"\bmass\b", description, re.I)) or (name == "M" and not description)


def _show(value) -> str:
    import sympy

    if isinstance(value, sympy.Rational) and len(str(value)) <= 16:
        return str(value)
    return f"{float(value):.10g}"


def resolve_parameters(doc, spec, settings: Iterable[str] = (), *, units: str = "geometrized",
                       source: str = "--set") -> Parameters:
    """Parameter values from ``NAME=VALUE`` texts, defaults, unit conversion and range checks.

    Raises :class:`InputError` (one line, naming the parameter) for a malformed or
    unknown setting, a missing value without default, or a value outside the
    parameter's ``range`` or assumptions. With ``units="si"`` mass parameters are
    GM in m^3/s^2 (converted to GM/c^2 in metres), every other parameter a length
    in metres, and every parameter must be given (defaults are geometrized).
    """
    import sympy

    from gravicat.format.expr import Names, check_relation, relation_to_sympy

    if units not in U.SYSTEMS:
        raise InputError("--units", None, f"'{units}' is not one of {', '.join(U.SYSTEMS)}")
    symbols = {str(p): p for p in spec.params}
    listed = ", ".join(symbols) or "none"
    exact: dict[str, Any] = {}
    given: dict[str, str] = {}
    notes: list[str] = []
    for item in settings:
        name, sep, text = item.partition("=")
        name = name.strip()
        if not sep or not name or not text.strip():
            raise InputError(source, None, f"'{item}' is not NAME=VALUE")
        if name not in symbols:
            raise InputError(source, name, f"not a parameter of {spec.entry} (parameters: {listed})")
        if name in given:
            raise InputError(source, name, "given more than once")
        exact[name] = parse_number(text, source=source, field=name)
        given[name] = text.strip()
    if units == "si":
        c2 = sympy.Integer(int(U.C)) ** 2
        for name in list(exact):
            if is_mass_parameter(doc, name):
                exact[name] = exact[name] / c2
                notes.append(f"{name}: GM = {given[name]} m^3/s^2 is the length GM/c^2 = "
                             f"{float(exact[name]):.10g} m")
        others = [n for n in exact if not is_mass_parameter(doc, n)]
        if others:
            notes.append(f"{', '.join(others)} read as length{'s' if len(others) > 1 else ''} in metres")
    defaults_used = [n for n in symbols if n not in exact]
    for name in defaults_used:
        if units == "si":
            raise InputError(source, name, "no value given; with --units si give every parameter "
                                           "(the file's defaults are in geometrized units)")
        if symbols[name] not in spec.defaults:
            raise InputError(source, name, f"no value given and the parameter has no default; add --set {name}=VALUE")
    pending = list(defaults_used)
    while pending:
        progress = False
        for name in list(pending):
            value = spec.defaults[symbols[name]].subs({symbols[k]: v for k, v in exact.items()})
            if not value.free_symbols:
                exact[name] = value
                pending.remove(name)
                progress = True
                notes.append(f"{name} not given: using its default {name} = {_show(value)}")
        if not progress:
            raise InputError(source, pending[0], "no value given and its default depends on parameters "
                                                 "without values; add --set " + f"{pending[0]}=VALUE")
    subs = {symbols[k]: v for k, v in exact.items()}
    pnames = Names(symbols=frozenset(symbols))
    for name, p in doc.data["parameters"].items():
        value = exact[name]
        shown = given.get(name, _show(value))
        if "range" in p:
            for rel in check_relation(p["range"], pnames, source=doc.source, field=f"parameters.{name}.range"):
                truth = relation_to_sympy(rel, symbols).subs(subs)
                if truth is sympy.false:
                    others = sorted(str(s) for s in relation_to_sympy(rel, symbols).free_symbols if str(s) != name)
                    with_ = f" (with {', '.join(f'{o} = {given.get(o, _show(exact[o]))}' for o in others)})" \
                        if others else ""
                    unit = " (as a length GM/c^2 in metres)" if units == "si" and is_mass_parameter(doc, name) else ""
                    raise InputError(source, name, f"{name} = {shown}{unit} is outside its range "
                                                   f"{p['range']}{with_}")
        for flag in p.get("assume", []):
            ok = {"positive": value > 0, "nonnegative": value >= 0, "negative": value < 0,
                  "nonzero": value != 0, "integer": getattr(value, "is_integer", False), "real": True}[flag]
            if not ok:
                raise InputError(source, name, f"{name} = {shown} is not {flag}")
    return Parameters(exact=exact, given=given, defaults_used=tuple(defaults_used), units=units,
                      notes=tuple(notes))


# --------------------------------------------------------------------------- the chart


class EquatorialChart:
    """The equatorial plane of a stationary, axisymmetric chart, derived symbolically once.

    Raises :class:`InputError` (field ``charts.NAME``) when the chart is not
    stationary or has no azimuthal Killing coordinate in these coordinates, or
    holds arbitrary functions. :meth:`bind` fixes the parameters.
    """

    def __init__(self, spec, charts: Sequence[str] = (), azimuth: str | None = None):
        import sympy as sp

        self.spec = spec
        self.chart_names = tuple(charts)
        self.source = str(spec.extra.get("source", spec.entry))
        self.field = f"charts.{spec.chart}"
        coords = list(spec.coords)
        names = [str(c) for c in coords]
        if len(coords) < 3:
            self._refuse(f"a chart with {len(coords)} coordinates has no time, radial and azimuthal directions")
        if spec.functions:
            self._refuse(f"the metric holds arbitrary functions ({', '.join(map(str, spec.functions))}); "
                         "orbits needs a metric fixed by its parameters")
        g = spec.metric
        deps = [c for c in coords if g.has(c)]
        time = coords[0]
        if time in deps:
            self._refuse(f"the metric depends on the first coordinate {time}: the chart is not stationary, so "
                         "static observers, circular orbits and horizons cannot be computed here "
                         f"(charts of {spec.entry}: {self._charts()})")
        polar = coords[names.index("theta")] if "theta" in names else None
        radial = [c for c in coords[1:] if c in deps and c != polar]
        if not radial:
            self._refuse("the metric depends on no coordinate (other than theta): there is no radial "
                         "structure (no horizons, no landmarks) to compute")
        if len(radial) > 1:
            self._refuse(f"the metric depends on {', '.join(map(str, radial))}: not axisymmetric in this chart "
                         "(orbits needs one radial coordinate, plus theta, and an azimuth the metric does not "
                         f"depend on; charts of {spec.entry}: {self._charts()})")
        cyclic = [c for c in coords[1:] if c not in deps and c != polar and c not in radial]
        if not cyclic:
            self._refuse("no coordinate besides the time is absent from the metric: no azimuthal Killing "
                         "direction, so the chart is not axisymmetric in these coordinates")
        if azimuth is not None:
            chosen = [c for c in cyclic if str(c) == azimuth]
            if not chosen:
                raise InputError("--azimuth", azimuth, f"not an azimuth of this chart: the candidates (coordinates "
                                                       f"the metric does not depend on) are "
                                                       f"{', '.join(map(str, cyclic))}")
            az = chosen[0]
        else:
            preferred = [c for name in ("phi", "varphi") for c in cyclic if str(c) == name]
            if len(cyclic) > 1 and not preferred:
                self._refuse(f"several coordinates could be the azimuth ({', '.join(map(str, cyclic))}); "
                             "choose one with --azimuth NAME")
            az = preferred[0] if preferred else cyclic[0]
        self.time, self.radial, self.polar = time, radial[0], polar
        self.azimuth = az
        self.other_angles = tuple(c for c in cyclic if c != az)
        it, ir, ip = coords.index(self.time), coords.index(self.radial), coords.index(self.azimuth)
        self.index = {"time": it, "radial": ir, "azimuth": ip, "polar": coords.index(polar) if polar else None}
        self.n = len(coords)
        on_equator = {polar: sp.pi / 2} if polar is not None else {}
        r = self.radial
        comps = [g[it, it], g[it, ip], g[ip, ip]]
        flat = g.subs(on_equator)  # d/dr commutes with setting theta = pi/2: substitute first, it is cheaper
        series = [sp.diff(flat[i, j], r, k) for i, j in ((it, it), (it, ip), (ip, ip)) for k in range(3)]
        self.components = series[0], series[3], series[6]  # A, B, C: g_tt, g_tphi, g_phiphi on the equator
        # the Killing block: time, the azimuth, and every other Killing angle whose circle has non-zero size on
        # the equator (a circle that shrinks to zero there, like psi at theta = pi/2 in Hopf-type charts of five
        # dimensions, is an axis and decouples); a horizon is where this block becomes degenerate
        extra = [coords.index(c) for c in self.other_angles
                 if sp.simplify(flat[coords.index(c), coords.index(c)]) != 0]
        block = [it, ip, *extra]
        killing = sp.Matrix([[flat[i, j] for j in block] for i in block])
        if sp.simplify(series[6]) == 0:
            self._refuse(f"the {self.azimuth} circle has zero size on the equator {polar} = pi/2 (an axis there): "
                         f"no circular orbits along it; choose another azimuth with --azimuth NAME")
        self.horizon_function = (series[3] ** 2 - series[0] * series[6]) if not extra else -killing.det()
        self.decoupled = tuple(c for c in self.other_angles if coords.index(c) not in extra)
        self.coupled = tuple(c for c in self.other_angles if coords.index(c) in extra)
        self._np_horizon = sp.lambdify(self.args_for(spec, r), self.horizon_function, modules="numpy")
        self.rotating = series[3] != 0
        self.args = (r, *spec.params)
        self._np_series = sp.lambdify(self.args, series, modules="numpy")
        self._mp_series = sp.lambdify(self.args, series, modules="mpmath")
        zero = sp.zeros(self.n, self.n)
        full = [flat, flat.diff(r), g.diff(polar).subs(on_equator) if polar is not None else zero]
        self._np_full = sp.lambdify(self.args, full, modules="numpy")
        self.reflection = [sp.diff(c, polar).subs(on_equator) for c in comps] if polar is not None else []
        self._np_reflection = (sp.lambdify(self.args, self.reflection, modules="numpy")
                               if any(e != 0 for e in self.reflection) else None)

    @staticmethod
    def args_for(spec, r):
        return (r, *spec.params)

    def _refuse(self, problem: str):
        raise InputError(self.source, self.field, problem)

    @property
    def azimuth_note(self) -> str | None:
        """What is computed when the chart has more than one Killing angle."""
        if not self.other_angles:
            return None
        text = (f"{len(self.other_angles) + 1} Killing angles; circular orbits move along {self.azimuth} only, with "
                f"zero velocity along {', '.join(map(str, self.other_angles))}")
        if self.decoupled:
            text += (f"; on the equator the {', '.join(map(str, self.decoupled))} circle has zero size (an axis), "
                     "so it decouples")
        if self.coupled:
            text += (f"; horizons are where the Killing block of {self.time}, {self.azimuth}, "
                     f"{', '.join(map(str, self.coupled))} is degenerate")
        return text

    def _charts(self) -> str:
        return ", ".join(self.chart_names) or "see 'gravicat show'"

    @property
    def coordinate_names(self) -> dict[str, str | None]:
        return {"time": str(self.time), "radial": str(self.radial), "azimuthal": str(self.azimuth),
                "polar": str(self.polar) if self.polar is not None else None}

    def bind(self, params: Parameters | Mapping[str, Any]) -> Equatorial:
        """The chart with numeric parameter values (``Parameters`` or name -> number)."""
        return Equatorial(self, params)


# --------------------------------------------------------------------------- numerics


def _mp_sqrt(x):
    import mpmath

    return mpmath.sqrt(x) if x >= 0 else mpmath.nan


def _mp_real(v):
    import mpmath

    if isinstance(v, mpmath.mpc):
        return v.real if abs(v.imag) <= mpmath.mpf(10) ** (-DPS // 2) * (1 + abs(v.real)) else mpmath.nan
    return mpmath.mpf(v)


def _orbit(m, k, sqrt) -> dict[str, Any]:
    """Circular-orbit quantities from A, A', A'', B, B', B'', C, C', C'' on one branch.

    ``k`` = +1 or -1 picks the root of Omega (already multiplied by sign(C')).
    Works on numpy arrays (np.sqrt) and on mpmath numbers alike.
    """
    A, A1, A2, B, B1, B2, C, C1, C2 = m
    disc = B1 * B1 - A1 * C1
    omega = (-B1 + k * sqrt(disc)) / C1
    norm = A + 2 * B * omega + C * omega * omega  # g(u, u)/(u^t)^2: < 0 timelike, 0 null
    ut = 1 / sqrt(-norm)
    energy = -(A + B * omega) * ut
    ang = (B + C * omega) * ut
    domega = -(A2 + 2 * B2 * omega + C2 * omega * omega) / (2 * (B1 + C1 * omega))
    dnorm = 2 * (B + C * omega) * domega  # the explicit r-derivative vanishes on a circular orbit
    dut = ut**3 * dnorm / 2
    denergy = -(A1 + B1 * omega + B * domega) * ut - (A + B * omega) * dut
    dang = (B1 + C1 * omega + C * domega) * ut + (B + C * omega) * dut
    return {"disc": disc, "Omega": omega, "norm": norm, "ut": ut, "energy": energy, "L": ang,
            "dE": denergy, "dL": dang, "dOmega": domega}


@dataclass(frozen=True)
class Root:
    radius: float
    multiplicity: int = 1
    rising: bool | None = None  # the function goes from negative to positive outward


@dataclass
class Roots:
    """Positive roots of a function of r and how they were found."""

    roots: list[Root]
    method: str


class Equatorial:
    """One chart on its equator with numeric parameters: horizons, observers, orbits, landmarks."""

    def __init__(self, chart: EquatorialChart, params: Parameters | Mapping[str, Any]):
        import sympy as sp

        self.chart = chart
        self.params = params if isinstance(params, Parameters) else Parameters(
            exact={k: sp.nsimplify(v) if isinstance(v, (int, float)) else sp.sympify(v) for k, v in params.items()})
        missing = [str(p) for p in chart.spec.params if str(p) not in self.params.exact]
        if missing:
            raise InputError("parameters", missing[0], "no value given")
        self._exact = {p: self.params.exact[str(p)] for p in chart.spec.params}
        self._pf = [float(v) for v in self._exact.values()]
        nonzero = [abs(v) for v in self._pf if v != 0 and math.isfinite(v)]
        self.scale = max(nonzero) if nonzero else 1.0
        self.notes: list[str] = []
        self._check_reflection()

    # ---- evaluation

    @cached_property
    def _mp_params(self):
        import mpmath

        return [mpmath.mpf(str(v.evalf(DPS + 10))) for v in self._exact.values()]

    def _pm(self):
        return self._mp_params

    def series_np(self, r):
        import numpy as np

        r = np.asarray(r, dtype=float)
        with np.errstate(all="ignore"):
            raw = self.chart._np_series(r, *self._pf)
        out = []
        for v in raw:
            v = np.asarray(v)
            if np.iscomplexobj(v):
                v = np.where(np.abs(v.imag) <= 1e-12 * (1 + np.abs(v.real)), v.real, np.nan)
            out.append(np.broadcast_to(v.astype(float), r.shape))
        return out

    def series_mp(self, r):
        import mpmath

        return [_mp_real(v) for v in self.chart._mp_series(mpmath.mpf(r), *self._pm())]

    def _branch(self, direction: str) -> int:
        if direction not in DIRECTIONS:
            raise InputError("direction", None, f"'{direction}' is not one of {', '.join(DIRECTIONS)}")
        return self.drag if direction == "prograde" else -self.drag

    def orbit_np(self, r, direction: str) -> dict[str, Any]:
        import numpy as np

        m = self.series_np(r)
        with np.errstate(all="ignore"):
            return _orbit(m, self._branch(direction) * np.sign(m[7]), np.sqrt)

    def orbit_mp(self, r, direction: str) -> dict[str, Any]:
        import mpmath

        m = self.series_mp(r)
        k = self._branch(direction) * mpmath.sign(m[7])
        try:
            return _orbit(m, k, _mp_sqrt)
        except ZeroDivisionError:  # exactly on the photon orbit (u^t infinite) or where g_phiphi' = 0
            out = dict.fromkeys(_ORBIT_KEYS, mpmath.nan)
            try:
                disc = m[4] * m[4] - m[1] * m[7]
                omega = (-m[4] + k * _mp_sqrt(disc)) / m[7]
                norm = m[0] + 2 * m[3] * omega + m[6] * omega * omega
                out.update(disc=disc, Omega=omega, norm=norm)
                if norm < 0:  # timelike: only dOmega/dr is undefined (B' + C' Omega = 0, e.g. flat space)
                    ut = 1 / mpmath.sqrt(-norm)
                    out.update(ut=ut, energy=-(m[0] + m[3] * omega) * ut, L=(m[3] + m[6] * omega) * ut)
            except ZeroDivisionError:
                pass
            return out

    @cached_property
    def drag(self) -> int:
        """+1 or -1: the sense of the frame dragging far out (omega = -g_tphi/g_phiphi); +1 without any."""
        import numpy as np

        if not self.chart.rotating:
            return 1
        lo, hi = self.region
        radii = self.scale * np.geomspace(10, 1e4, 7) if hi is None else lo + (hi - lo) * np.array([0.9, 0.7, 0.5])
        m = self.series_np(radii)
        with np.errstate(all="ignore"):
            omega = -m[3] / m[6]
        for w in omega:
            if np.isfinite(w) and w != 0:
                return 1 if w > 0 else -1
        return 1

    def _check_reflection(self):
        import numpy as np

        if self.chart._np_reflection is None:
            return
        radii = self.scale * np.array([1.7, 3.1, 7.3, 19.0, 113.0])
        with np.errstate(all="ignore"):
            vals = [np.broadcast_to(np.asarray(v, dtype=complex), radii.shape)
                    for v in self.chart._np_reflection(radii, *self._pf)]
            size = [np.abs(np.asarray(v)) for v in self.series_np(radii)[::3]]
        for d, s in zip(vals, size, strict=True):
            bad = np.isfinite(d) & (np.abs(d) > 1e-9 * (1 + s))
            if bad.any():
                raise InputError(self.chart.source, self.chart.field,
                                 "the metric is not reflection-symmetric about theta = pi/2 (d g/d theta != 0 "
                                 "there), so equatorial circular orbits are not geodesics")

    # ---- roots

    def _refine(self, fn_mp, a: float, b: float) -> float | None:
        """A root of ``fn_mp`` bracketed by [a, b], to DPS digits; None at a pole."""
        import mpmath

        with mpmath.workdps(DPS):
            lo, hi = mpmath.mpf(a), mpmath.mpf(b)
            flo, fhi = fn_mp(lo), fn_mp(hi)
            if not (mpmath.isfinite(flo) and mpmath.isfinite(fhi)) or flo * fhi > 0:
                return None
            try:
                x = mpmath.findroot(fn_mp, (lo, hi), solver="anderson")
                ok = lo <= x <= hi
            except (ValueError, ZeroDivisionError, TypeError):
                ok = False
            if not ok:  # bisection: slow but sure
                for _ in range(4 * DPS):
                    mid = (lo + hi) / 2
                    fm = fn_mp(mid)
                    if not mpmath.isfinite(fm):
                        return None
                    if fm * flo > 0:
                        lo, flo = mid, fm
                    else:
                        hi = mid
                x = (lo + hi) / 2
            value = fn_mp(x)
            if not mpmath.isfinite(value) or abs(value) > mpmath.mpf(10) ** (-DPS // 3) * (abs(flo) + abs(fhi)):
                return None  # a pole, not a root
            # near a root |f| shrinks towards x, near a pole it grows: compare steps of 1e-15 and 2e-15 (relative)
            step = abs(x) * mpmath.mpf(10) ** -15 if x != 0 else mpmath.mpf(10) ** -15
            for sign in (1, -1):
                near, further = fn_mp(x + sign * step), fn_mp(x + 2 * sign * step)
                if mpmath.isfinite(near) and mpmath.isfinite(further) and further != 0 and \
                        abs(near) > 1.5 * abs(further):
                    return None  # a pole, not a root
            return float(x)

    def _scan(self, fn_np, fn_mp, lo: float, hi: float) -> list[Root]:
        """Roots where ``fn`` changes sign on a logarithmic grid in (lo, hi], refined."""
        import numpy as np

        if not hi > lo:
            return []
        x = lo + np.geomspace(NEAR * self.scale, hi - lo, GRID)
        with np.errstate(all="ignore"):
            y = np.asarray(fn_np(x), dtype=float)
        found = []
        ok = np.isfinite(y)
        exact = np.nonzero(ok & (y == 0))[0]
        for i in exact:  # a grid point hits the root exactly: the neighbours tell which way it crosses
            before, after = (y[i - 1] if i > 0 else np.nan), (y[i + 1] if i + 1 < len(y) else np.nan)
            crossing = bool(np.isfinite(before) and np.isfinite(after) and before * after < 0)
            found.append(Root(float(x[i]), 1, bool(after > 0) if crossing else None))
        change = np.nonzero(ok[:-1] & ok[1:] & (np.sign(y[:-1]) * np.sign(y[1:]) < 0))[0]
        for i in change:
            root = self._refine(fn_mp, float(x[i]), float(x[i + 1]))
            if root is not None:
                found.append(Root(root, 1, bool(y[i] < 0)))
        return sorted(found, key=lambda q: q.radius)

    def _positive_roots(self, expr) -> Roots:
        """All positive roots of a function of r given exactly (parameters substituted)."""
        import sympy as sp

        r = self.chart.radial
        expr = expr.subs(self._exact)
        try:
            together = sp.cancel(sp.together(expr))
            num, den = sp.fraction(together)
            if num.free_symbols <= {r} and num.is_polynomial(r) and den.free_symbols <= {r}:
                poly = sp.Poly(num, r)
                if poly.is_zero:
                    return Roots([], "identically zero")
                pairs = []
                if poly.get_domain().is_QQ or poly.get_domain().is_ZZ:
                    pairs = [(float(sp.N(x, DPS)), k) for x, k in sp.real_roots(poly, multiple=False)]
                    method = "exact real roots of the numerator polynomial"
                else:
                    for factor, k in poly.sqf_list()[1]:
                        for z in factor.nroots(n=DPS, maxsteps=200):
                            re_, im_ = (complex(z).real, complex(z).imag)
                            if abs(im_) <= 1e-20 * (1 + abs(re_)):
                                pairs.append((re_, k))
                    method = "real roots of the numerator polynomial (40-digit numerics)"
                roots = [Root(x, k) for x, k in pairs
                         if x > 0 and den.subs(r, x) != 0 and abs(sp.N(den.subs(r, sp.Float(x, DPS)))) > 1e-30]
                return Roots(sorted(roots, key=lambda q: q.radius), method)
        except (sp.PolynomialError, NotImplementedError, sp.polys.polyerrors.GeneratorsNeeded, ValueError,
                TypeError):
            pass
        return self._scan_any(expr)

    def _scan_any(self, expr) -> Roots:
        """Sign changes and double roots of ``expr`` (a function of r only) on a grid."""
        import mpmath
        import numpy as np
        import sympy as sp

        r = self.chart.radial
        f_np = sp.lambdify(r, expr, modules="numpy")
        f_mp = sp.lambdify(r, expr, modules="mpmath")
        d_np = sp.lambdify(r, sp.diff(expr, r), modules="numpy")
        d_mp = sp.lambdify(r, sp.diff(expr, r), modules="mpmath")

        def real_np(fn):
            def wrapped(x):
                v = np.broadcast_to(np.asarray(fn(x)), np.shape(x))
                if np.iscomplexobj(v):
                    v = np.where(np.abs(v.imag) <= 1e-12 * (1 + np.abs(v.real)), v.real, np.nan)
                return v.astype(float)
            return wrapped

        def real_mp(fn):
            return lambda x: _mp_real(fn(x))

        lo, hi = 0.0, FAR * self.scale
        roots = self._scan(real_np(f_np), real_mp(f_mp), lo, hi)
        fm = real_mp(f_mp)
        for q in self._scan(real_np(d_np), real_mp(d_mp), lo, hi):
            with mpmath.workdps(DPS):
                x = mpmath.mpf(q.radius)
                around = abs(fm(x * mpmath.mpf("0.9"))) + abs(fm(x * mpmath.mpf("1.1")))
                if abs(fm(x)) <= mpmath.mpf(10) ** (-DPS // 2) * around and all(
                        abs(p.radius - q.radius) > 1e-9 * q.radius for p in roots):
                    roots.append(Root(q.radius, 2))
        return Roots(sorted(roots, key=lambda q: q.radius),
                     f"sign changes and double roots on a {GRID}-point logarithmic grid, r in (0, {hi:.3g}]")

    # ---- structure

    @cached_property
    def horizons(self) -> Roots:
        found = self._positive_roots(self.chart.horizon_function)
        keep = []
        for q in found.roots:
            c = self.series_np([q.radius])[6][0]
            if abs(c) > 1e-12 * q.radius**2:  # C = g_phiphi = 0: the centre or the axis, not a horizon
                keep.append(q)
        return Roots(keep, found.method)

    @cached_property
    def ergosurface(self) -> Roots:
        return self._positive_roots(self.chart.components[0])

    def killing_norm_np(self, r):
        """-det of the Killing block on the equator (B**2 - A*C for t and the azimuth): > 0 where some
        combination of the Killing vectors is timelike, 0 on a horizon."""
        import numpy as np

        r = np.asarray(r, dtype=float)
        with np.errstate(all="ignore"):
            v = np.asarray(self.chart._np_horizon(r, *self._pf))
        if np.iscomplexobj(v):
            v = np.where(np.abs(v.imag) <= 1e-12 * (1 + np.abs(v.real)), v.real, np.nan)
        return np.broadcast_to(v.astype(float), r.shape)

    @cached_property
    def region(self) -> tuple[float, float | None]:
        """The stationary region the report describes: the outermost interval between horizons where a
        combination of the Killing vectors is timelike (outside the black hole; with a positive cosmological
        constant, inside the cosmological horizon). (lower horizon or 0, upper horizon or None)."""
        import numpy as np

        radii = [q.radius for q in self.horizons.roots]
        edges = [0.0, *radii]
        for i in range(len(edges) - 1, -1, -1):
            lo = edges[i]
            hi = radii[i] if i < len(radii) else None
            if hi is None:
                probe = np.array([lo * 1.5 + self.scale, lo * 3 + 10 * self.scale])
            else:
                probe = lo + (hi - lo) * np.array([0.25, 0.5, 0.75])
            if np.any(self.killing_norm_np(probe) > 0):
                return lo, hi
        return (radii[-1] if radii else 0.0), None

    @property
    def cosmological_horizon(self) -> float | None:
        """The horizon bounding the region from outside (a cosmological horizon), None when there is none."""
        return self.region[1]

    @cached_property
    def asymptotically_flat(self) -> bool:
        """No outer horizon and g_tt -> -1 far out (numerically, at 1e6 times the scale)."""
        import numpy as np

        if self.cosmological_horizon is not None or self.domain_bounds[1] is not None:
            return False
        far = self.scale * np.array([1e5, 1e6])
        a = self.series_np(far)[0]
        return bool(np.all(np.isfinite(a)) and np.all(np.abs(a + 1) < 1e-3))

    @cached_property
    def static_range(self) -> tuple[float | None, float | None]:
        """(lower, upper) radii between which static observers exist (g_tt < 0) in the region; (None, None)
        when they exist nowhere there. The upper value is None when unbounded."""
        import numpy as np

        lo, hi = self.inner_edge, self.outer_edge
        cuts = [lo] + [q.radius for q in self.ergosurface.roots if lo < q.radius < hi] + [hi]
        for a, b in zip(cuts[:-1], cuts[1:], strict=True):
            mid = np.array([a + (b - a) * f for f in (0.3, 0.5, 0.7)]) if b < FAR * self.scale else \
                np.array([a * 1.5 + self.scale, a * 3 + 10 * self.scale])
            if np.all(self.series_np(mid)[0] < 0):
                upper = b if (b < hi or self.cosmological_horizon is not None
                              or self.domain_bounds[1] is not None) else None
                return a, upper
        return None, None

    @cached_property
    def static_limit(self) -> float | None:
        """The inner edge of the static observers' range (a root of g_tt), None if g_tt has no root there."""
        lower = self.static_range[0]
        if lower is None:
            return None
        roots = self.ergosurface.roots
        return lower if any(abs(q.radius - lower) <= 1e-12 * max(1.0, lower) for q in roots) else None

    @cached_property
    def static_radius(self) -> float | None:
        """Where d g_tt/dr = 0 in the static range: a static observer there is in free fall (a circular
        geodesic with Omega = 0); with a positive cosmological constant (3M/Lambda)**(1/3)."""
        lo, hi = self.static_range
        if lo is None:
            return None
        hi = hi if hi is not None else self.outer_edge
        found = self._scan(lambda x: self.series_np(x)[1], lambda x: self.series_mp(x)[1], lo, hi)
        inside = [q.radius for q in found if lo < q.radius < hi]
        return inside[-1] if inside else None

    @cached_property
    def clock_reference(self) -> tuple[float, str]:
        """(d tau/dt of the reference clock, its description): clock rates are divided by the first."""
        import math as _m

        if self.asymptotically_flat:
            return 1.0, "a static clock far away"
        rs = self.static_radius
        if self.cosmological_horizon is not None and rs is not None:
            rate = _m.sqrt(-float(self.series_mp(rs)[0]))
            return rate, (f"the static observer at the static radius r = {rs:.10g}, who is in free fall there "
                          "(there is no static clock at infinity)")
        return 1.0, (f"the coordinate time {self.chart.time} (d tau/d{self.chart.time}; no static clock at infinity "
                     "and no static observer in free fall)")

    @cached_property
    def domain_bounds(self) -> tuple[float | None, float | None]:
        """Lower and upper bounds of the radial coordinate stated in the chart's domain."""
        import sympy as sp

        r, lo, hi = self.chart.radial, None, None
        for rel in self.chart.spec.domain:
            if not rel.has(r):
                continue
            for side, other, lower_if in ((rel.lhs, rel.rhs, (sp.Gt, sp.Ge)), (rel.rhs, rel.lhs, (sp.Lt, sp.Le))):
                if side == r and not other.has(r):
                    try:
                        value = float(other.subs(self._exact))
                    except (TypeError, ValueError):
                        continue
                    if isinstance(rel, lower_if):
                        lo = value if lo is None else max(lo, value)
                    else:
                        hi = value if hi is None else min(hi, value)
        return lo, hi

    @cached_property
    def inner_edge(self) -> float:
        """Where the search for orbits starts: the black-hole horizon bounding the region, or the chart's lower
        radial bound, or 0."""
        edges = [self.region[0]]
        if self.domain_bounds[0] is not None:
            edges.append(self.domain_bounds[0])
        return max(edges)

    @cached_property
    def outer_edge(self) -> float:
        """Where it ends: the cosmological horizon, the chart's upper radial bound, or far out."""
        far = self.inner_edge + FAR * self.scale
        for upper in (self.region[1], self.domain_bounds[1]):
            if upper is not None:
                far = min(far, upper)
        return far

    # ---- landmarks

    def _fns(self, direction: str, key: str, shift: float = 0.0):
        return (lambda x: self.orbit_np(x, direction)[key] - shift,
                lambda x: self.orbit_mp(x, direction)[key] - shift)

    def potential_np(self, r, L):
        """The energy E at which a particle of angular momentum L turns at r on the equator (the effective
        potential): g^tt E**2 - 2 g^tphi E L + g^phiphi L**2 = -1, future root, E = (-B L + sqrt(D (L**2 + C)))/C."""
        import numpy as np

        m = self.series_np(r)
        A, B, C = m[0], m[3], m[6]
        with np.errstate(all="ignore"):
            D = B * B - A * C
            return (-B * L + np.sqrt(D * (L * L + C))) / C

    def barrier(self, radius: float, L: float) -> float:
        """The highest value of the effective potential for angular momentum L between ``radius`` and the outer
        edge: a particle with less energy cannot escape outward. 1 (the rest energy far away) in an
        asymptotically flat region; infinite when the potential grows without limit (anti-de Sitter)."""
        import numpy as np
        from scipy.optimize import minimize_scalar

        hi = self.outer_edge
        if not hi > radius:
            return math.nan
        x = radius + np.geomspace(1e-7 * radius, hi - radius, 800)[:-1]
        v = self.potential_np(x, L)
        ok = np.isfinite(v)
        if not ok.any():
            return math.nan
        w = np.where(ok, v, -np.inf)
        best = float(np.max(w))
        if self.cosmological_horizon is None and self.domain_bounds[1] is None and not self.asymptotically_flat \
                and ok[-1] and ok[-2] and v[-1] > v[-2]:
            return math.inf  # still rising far out: the potential grows without limit (anti-de Sitter)
        # every interior local maximum, refined (at a marginally bound orbit the inner maximum, at r itself, and
        # the outer one are nearly equal, so the grid alone cannot tell which is higher)
        peaks = np.nonzero((w[1:-1] >= w[:-2]) & (w[1:-1] >= w[2:]) & ok[1:-1])[0] + 1
        # rounding noise on a plateau (a potential constant in r, as in the Einstein static universe) makes
        # many grid 'peaks' of one value: refine one of each value (12 significant digits)
        seen: set[str] = set()
        peaks = [k for k in peaks if f"{w[k]:.12g}" not in seen and not seen.add(f"{w[k]:.12g}")]
        for k in peaks:
            with np.errstate(all="ignore"):
                res = minimize_scalar(lambda y: -float(self.potential_np(np.array([y]), L)[0]),
                                      bounds=(float(x[k - 1]), float(x[k + 1])), method="bounded",
                                      options={"xatol": 1e-12 * float(x[k])})
            if np.isfinite(res.fun):
                best = max(best, -float(res.fun))
        if self.asymptotically_flat:
            best = max(best, 1.0)
        return best

    def _is_bound(self, radius: float, energy: float, L: float) -> bool:
        if self.asymptotically_flat:
            return energy < 1
        b = self.barrier(radius, L)
        return bool(energy < b) if not math.isnan(b) else False

    def _bound_root(self, d: str, lo: float, hi: float) -> list[float]:
        """Radii where E of the circular orbit equals the outer barrier of the potential at its L (becoming bound
        outward), found on a grid and refined by Brent's method."""
        import numpy as np
        from scipy.optimize import brentq

        if not hi > lo:
            return []

        def f(x):
            o = self.orbit_np(np.array([x]), d)
            e, L = float(o["energy"][0]), float(o["L"][0])
            if not (math.isfinite(e) and math.isfinite(L)):
                return math.nan
            b = self.barrier(x, L)
            return e - b if math.isfinite(b) else -1.0

        xs = lo + np.geomspace(NEAR * self.scale, hi - lo, 160)
        ys = np.array([f(float(x)) for x in xs])
        out = []
        for k in range(len(xs) - 1):
            if np.isfinite(ys[k]) and np.isfinite(ys[k + 1]) and ys[k] > 0 > ys[k + 1]:
                out.append(float(brentq(f, float(xs[k]), float(xs[k + 1]), xtol=1e-14 * float(xs[k]), rtol=1e-15)))
        return out

    @cached_property
    def landmarks(self) -> dict[str, dict[str, float | None]]:
        """Photon orbit, marginally bound orbit, ISCO and (where stable orbits end outward, as with a positive
        cosmological constant) the outermost stable circular orbit, for each direction (None when absent)."""
        import mpmath
        import numpy as np

        out: dict[str, dict[str, float | None]] = {"photon_orbits": {}, "marginally_bound": {}, "isco": {},
                                                   "osco": {}}
        lo, hi = self.inner_edge, self.outer_edge
        degenerate = any(q.multiplicity > 1 and abs(q.radius - lo) <= 1e-12 * max(1.0, lo)
                         for q in self.horizons.roots)
        for d in DIRECTIONS:
            photon = [q for q in self._scan(*self._fns(d, "norm"), lo, hi) if q.rising is False]
            merged = lo > 0 and any(q.radius <= lo * (1 + EDGE) for q in photon)
            photon = [q for q in photon if q.radius > lo * (1 + EDGE)]
            ph = photon[-1].radius if photon else None
            at_edge = False
            if ph is None and lo > 0 and degenerate:
                # the degenerate limit (extremal Kerr in Boyer-Lindquist r): circular orbits exist down to the
                # degenerate horizon and become null there, so the photon orbit sits on it
                with mpmath.workdps(DPS):
                    near = [self.orbit_mp(mpmath.mpf(lo) * (1 + mpmath.mpf(10) ** -k), d)["norm"] for k in (10, 6)]
                if all(mpmath.isfinite(v) and v < 0 for v in near) and abs(near[0]) < abs(near[1]):
                    at_edge, ph = True, lo
            elif merged:
                self.notes.append(f"{d}: the photon orbit merges with the inner edge r = {lo:.10g}")
            start = ph if ph is not None else lo
            stable_in = [q for q in self._scan(*self._fns(d, "dE"), start, hi) if q.rising is True]
            stable_out = [q for q in self._scan(*self._fns(d, "dE"), start, hi) if q.rising is False]
            isco = stable_in[0].radius if stable_in else None
            if at_edge and isco is None:
                with mpmath.workdps(DPS):
                    near = [self.orbit_mp(mpmath.mpf(lo) * (1 + mpmath.mpf(10) ** -k), d)["dE"] for k in (10, 6, 4)]
                if all(mpmath.isfinite(v) and v > 0 for v in near):
                    isco = lo
            osco = None
            if isco is not None:
                later = [q.radius for q in stable_out if q.radius > isco]
                osco = later[0] if later else None
            if self.asymptotically_flat:
                bound = [q.radius for q in self._scan(*self._fns(d, "energy", 1.0), start, hi) if q.rising is False]
            else:
                bound = self._bound_root(d, start, isco if isco not in (None, lo) else hi)
            mb = bound[0] if bound else None
            if at_edge and mb is None:
                o = self.orbit_np(np.array([lo * (1 + 1e-6)]), d)
                if self._is_bound(lo * (1 + 1e-6), float(o["energy"][0]), float(o["L"][0])):
                    mb = lo
            out["photon_orbits"][d] = ph
            out["marginally_bound"][d] = mb
            out["isco"][d] = isco
            out["osco"][d] = osco
            if at_edge:
                same = [k for k, v in (("photon orbit", ph), ("marginally bound orbit", mb), ("ISCO", isco))
                        if v == lo]
                self.notes.append(
                    f"{d}: degenerate limit: {', '.join(same)} at the degenerate horizon r = {lo:.10g} in these "
                    "coordinates; they are distinct orbits, at different proper distances from each other "
                    "(Bardeen, Press & Teukolsky 1972 for extremal Kerr)")
            if len(photon) > 1:
                self.notes.append(f"{d}: {len(photon)} photon orbits found; reporting the outermost")
            if len(bound) > 1:
                self.notes.append(f"{d}: {len(bound)} marginally bound radii; reporting the innermost")
            if len(stable_in) > 1:
                self.notes.append(f"{d}: {len(stable_in)} inner edges of stable regions; reporting the innermost")
            absent = [key for key, value in (("photon orbit", ph), ("marginally bound orbit", mb),
                                             ("ISCO", isco)) if value is None]
            if absent and mb is None and isco is not None and not self.asymptotically_flat and \
                    self.cosmological_horizon is None:
                self.notes.append(f"{d}: every circular orbit is bound (the potential grows without limit "
                                  "outward): no marginally bound orbit")
                absent = [a for a in absent if a != "marginally bound orbit"]
            if absent:
                listed = absent[0] if len(absent) == 1 else ", ".join(absent[:-1]) + " or " + absent[-1]
                self.notes.append(f"{d}: no {listed} found for r in ({lo:.6g}, {hi:.6g})")
        return out

    # ---- observers at one radius

    def circular(self, radius: float, direction: str) -> dict[str, Any]:
        """A circular equatorial geodesic at ``radius`` (chart units), checked against the full metric."""
        import mpmath
        import numpy as np

        out: dict[str, Any] = {"radius": float(radius), "direction": direction}
        lo, hi = self.region
        if lo > 0 and radius <= lo:
            return {**out, "exists": False, "reason": "inside the outer horizon"}
        if hi is not None and radius >= hi:
            return {**out, "exists": False, "reason": f"beyond the cosmological horizon r = {hi:.10g}"}
        lower, upper = self.domain_bounds
        if (lower is not None and radius <= lower) or (upper is not None and radius >= upper):
            return {**out, "exists": False, "reason": "outside the chart's domain"}
        with mpmath.workdps(DPS):
            o = self.orbit_mp(radius, direction)
            if not (mpmath.isfinite(o["disc"]) and o["disc"] >= 0 and mpmath.isfinite(o["Omega"])):
                return {**out, "exists": False, "reason": "no circular orbit at this radius (Omega is not real)"}
            if not o["norm"] < 0:
                return {**out, "exists": False,
                        "reason": "no timelike circular orbit here (inside the photon orbit: it would move faster "
                                  "than light)"}
            vals = {k: float(o[k]) for k in ("Omega", "ut", "energy", "L", "dE")}
        ut, omega = vals["ut"], vals["Omega"]
        idx = self.chart.index
        u = np.zeros(self.chart.n)
        u[idx["time"]], u[idx["azimuth"]] = ut, ut * omega
        g, dg_r, dg_th = (np.asarray(np.broadcast_to(np.asarray(x, dtype=float), (self.chart.n, self.chart.n)))
                          for x in self.chart._np_full(float(radius), *self._pf))
        norm_residual = float(u @ g @ u + 1)
        force = np.zeros(self.chart.n)
        force[idx["radial"]] = u @ dg_r @ u
        if idx["polar"] is not None:
            force[idx["polar"]] = u @ dg_th @ u
        # Gamma^mu_ab u^a u^b for a metric independent of t and phi; a Killing circle of zero size on the equator
        # (an axis, where the chart is degenerate) carries no velocity and no force: it is left out
        names = [str(c) for c in self.chart.spec.coords]
        keep = [i for i in range(self.chart.n) if names[i] not in {str(c) for c in self.chart.decoupled}]
        accel = -0.5 * np.linalg.solve(g[np.ix_(keep, keep)], force[keep])
        return {**out, "exists": True, "Omega": omega,
                "u": {str(self.chart.time): ut, str(self.chart.azimuth): ut * omega},
                "energy": vals["energy"], "angular_momentum": vals["L"],
                "stable": (vals["dE"] > 0) if math.isfinite(vals["dE"]) else None,
                "bound": self._is_bound(float(radius), vals["energy"], vals["L"]),
                "clock_rate": 1 / ut / self.clock_reference[0],
                "norm_residual": abs(norm_residual), "geodesic_residual": float(np.max(np.abs(accel)) * radius)}

    def static_observer(self, radius: float) -> dict[str, Any]:
        """u^t = 1/sqrt(-g_tt) at ``radius``; its clock runs at sqrt(-g_tt) of coordinate time, divided by the
        rate of the reference clock (:attr:`clock_reference`)."""
        import mpmath

        lo, hi = self.region
        if (lo > 0 and radius <= lo) or (hi is not None and radius >= hi):
            return {"radius": float(radius), "exists": False,
                    "reason": "inside the outer horizon" if radius <= lo else
                    f"beyond the cosmological horizon r = {hi:.10g}"}
        with mpmath.workdps(DPS):
            A = self.series_mp(radius)[0]
            if not A < 0:
                return {"radius": float(radius), "exists": False,
                        "reason": "g_tt >= 0: inside the static limit (ergoregion or horizon)"}
            rate = float(mpmath.sqrt(-A))
        return {"radius": float(radius), "exists": True, "u": {str(self.chart.time): 1 / rate},
                "clock_rate": rate / self.clock_reference[0]}

    def zamo(self, radius: float) -> dict[str, Any]:
        """The zero-angular-momentum observer: omega = -g_tphi/g_phiphi, u^t = sqrt(g_phiphi/D)."""
        import mpmath

        with mpmath.workdps(DPS):
            m = self.series_mp(radius)
            A, B, C = m[0], m[3], m[6]
            D = B * B - A * C
            if not (D > 0 and C > 0):
                return {"radius": float(radius), "exists": False, "reason": "on or inside a horizon"}
            omega, ut = float(-B / C), float(mpmath.sqrt(C / D))
        return {"radius": float(radius), "exists": True, "angular_velocity": omega,
                "u": {str(self.chart.time): ut, str(self.chart.azimuth): ut * omega},
                "clock_rate": 1 / ut / self.clock_reference[0]}

    def rotating_clock_rate(self, radius: float, omega: float) -> float | None:
        """d tau/dt of an observer on the equator at ``radius`` moving with angular velocity ``omega``."""
        import mpmath

        with mpmath.workdps(DPS):
            m = self.series_mp(radius)
            norm = m[0] + 2 * m[3] * omega + m[6] * omega * omega
            return float(mpmath.sqrt(-norm)) if norm < 0 else None

    def horizon_angular_velocity(self, radius: float) -> float:
        m = self.series_mp(radius)
        return float(-m[3] / m[6])


# --------------------------------------------------------------------------- clocks


@dataclass(frozen=True)
class ClockComparison:
    """An orbiting clock against a clock on the rotating surface of the central body.

    Each part is a fractional rate offset (orbit clock rate / surface clock rate - 1);
    ``net`` = (1 + gravitational)(1 + orbital_velocity)(1 + surface_rotation) - 1 exactly.

    * gravitational: static observer at the orbit against static observer at the
      surface, sqrt(-g_tt(r)) / sqrt(-g_tt(R)), with the body's quadrupole J2 added
      to the surface potential in the weak-field form Phi = -(GM/R)(1 + J2/2) at
      the equator (GM/R taken from the metric as (1 + g_tt(R))/2);
    * orbital_velocity: the orbiting clock against a static clock at the orbit
      (d tau/dt = 1/u^t over sqrt(-g_tt)); negative: moving clocks run slow;
    * surface_rotation: a static clock at the surface against the surface clock
      carried round at angular velocity Omega_E (positive: the ground clock runs slow).
    """

    orbit_radius: float
    surface_radius: float
    surface_rotation: float
    j2: float
    direction: str
    orbit_rate: float
    surface_rate: float
    net: float
    gravitational: float
    orbital_velocity: float
    surface_rotation_part: float


def compare_clocks(model: Equatorial, orbit_radius: float, surface_radius: float, surface_rotation: float,
                   *, j2: float = 0.0, direction: str = "prograde") -> ClockComparison:
    """Rate of a clock on a circular equatorial orbit relative to a clock on the rotating surface.

    All inputs in the chart's geometrized units (``surface_rotation`` in 1/length);
    use :mod:`gravicat.physics.units` for SI. Raises InputError when either clock cannot exist.
    """
    orbit = model.circular(orbit_radius, direction)
    if not orbit["exists"]:
        raise InputError("--radius", f"{orbit_radius:g}", f"no {direction} circular orbit: {orbit['reason']}")
    static_orbit = model.static_observer(orbit_radius)
    static_surface = model.static_observer(surface_radius)
    surface = model.rotating_clock_rate(surface_radius, surface_rotation)
    if not static_surface["exists"] or surface is None:
        raise InputError("--surface-radius", None, f"no clock can rotate at {surface_rotation:g} on the surface "
                                                   f"r = {surface_radius:g}: it would move faster than light")
    if not static_orbit["exists"]:
        raise InputError("--radius", f"{orbit_radius:g}", "inside the static limit: no static reference clock")
    potential = (1 - static_surface["clock_rate"] ** 2) / 2  # GM/R from the metric: -g_tt = 1 - 2GM/R
    quadrupole = 1 - j2 * potential / 2  # rate factor for Phi_J2 = -(GM/R) J2/2 at the equator
    orbit_rate = orbit["clock_rate"]
    surface_rate = surface * quadrupole
    grav = static_orbit["clock_rate"] / (static_surface["clock_rate"] * quadrupole) - 1
    vel = orbit_rate / static_orbit["clock_rate"] - 1
    rot = static_surface["clock_rate"] / surface - 1
    net = orbit_rate / surface_rate - 1
    return ClockComparison(float(orbit_radius), float(surface_radius), float(surface_rotation), float(j2),
                           direction, orbit_rate, surface_rate, net, grav, vel, rot)


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
