"""Screening: candidates judged at fixed points with the engine's curvature and the shared claims."""

from __future__ import annotations

import ast
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from gravicat.physics.claims import (
    asymptotic_residuals,
    field_equation_residuals,
    metric_difference,
    riemann_residuals,
    signature_defect,
)
from gravicat.repair.jets import _J, _Evaluator, _flint, _key, _NotQuadratic, _Prec, _Undefined, _zero
from gravicat.repair.model import _Model, _PointEnv
from gravicat.repair.reports import _ASYM_EXP, _ASYM_PREC, _PREC

if TYPE_CHECKING:
    from gravicat.engine.curvature import BallCurvature

# =========================================================================== the engine's curvature at a point


def ball_curvature(gj, coords=None) -> BallCurvature:
    """The engine's curvature at a point (:class:`gravicat.engine.curvature.BallCurvature`, the same
    formulas ``check`` proves with), from the second-order jets of g there."""
    from gravicat.engine.curvature import BallCurvature

    n = len(gj)
    z = _zero()
    g = [[gj[a][b].v for b in range(n)] for a in range(n)]
    dg = [[[gj[a][b].d.get(c, z) for b in range(n)] for a in range(n)] for c in range(n)]
    ddg = [[[[gj[a][b].h.get(_key(c, d), z) for b in range(n)] for a in range(n)] for d in range(n)]
           for c in range(n)]
    return BallCurvature(g, dg, ddg, coords)


class _JetMatter:
    """The matter of a candidate at a point, from its jets, for the shared claim residuals
    (:class:`gravicat.physics.claims.Matter`)."""

    def __init__(self, model: _Model, vals: dict, z):
        self.model = model
        self.vals = vals
        self.z = z
        self.A = [vals.get(("potential", x)) for x in model.coords]
        self._pi8 = 8 * _flint().arb.pi()

    def cosmological_constant(self):
        lam = self.vals.get(("cosmological-constant",))
        return None if lam is None or lam.v == 0 else lam.v

    def dA(self, b, a):
        A = self.A[b]
        return A.d.get(a, self.z) if A is not None else self.z

    def ddA(self, b, c, a):
        A = self.A[b]
        return A.h.get(_key(c, a), self.z) if A is not None else self.z

    def _vec(self, *key):
        return [(self.vals.get((*key, x)) or _J(self.z)).v for x in self.model.coords]

    def velocity(self):
        return self._vec("fluid", "velocity")

    def rho8(self):
        return self.vals[("fluid", "density")].v * self._pi8

    def p8(self):
        p = self.vals.get(("fluid", "pressure"))
        return p.v * self._pi8 if p is not None else self.z

    def null_vector(self):
        return self._vec("null-dust", "vector")

    def null_rho8(self):
        return self.vals[("null-dust", "density")].v * self._pi8


def field_equation_residual(model: _Model, vals: dict, curv: BallCurvature) -> dict:
    """The field-equation residual of the chart's claim at a point (label -> ball): the shared
    :func:`gravicat.physics.claims.field_equation_residuals` on the engine's ball backend."""
    return field_equation_residuals(curv, model.claim, _JetMatter(model, vals, curv.zero))


def riemann_values(gj) -> list:
    """R^a_bcd (c < d) at a point from the jets of g (the shared flat-when residual)."""
    return list(riemann_residuals(ball_curvature(gj)).values())


# =========================================================================== claims


class _Claim:
    """One check a candidate must satisfy at every point.

    ``measure(vals, point)`` returns a non-negative float (0 when it holds at the point,
    ``None`` when the claim cannot be evaluated there). ``strict``: an evaluation failure
    (the candidate is undefined at a point of the domain) rejects the candidate.
    """

    name: str = ""
    strict: bool = True
    variant: Any = "base"

    def measure(self, screen: _Screen, vals: dict, point: _PointEnv, cand) -> float | None:
        raise NotImplementedError


def _sq(components) -> float | None:
    """0.0 when every ball contains 0, else the sum of squared midpoints (as a float)."""
    if all(x.contains(0) for x in components):
        return 0.0
    total = 0.0
    for x in components:
        if not x.contains(0):
            m = abs(float(x.mid()))
            total += m * m if m < 1e150 else 1e300
    return max(total, 1e-300)


class _FieldEquations(_Claim):
    name = "field-equations"

    def __init__(self, model: _Model):
        self.model = model
        self.claim = model.claim

    def residual(self, vals, curv: BallCurvature) -> list:
        return list(field_equation_residual(self.model, vals, curv).values())

    def measure(self, screen, vals, point, cand):
        curv = screen.curvature(vals, point, cand)
        return _sq(self.residual(vals, curv))


class _Signature(_Claim):
    name = "signature"

    def measure(self, screen, vals, point, cand):
        from gravicat.engine.curvature import inertia

        g = [[x.v for x in row] for row in vals["g"]]
        try:
            counts, certain = inertia(g)
        except ValueError:
            raise _Undefined("the metric is not finite here") from None
        if not certain:
            raise _Undefined("the metric may be degenerate here")
        return float(signature_defect(counts, len(g)))


class _Limit(_Claim):
    """``limits:NAME``: the metric with the limit's substitutions equals the target chart's metric."""

    strict = False

    def __init__(self, name: str, model: _Model, set_: dict[str, ast.expr], coords: dict[str, ast.expr],
                 target: _Model):
        self.name = f"limits:{name}"
        self.variant = ("limit", name)
        self.model = model
        self.set = set_
        self.coord_subs = coords
        self.target = target
        self._theirs: dict = {}

    def point(self, point: _PointEnv) -> _PointEnv:
        env = point.env(0)
        ev = _Evaluator(env, {}, point.table, 0)
        new = {p: ev.ev(t).v for p, t in self.set.items()}
        env2 = {**env, **{p: _J(v) for p, v in new.items()}}
        ev2 = _Evaluator(env2, {}, point.table, 0)
        new.update({x: ev2.ev(t).v for x, t in self.coord_subs.items()})
        return point.varied(new)

    def theirs(self, point: _PointEnv):
        if point.index not in self._theirs:
            values = {}
            for mine, their in zip(self.model.coords, self.target.coords, strict=True):
                values[their] = point.values[mine]
            for p in self.target.params:
                values[p] = point.values[p]
            tp = _PointEnv(self.target, values, point.index, point.seed)
            try:
                with _Prec(_PREC):
                    self._theirs[point.index] = self.target.evaluate(tp, {}, None, 0)["g"]
            except (_Undefined, _NotQuadratic, ZeroDivisionError):
                self._theirs[point.index] = None
        return self._theirs[point.index]

    def measure(self, screen, vals, point, cand):
        theirs = self.theirs(point)
        if theirs is None:
            return None
        ours = [[x.v for x in row] for row in vals["g"]]
        mine = [[x.v for x in row] for row in theirs]
        return _sq(list(metric_difference(ours, mine, self.model.n, lambda i, j: (i, j)).values()))


class _Flat(_Claim):
    """``limits:flat-when[...]``: the Riemann tensor vanishes under the substitution."""

    strict = False

    def __init__(self, name: str, index: int, subs: dict[str, ast.expr]):
        self.name = name
        self.variant = ("flat", index)
        self.subs = subs

    def point(self, point: _PointEnv) -> _PointEnv:
        env = point.env(0)
        ev = _Evaluator(env, {}, point.table, 0)
        return point.varied({p: ev.ev(t).v for p, t in self.subs.items()})

    def measure(self, screen, vals, point, cand):
        return _sq(riemann_values(vals["g"]))


class _Asymptotic(_Claim):
    """``limits:asymptotically-flat``: g_tt = -(1 - 2M/r + O(1/r**2)), screened at r = 2**120."""

    strict = False
    variant = "asym"
    name = "limits:asymptotically-flat"

    def __init__(self, radial: str, mass: str | None):
        self.radial = radial
        self.mass = mass

    def point(self, point: _PointEnv) -> _PointEnv:
        return point.varied({self.radial: _flint().arb(2) ** _ASYM_EXP})

    def measure(self, screen, vals, point, cand):
        gtt = vals["g"][0][0].v
        big = _flint().arb(2) ** _ASYM_EXP
        tol = _flint().arb(2) ** -40
        mass = point.values[self.mass] if self.mass is not None else None
        res = asymptotic_residuals(gtt, (gtt + 1) * big, mass)  # c0, c1 of g_tt = c0 + c1/r at r = 2**120
        c0 = res["g_tt + 1"]
        if not abs(c0) < tol:
            return 1.0 + min(abs(float(c0.mid())), 1e300)
        if mass is None:
            return 0.0
        c1 = res["r*(g_tt + 1)"]
        if not abs(c1) < tol:
            return min(abs(float(c1.mid())), 1e300)
        return 0.0


# =========================================================================== screening


@dataclass
class _Edit:
    key: tuple
    path: tuple
    kind: str
    detail: str
    fn: Callable[[ast.AST], ast.AST]


@dataclass
class _Cand:
    edits: tuple[_Edit, ...]
    trees: dict[tuple, ast.expr]  # re-parsed edited trees by target key
    texts: dict[tuple, str]  # canonical texts by target key


@dataclass
class _Verdict:
    ok: bool
    score: float  # residual of the first failing claim at the first point (smaller: closer)
    fingerprint: tuple | None = None


class _Screen:
    """The fixed points, the claims and the cached values of the unedited chart."""

    def __init__(self, model: _Model, points: list[_PointEnv], claims: list[_Claim], failing: set[str]):
        self.model = model
        self.points = points
        self.claims = claims
        self.failing = failing
        self._base: dict = {}
        self._base_curv: dict = {}
        self._claim_points: dict = {}

    def claim_point(self, claim: _Claim, point: _PointEnv) -> _PointEnv:
        if claim.variant == "base":
            return point
        key = (claim.variant, point.index)
        if key not in self._claim_points:
            try:
                with _Prec(_PREC):
                    self._claim_points[key] = claim.point(point)
            except (_Undefined, ZeroDivisionError):
                self._claim_points[key] = None
        return self._claim_points[key]

    def base(self, variant, point: _PointEnv, order: int):
        key = (variant, point.index, order)
        if key not in self._base:
            try:
                self._base[key] = self.model.evaluate(point, {}, None, order)
            except (_Undefined, _NotQuadratic, ZeroDivisionError):
                self._base[key] = None
        return self._base[key]

    def values(self, claim: _Claim, point: _PointEnv, cand: _Cand | None):
        order = 0 if isinstance(claim, (_Signature, _Limit, _Asymptotic)) else 2
        p = self.claim_point(claim, point)
        if p is None:
            return None, None
        base = self.base(claim.variant, p, order)
        over = cand.trees if cand is not None else {}
        if cand is None:
            if base is None:
                raise _Undefined("the chart is undefined here")
            return base, p
        return self.model.evaluate(p, over, base, order), p

    def curvature(self, vals, point, cand):
        if cand is not None and not any(k in self.model.metric_keys
                                        for k in self.model.dirty(cand.trees)):
            key = point.index
            if key not in self._base_curv:
                self._base_curv[key] = ball_curvature(vals["g"], self.model.coords)
            return self._base_curv[key]
        return ball_curvature(vals["g"], self.model.coords)

    def prepare(self) -> None:
        """Compute the cached values of the unedited chart (before forking workers)."""
        with _Prec(_PREC):
            for claim in self.claims:
                prec = _ASYM_PREC if isinstance(claim, _Asymptotic) else _PREC
                with _Prec(prec):
                    for p in self.points:
                        try:
                            self.values(claim, p, None)
                        except (_Undefined, _NotQuadratic, ZeroDivisionError):
                            pass
                        if isinstance(claim, _Limit):
                            claim.theirs(p)

    def judge(self, cand: _Cand | None) -> _Verdict:
        score = None
        with _Prec(_PREC):
            for claim in self.claims:
                prec = _ASYM_PREC if isinstance(claim, _Asymptotic) else _PREC
                with _Prec(prec):
                    for p in self.points:
                        try:
                            vals, cp = self.values(claim, p, cand)
                            if vals is None:
                                continue
                            m = claim.measure(self, vals, cp, cand)
                        except (_Undefined, _NotQuadratic, ZeroDivisionError, ValueError):
                            if claim.strict:
                                return _Verdict(False, math.inf if score is None else score)
                            continue
                        if m is None:
                            continue
                        if score is None and claim.name in self.failing:
                            score = m
                        if m > 0:
                            return _Verdict(False, m if score is None else score)
            return _Verdict(True, 0.0, self.fingerprint(cand))

    def fingerprint(self, cand: _Cand | None) -> tuple:
        """Values of the metric and matter fields at the points (30 digits): equal metrics, equal prints."""
        out = []
        for p in self.points:
            vals = self.model.evaluate(p, cand.trees if cand else {}, self.base("base", p, 0), 0)
            n = self.model.n
            for a in range(n):
                for b in range(a, n):
                    out.append(vals["g"][a][b].v.mid().str(30, radius=False))
            for k in self.model.matter_keys:
                out.append(vals[k].v.mid().str(30, radius=False))
        return tuple(out)
