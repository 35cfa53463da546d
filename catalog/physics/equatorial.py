"""The equatorial plane of a stationary, axisymmetric chart: horizons, observers, circular orbits.

See :mod:`gravicat.physics.orbits` for the physics and the conventions. :class:`EquatorialChart`
derives the equatorial series of the metric symbolically once; :class:`Equatorial` binds numeric
parameters and answers with floats (refined at 40 digits).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from functools import cached_property
from typing import Any

from gravicat.errors import InputError
from gravicat.physics.landmarks import DIRECTIONS, LandmarkSearch
from gravicat.physics.parameters import Parameters
from gravicat.physics.roots import DPS, FAR, Roots, RootSearch, _mp_real, _mp_sqrt

_ORBIT_KEYS = ("disc", "Omega", "norm", "ut", "energy", "L", "dE", "dL", "dOmega")


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
        self._np_components = sp.lambdify(self.args, list(self.components), modules="numpy")
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



class Equatorial(RootSearch, LandmarkSearch):
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
        """A, A', A'', B, B', B'', C, C', C'' at the radii ``r`` (floats; nan where not real)."""
        return self._real_np(self.chart._np_series, r)

    def components_np(self, r):
        """A, B, C (g_tt, g_tphi, g_phiphi on the equator) at the radii ``r``: the cheaper part of
        :meth:`series_np` that the effective potential needs."""
        return self._real_np(self.chart._np_components, r)

    def _real_np(self, fn, r):
        import numpy as np

        r = np.asarray(r, dtype=float)
        with np.errstate(all="ignore"):
            raw = fn(r, *self._pf)
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

    # ---- roots: RootSearch (gravicat.physics.roots)

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

    def radius_in_domain(self, radius: float) -> bool:
        """False when a relation of the chart's domain in the radial coordinate and the parameters alone (such as
        3*r**2 < R**2 - a**2) fails at ``radius``; relations that involve other coordinates are not judged here."""
        import sympy as sp

        r = self.chart.radial
        point = {**self._exact, r: sp.Float(radius, DPS)}
        for rel in self.chart.spec.domain:
            if not rel.has(r) or not rel.free_symbols <= set(point):
                continue
            if rel.subs(point) is sp.false:
                return False
        return True

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

    # ---- landmarks: LandmarkSearch (gravicat.physics.landmarks)

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
        if (lower is not None and radius <= lower) or (upper is not None and radius >= upper) or \
                not self.radius_in_domain(radius):
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
        # relative to the size of the terms of g(u, u): a chart whose metric is ~1e33 at the radius (Linet-Tian)
        # cancels large terms, and an absolute float residual there says nothing about the orbit
        norm_residual = float(abs(u @ g @ u + 1) / max(1.0, float(np.abs(u) @ np.abs(g) @ np.abs(u))))
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
