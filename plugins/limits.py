"""Verifier ``limits``: declared limits, flat-when substitutions and asymptotic flatness.

* each limit of the chart: substitute the parameters (and coordinates) and
  compare with the target chart "ENTRY:CHART" (resolved through
  ``spec.extra["resolve"]``), component by component, exactly;
* each ``flat-when`` substitution: the Riemann tensor vanishes identically;
* tag ``asymptotically-flat``: g_tt = -(1 - 2M/r + O(1/r^2)) at large r, for
  the radial coordinate ``r`` (series in 1/r).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl
from gravicat.physics.claims import MASS, RADIAL

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


def _filter_relations(rels):
    import sympy as sp

    out = []
    for rel in rels:
        if rel is sp.true or rel == sp.true:
            continue
        if rel is sp.false or rel == sp.false:
            continue  # a range made empty by the substitution no longer constrains the limit
        out.append(rel)
    return tuple(out)


def _subs_relations(rels, mapping):
    """Substitute into domain and range relations; a relation the substitution makes undefined
    (a side ``0/0`` or ``1/0``, e.g. ``r > Q**2/M`` at ``M = 0``) no longer constrains the limit
    and is dropped, like one it makes trivially true or false."""
    import sympy as sp

    bad = (sp.nan, sp.zoo, sp.oo, -sp.oo)
    out = []
    for rel in rels:
        try:
            sides = [_subs(sp.sympify(a), mapping) for a in rel.args]
            if any(side.has(*bad) for side in sides):
                continue
            out.append(rel.func(*sides))
        except (TypeError, ValueError, ZeroDivisionError):
            continue
    return _filter_relations(out)


def _subs(expr, mapping):
    """Simultaneous substitution of symbols (structural: much cheaper than ``subs``)."""
    if not mapping:
        return expr
    if all(k.is_Symbol for k in mapping):
        return expr.xreplace(mapping)
    return expr.subs(mapping, simultaneous=True)


def _expand_flint(geometry, i, radial):
    """(c0, c1) of g_tt = c0 + c1/r + O(1/r^2) on the flint path, or None when not applicable there."""
    F = geometry.field
    if F is None:
        return None
    gen = next((g for g in F.base if g.kind == "coord" and g.sym == radial), None)
    if gen is None:
        return None
    el = geometry.g[i][i]
    if not el.is_plain():
        return None
    # every other generator must be independent of the radial coordinate
    ri = geometry.coords.index(radial)
    if any(F.dgen(g.index, ri) is not None for g in F.base if g is not gen):
        return None
    num, den = F.coefficients_in(el.num0(), gen.index), F.coefficients_in(el.d, gen.index)
    dn, dd = max(num), max(den)
    if dn > dd:
        return None  # g_tt grows: let the series say so
    from gravicat.engine.ratfun import Elem

    def E(p):
        return Elem(F, {0: p}, F.pone) if p is not None else F.zero

    lc = E(den[dd])
    c0 = E(num.get(dd)) / lc
    # g_tt - c0 = (N - c0 D)/D; its 1/r coefficient is coeff_{dd-1}(N) / lc - c0 coeff_{dd-1}(D) / lc
    c1 = (E(num.get(dd - 1)) - c0 * E(den.get(dd - 1))) / lc if dd >= 1 else F.zero
    return geometry.to_sympy(c0), geometry.to_sympy(c1)


class LimitsCheck:
    name = "limits"
    version = "3"  # 3: a reduces-to naming no chart fails
    screens_repairs = True  # repair runs it for the baseline and the proof of a repaired chart

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        spec = geometry.spec
        out = []
        for lim in spec.limits:
            out.append(self._limit(geometry, lim))
        for i, sub in enumerate(spec.flat_when):
            out.append(self._flat(geometry, sub, i))
        if "asymptotically-flat" in spec.tags:
            out.append(self._asymptotic(geometry))
        if not out:
            from gravicat.plugins._common import result

            out.append(
                result(self.name, "skipped", "none", "no limits, flat-when or asymptotically-flat tag declared", self)
            )
        return out

    # -- declared limits -----------------------------------------------------
    def _limit(self, geometry, lim):
        import sympy as sp

        from gravicat.engine.geometry import prove_zero
        from gravicat.physics.claims import metric_difference
        from gravicat.plugins._common import from_outcome, resolver, result

        check = f"{self.name}:{lim.name}"
        spec = geometry.spec
        resolve = resolver(geometry)
        if resolve is None:
            return result(check, "skipped", "none", f"cannot resolve {lim.reduces_to!r}: no resolver available", self)
        target = resolve(lim.reduces_to)
        if target is None:  # a limit naming nothing is a broken claim, not a skipped one (issue 14 item 12)
            return result(check, "fail", "none",
                          f"target chart {lim.reduces_to!r} not found (looked in this document, the user's "
                          "catalogue and the bundled catalogue)", self)
        n = geometry.n
        if len(target.coords) != n:
            return result(
                check, "fail", "none", f"{lim.reduces_to} has {len(target.coords)} coordinates, this chart {n}", self
            )
        mapping = dict(lim.set)
        mapping.update(lim.coordinates)
        ours = sp.Matrix(spec.metric).applyfunc(lambda e: _subs(sp.sympify(e), mapping))
        if any(e.has(sp.zoo, sp.nan, sp.oo, -sp.oo) for e in ours):
            return result(check, "fail", "none", "the substitution makes the metric singular", self)
        # the target's coordinates by position, its parameters by name
        rename = {tc: oc for tc, oc in zip(target.coords, spec.coords, strict=True) if tc != oc}
        by_name = {str(p): p for p in spec.params}
        rename.update({p: by_name[str(p)] for p in target.params if str(p) in by_name and by_name[str(p)] != p})
        theirs = sp.Matrix(target.metric).applyfunc(lambda e: _subs(sp.sympify(e), rename))
        note = ""
        renamed = [f"{tc}->{oc}" for tc, oc in zip(target.coords, spec.coords, strict=True) if str(tc) != str(oc)]
        if renamed:
            note = f" (target coordinates matched by position: {', '.join(renamed)})"
        exprs = metric_difference(ours.tolist(), theirs.tolist(), n, lambda i, j: geometry.label("g", i, j))
        rels = _subs_relations(tuple(spec.param_ranges) + tuple(spec.domain), mapping)
        outcome = prove_zero(
            exprs,
            spec.coords,
            [p for p in spec.params if p not in lim.set],
            rels,
            seed=geometry.seed,
            budget=geometry.budget,
            samples=geometry.samples,
            what=f"the limit metric and {lim.reduces_to}",
        )
        return from_outcome(check, outcome, self, detail_prefix=f"reduces to {lim.reduces_to}{note}")

    # -- flat-when -----------------------------------------------------------
    def _flat(self, geometry, sub, i):
        import dataclasses

        import sympy as sp

        from gravicat.engine.geometry import Geometry
        from gravicat.physics.claims import riemann_residuals
        from gravicat.plugins._common import from_outcome

        spec = geometry.spec
        label = ", ".join(f"{k}={v}" for k, v in sub.items())
        check = f"{self.name}:flat-when[{label}]"
        metric = sp.ImmutableMatrix(sp.Matrix(spec.metric).applyfunc(lambda e: _subs(sp.sympify(e), sub)))
        flat = dataclasses.replace(
            spec,
            metric=metric,
            params=tuple(p for p in spec.params if p not in sub),
            domain=_subs_relations(spec.domain, sub),
            param_ranges=_subs_relations(spec.param_ranges, sub),
            potential=None,
            fluid=None,
            null_dust=None,
            observers={},
            invariants={},
            limits=(),
            flat_when=(),
            cosmological_constant=None,
        )
        geo = Geometry(flat, seed=geometry.seed, budget=geometry.budget, samples=geometry.samples)
        from gravicat.plugins._common import result

        if geo.path == "flint":
            try:
                degenerate = geo.is_zero(geo.det)
            except ZeroDivisionError:  # no pivot in the exact elimination: det g is identically 0
                degenerate = True
            if degenerate:
                return result(
                    check,
                    "skipped",
                    "none",
                    f"this chart degenerates when {label} (det g is identically 0), so flatness is not "
                    "defined in it; the substitution applies to the entry's other charts",
                    self,
                )

        outcome = geo.verify(riemann_residuals, what=f"flatness (Riemann = 0) when {label}")
        return from_outcome(check, outcome, self, detail_prefix=f"flat when {label}")

    # -- asymptotic flatness -------------------------------------------------
    def _asymptotic(self, geometry):
        import sympy as sp

        from gravicat.engine.geometry import _run_limited
        from gravicat.physics.claims import asymptotic_residuals, mass_parameter, radial_coordinate
        from gravicat.plugins._common import result

        check = f"{self.name}:asymptotically-flat"
        spec = geometry.spec
        radial = radial_coordinate(spec.coords)
        if radial is None:
            return result(
                check, "skipped", "none", f"no radial coordinate (one of {', '.join(RADIAL)}) in this chart", self
            )
        time_i = 0
        gtt = sp.sympify(spec.metric[time_i, time_i])
        mass = mass_parameter(spec.params)
        eps = sp.Dummy("eps", positive=True)

        def expand():
            e = gtt.subs(radial, 1 / eps)
            ser = sp.series(e, eps, 0, 2).removeO()
            c0 = sp.simplify(ser.coeff(eps, 0))
            c1 = sp.simplify(ser.coeff(eps, 1))
            return c0, c1

        res = _expand_flint(geometry, time_i, radial)
        err = None
        if res is None:
            res, err = _run_limited(expand, geometry.budget)
        if err:
            return result(check, "inconclusive", "none", f"series of g_tt in 1/{radial} not computed ({err})", self)
        c0, c1 = res
        resid = asymptotic_residuals(c0, c1, mass)
        if sp.simplify(resid["g_tt + 1"]) != 0:
            return result(
                check,
                "fail",
                "symbolic",
                f"g_tt -> {c0} as {radial} -> oo, not -1",
                self,
                counterexample={"point": {str(radial): "oo"}, "component": "g_tt + 1", "residual": sp.sstr(c0 + 1)},
            )
        if mass is not None:
            if sp.simplify(resid["r*(g_tt + 1)"]) != 0:
                return result(
                    check,
                    "fail",
                    "symbolic",
                    f"g_tt = -1 + ({c1})/{radial} + O(1/{radial}^2), expected -1 + 2*{mass}/{radial}",
                    self,
                    counterexample={
                        "point": {str(radial): "oo"},
                        "component": f"{radial}*(g_tt + 1)",
                        "residual": sp.sstr(sp.simplify(resid["r*(g_tt + 1)"])),
                    },
                )
            return result(
                check, "pass", "symbolic", f"g_tt = -(1 - 2*{mass}/{radial} + O(1/{radial}^2)) as {radial} -> oo", self
            )
        return result(
            check,
            "pass",
            "symbolic",
            f"g_tt = -1 + ({c1})/{radial} + O(1/{radial}^2) as {radial} -> oo (mass {sp.sstr(c1 / 2)}; no parameter "
            f"named {' or '.join(MASS)} to compare with)",
            self,
        )


@hookimpl
def register_verifiers():
    return [LimitsCheck()]
