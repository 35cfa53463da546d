"""The prepared chart shared by every verifier of one run.

:class:`Geometry` takes a :class:`gravicat.format.chartspec.ChartSpec` and holds the
metric, its inverse and its first and second derivatives, computed once, and
the curvature (Christoffel symbols, Riemann, Ricci, Ricci scalar, Einstein,
Kretschmann, Weyl square), computed lazily and cached.

Two exact representations ("paths"):

* ``"flint"``: every expression becomes an element of an exact differential
  field of multivariate rational functions over python-flint
  (:mod:`gravicat.engine.ratfun`): coordinates, parameters, values of arbitrary
  functions and their derivatives (``a``, ``a_t``, ``a_tt``...), ``cos`` of an
  angle with ``sin`` as a square-root generator (``sin**2 = 1 - cos**2``,
  ``d/dtheta cos = -sin``), other square roots, nested roots
  ``sqrt(A + c sqrt(B))`` such as Kerr-Schild's ``r`` as algebraic generators
  (defining polynomial, implicit differentiation; other nestings as a tower),
  real roots ``b**(p/q)`` (``q`` = 3..5) as root generators with ``rho**q = P``
  applied (Lemaitre's radius), ``exp``, ``log``, ``LambertW`` and symbolic
  powers, each with its derivation rule. ``Abs``, ``sign``, ``Heaviside`` and
  ``DiracDelta`` whose argument's sign the domain decides are replaced first
  (``sqrt(r**2) = r`` where ``r > 0``). Fractions are kept reduced by gcd, so an
  identity is proved when its residual reduces to 0. A sum of several
  coordinate-dependent roots or transcendental functions in the metric
  (``1 + m1/sqrt(R1) + m2/sqrt(R2)``) is carried as an opaque function of the
  coordinates (:attr:`Geometry.opaque`), expanded only inside zero tests.
* ``"sympy"``: the fallback when a chart uses something the field cannot
  represent (``Abs`` or ``sign`` the domain does not decide, inverse
  trigonometric functions, other branches of ``LambertW``...): sympy
  expressions, simplified under the domain in the same way, with ``cancel`` as
  the normal form and ``simplify`` as a last resort, run in a child process
  under the budget. A value that still holds ``DiracDelta``, ``Heaviside``,
  ``sign`` or ``Abs`` is no result (:meth:`Geometry.prove_values` reports it
  as an error, so the verifier says ``inconclusive``).
  :attr:`Geometry.path` and :attr:`Geometry.fallback_reason` say which.

Proof strategy (:meth:`Geometry.verify`): a residual function ``fn(X)``
returning named components is first evaluated at random rational points of
the domain (``X`` is then a :class:`PointData`: only g and its first and
second derivatives come from the symbolic side, everything else is computed
per point in exact rationals, or in interval arithmetic when a value is not
rational, for instance with ``pi`` or ``exp``); any definite non-zero value is
a failure with a counterexample. Then ``fn(geometry)`` is computed
symbolically and every component must reduce to zero within the time budget
(CPU seconds), else the result is ``inconclusive`` (method ``sampled``), never
``pass``.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from contextlib import contextmanager
from dataclasses import dataclass, field
from fractions import Fraction
from functools import cached_property
from typing import Any

import flint
import sympy as sp

from gravicat.engine.curvature import BallCurvature, _ball_descartes, _Curvature, _descartes, _invert, inertia
from gravicat.engine.pointdata import _MP_EXTRA, PointData
from gravicat.engine.ratfun import BudgetExceeded, Elem, Field, Unsupported, arb_precision, settle_signs, unsettled
from gravicat.engine.sampling import DIGITS, Sampler

__all__ = [
    "Geometry",
    "PointData",
    "BallCurvature",
    "Outcome",
    "prove_zero",
    "inertia",
    "BudgetExceeded",
    "Unsupported",
]
# re-exported for the code that imported them from here before the split
_REEXPORTED = (_Curvature, _invert, _descartes, _ball_descartes, _MP_EXTRA, arb_precision)

DEFAULT_BUDGET = 20.0
_INEXACT = {False: "interval arithmetic", True: f"{DIGITS + 10}-digit floating point"}

DEFAULT_SAMPLES = 8
QUICK_SAMPLES = 3  # points evaluated before the symbolic proof (the rest only when it does not succeed)



# ---------------------------------------------------------------------------
# outcome of one verification


@dataclass
class Outcome:
    """Result of :meth:`Geometry.verify` (the verifier turns it into a CheckResult)."""

    status: str  # pass | fail | inconclusive | skipped
    method: str  # symbolic | sampled | none
    detail: str
    counterexample: dict | None = None
    points: int = 0  # sample points that agreed
    inexact_points: int = 0  # of which evaluated in interval arithmetic
    path: str = ""
    nonzero: dict = field(default_factory=dict)  # component -> sympy string (symbolic residuals)


def _fmt_number(v) -> str:
    if isinstance(v, flint.fmpq):
        return str(v)
    if isinstance(v, flint.arb):
        return "~" + v.str(12, radius=False)
    return "~" + sp.sstr(sp.Float(v, 12)) if not isinstance(v, (int, Fraction)) else str(v)


# ---------------------------------------------------------------------------
# the symbolic chart


def _spec_exprs(spec):
    """Every expression of the chart that may be converted to a field element."""
    out = spec.claim_expressions()
    for u in spec.observers.values():
        out.extend(u)
    for inv in spec.invariants.values():
        out.append(inv.value)
    out.extend(spec.extra.get("_exprs", ()))  # prove_zero's expressions
    out.append(sp.pi)
    return [sp.sympify(e) for e in out]


class Geometry(_Curvature):
    """A chart prepared for verification.

    Parameters: ``spec`` (ChartSpec), ``seed`` for the sample points,
    ``budget`` seconds per symbolic proof, ``samples`` number of points,
    ``path`` to force ``"sympy"`` (for comparisons and tests).

    Public attributes and methods:

    * ``spec``, ``coords``, ``params``, ``n``, ``path`` ("flint" / "sympy"),
      ``fallback_reason`` (why not flint, or ""), ``field`` (the flint
      :class:`~gravicat.engine.ratfun.Field` or None);
    * exact objects in the path's representation (flint elements or sympy
      expressions; lists indexed by coordinate number): ``g``, ``dg[c][a][b]``,
      ``ddg[c][d][a][b]``, ``ginv``, ``det``, ``christoffel[a][b][c]``
      (Gamma^a_bc), ``christoffel_first``, ``riemann[a][b][c][d]``
      (R^a_bcd), ``riemann_lower``, ``ricci``, ``ricci_scalar``, ``einstein``,
      ``ricci_mixed``, ``ricci_square``, ``kretschmann``, ``weyl_square``
      (cached; computed on first use);
    * ``val(expr)``, ``dval(expr, i)``, ``ddval(expr, i, j)``: an expression of
      the chart and its derivatives in the same representation;
    * ``to_sympy(v)``: any such value as a sympy expression in the chart's own
      symbols (``cos(theta)`` etc.), factored; ``to_sympy(v, opaque=True)``
      keeps opaque sub-expressions as placeholder functions, explained by
      ``legend()``; ``opaque`` maps each placeholder to its expression;
    * ``is_zero(v)``: exact zero test of the path;
    * ``sample_points()``, ``draw_point()``: :class:`PointData` (seeded, cached; generic points,
      see :mod:`gravicat.engine.sampling`); ``degeneracy()``: why the inverse metric does not exist on
      the domain, or None;
    * ``verify(fn, ...)``: sampled stage then proof, an :class:`Outcome`;
      ``prove_values(fn)``: symbolic values within the budget;
    * ``label(name, *indices)``: "R[t,r]"-style component label;
    * ``vanishes(v)``: cheap structural zero test (skipping work only).

    The budget is CPU time of this process (``time.process_time``) on the
    flint path, so a loaded machine does not turn proofs into timeouts; the
    sympy path runs in a child process under a wall-clock limit. In
    ``verify`` the budget covers the preparation the check needs (derivatives
    of the metric for the sample points, curvature) as well as the proof.
    """

    def __init__(
        self,
        spec,
        *,
        seed: int = 0,
        budget: float = DEFAULT_BUDGET,
        samples: int = DEFAULT_SAMPLES,
        path: str | None = None,
    ):
        self.spec = spec
        self.coords = tuple(spec.coords)
        self.params = tuple(spec.params)
        self.n = len(self.coords)
        self.seed = seed
        self.budget = budget
        self.samples = samples
        self.field: Field | None = None
        self.fallback_reason = ""
        self._dcache: dict = {}
        exprs = _spec_exprs(spec)
        if path != "sympy":
            try:
                self.field = Field(
                    self.coords,
                    self.params,
                    exprs,
                    functions=spec.functions,
                    alias_from=list(spec.metric),
                    relations=tuple(spec.param_ranges) + tuple(spec.domain),
                )
                self.g = [[self.field.element(spec.metric[i, j]) for j in range(self.n)] for i in range(self.n)]
                self.path = "flint"
            except Unsupported as e:
                self.field = None
                self.fallback_reason = str(e)
        if self.field is None:
            self.path = "sympy"
            self.g = [[self._settle(spec.metric[i, j]) for j in range(self.n)] for i in range(self.n)]
        self.zero = self.field.zero if self.field else sp.Integer(0)
        self.one = self.field.one if self.field else sp.Integer(1)

    # -- representation ------------------------------------------------------
    @property
    def metric(self):
        return self.spec.metric

    def _iz(self, v) -> bool:
        if isinstance(v, Elem):
            return not v.c
        return v == 0

    def _settle(self, e):
        """sympy path: ``e`` with ``Abs``, ``sign``, ``Heaviside`` and ``DiracDelta`` replaced where
        the domain and the parameter ranges decide their argument's sign (``sqrt(r**2) -> r`` for
        ``r > 0``; see :func:`gravicat.engine.ratfun.settle_signs`)."""
        return settle_signs(e, self.coords, tuple(self.spec.param_ranges) + tuple(self.spec.domain))

    def _nf(self, v):
        if self.field is not None:
            return v
        return sp.cancel(v) if v != 0 else v

    def is_zero(self, v) -> bool:
        """Exact zero test (flint: the reduced fraction is 0, opaque sub-expressions expanded; sympy:
        cancel, then simplify)."""
        if isinstance(v, Elem):
            if not v.c:
                return True
            F = v.F
            if not F.uses_alias(v):
                return False
            # expanding opaque sub-expressions can be costly: a point where v is certainly non-zero settles it
            for pd in self._sample(1):
                try:
                    with pd.precision():
                        if pd.zero_test(pd.ev(v)) is False:
                            return False
                except (ZeroDivisionError, ValueError):
                    pass
            return F.is_zero(v)
        v = self._settle(v)
        if v == 0 or sp.cancel(v) == 0:
            return True
        return self._settle(sp.simplify(v)) == 0

    def val(self, expr):
        """An expression of the chart as a value of this path."""
        key = ("v", expr)
        r = self._dcache.get(key)
        if r is None:
            if self.field is not None:
                r = self.field.element(sp.sympify(expr))
            else:
                r = self._settle(expr)
            self._dcache[key] = r
        return r

    def dval(self, expr, i):
        key = ("d", expr, i)
        r = self._dcache.get(key)
        if r is None:
            r = self._diff(self.val(expr), i)
            self._dcache[key] = r
        return r

    def ddval(self, expr, i, j):
        i, j = min(i, j), max(i, j)
        key = ("dd", expr, i, j)
        r = self._dcache.get(key)
        if r is None:
            r = self._diff(self.dval(expr, i), j)
            self._dcache[key] = r
        return r

    def const(self, q):
        return self.field.const(q) if self.field else sp.Rational(q)

    def _diff(self, v, i):
        if isinstance(v, Elem):
            return v.diff(i)
        return sp.cancel(sp.diff(v, self.coords[i]))

    def to_sympy(self, v, opaque: bool = False):
        """A value of this path as a sympy expression in the chart's symbols.

        An opaque sub-expression (see :attr:`opaque`) appears as itself, its derivatives evaluated;
        with ``opaque=True`` as its placeholder function instead (compact; see :meth:`legend`)."""
        if isinstance(v, Elem):
            if v.F.uses_alias(v) and self.is_zero(v):
                return sp.Integer(0)  # zero only once the opaque sub-expressions are spelled out
            return v.F.to_sympy(v, opaque=opaque)
        return sp.factor(v) if v != 0 else sp.Integer(0)

    def label(self, name, *idx):
        names = self.__dict__.get("_coord_names")
        if names is None:
            names = self.__dict__["_coord_names"] = [str(c) for c in self.coords]
        return f"{name}[{','.join(names[i] for i in idx)}]"

    @property
    def opaque(self) -> dict:
        """Placeholder function application -> the sub-expression of the metric it stands for.

        On the flint path a sum of several coordinate-dependent roots or transcendental functions
        (``1 + m1/sqrt(R1) + m2/sqrt(R2)``, ``tanh(s (r + R)) - tanh(s (r - R))``) is carried as an
        opaque function of the coordinates with generic derivatives; zero tests substitute the
        explicit derivatives (see :meth:`is_zero`), so proofs stay exact."""
        if self.field is None:
            return {}
        return {ph: X for X, ph in self.field.alias_sub.items()}

    def legend(self) -> str:
        """The text "where X1(t, x) = ..." explaining the placeholders of ``to_sympy(v, opaque=True)``."""
        items = self.opaque
        if not items:
            return ""
        return "where " + "; ".join(f"{sp.sstr(ph)} = {sp.sstr(X)}" for ph, X in items.items())

    # -- derivatives of the metric (computed once) ---------------------------
    @cached_property
    def dg(self):
        n = self.n
        out = [[[None] * n for _ in range(n)] for _ in range(n)]
        for c in range(n):
            for a in range(n):
                for b in range(a, n):
                    out[c][a][b] = out[c][b][a] = (
                        self._diff(self.g[a][b], c) if not self._iz(self.g[a][b]) else self.zero
                    )
        return out

    @cached_property
    def ddg(self):
        n = self.n
        dg = self.dg
        out = [[[[None] * n for _ in range(n)] for _ in range(n)] for _ in range(n)]
        for c in range(n):
            for d in range(c, n):
                for a in range(n):
                    for b in range(a, n):
                        v = self._diff(dg[c][a][b], d) if not self._iz(dg[c][a][b]) else self.zero
                        out[c][d][a][b] = out[c][d][b][a] = out[d][c][a][b] = out[d][c][b][a] = v
        return out

    def _inverse(self):
        def pick(A, cands, col):
            if self.field is None:
                return min(cands, key=lambda r: sp.count_ops(A[r][col]))
            return min(cands, key=lambda r: sum(len(p) for p in A[r][col].c.values()) + len(A[r][col].d))

        return _invert(self.g, self.n, self._iz, self._nf, self.one, self.zero, pick)

    def degeneracy(self) -> str | None:
        """Why the inverse metric (hence curvature) does not exist on the domain, or None.

        ``"det g is identically zero"`` or ``"det g = 0 at every sampled point of the domain"``
        when points of the domain exist but none has an invertible metric; None when one has (det g
        is then certainly not identically zero) or when the domain gives no point at all. Checks that
        need the inverse are skipped with this reason; ``structure`` and ``signature`` report the
        failure. Cached."""
        if "_degeneracy" in self.__dict__:
            return self.__dict__["_degeneracy"]
        reason = None
        if not self._sample(1) and self.draw_point(need_inverse=False) is not None:
            reason = "det g = 0 at every sampled point of the domain"
            if self.field is not None:
                try:
                    with self.deadline(self.budget):
                        if self.is_zero(self.det):
                            reason = "det g is identically zero"
                except ZeroDivisionError:  # exact elimination found no pivot
                    reason = "det g is identically zero"
                except (BudgetExceeded, Unsupported):
                    pass
        self.__dict__["_degeneracy"] = reason
        return reason

    # -- budget --------------------------------------------------------------
    @contextmanager
    def deadline(self, seconds: float | None):
        """Cooperative time limit for flint computations (raises BudgetExceeded). Nested limits
        keep the earlier end: the preparation of a chart and the proof share one budget."""
        if self.field is None or seconds is None:
            yield
            return
        old = self.field.deadline
        end = time.process_time() + seconds
        self.field.deadline = end if old is None else min(old, end)
        try:
            yield
        finally:
            self.field.deadline = old

    # -- sampling ------------------------------------------------------------
    @property
    def sampler(self):
        """The generic sample-point generator of this chart (public name of the cached sampler)."""
        return self._sampler

    @cached_property
    def _sampler(self):
        angle_q = {}
        func_keys = []
        if self.field is not None:
            for g in self.field.base:
                if g.kind == "cos" and g.data["atom"] in self.coords:
                    angle_q[g.data["atom"]] = g.data["q"]
                if g.kind == "func":
                    func_keys.append(((g.data["func"], g.data["alpha"]), str(g.sym)))
        else:
            func_keys = [(k, str(s)) for k, s in self._sym_funcs.items()]
        return Sampler(
            self.coords,
            self.params,
            tuple(self.spec.param_ranges) + tuple(self.spec.domain),
            angle_q,
            func_keys,
            seed=self.seed,
        )

    @cached_property
    def _sym_funcs(self):
        """sympy path: function values and derivatives -> generator keys."""
        out = {}
        maxo = {}
        for e in _spec_exprs(self.spec):
            for d in e.atoms(sp.Derivative):
                f = d.expr
                maxo[f] = max(maxo.get(f, 0), sum(k for _, k in d.variable_count))
            for f in e.atoms(sp.core.function.AppliedUndef):
                maxo.setdefault(f, 0)
        for f in self.spec.functions:
            maxo.setdefault(f, 0)
        from itertools import combinations_with_replacement

        for f, o in maxo.items():
            for k in range(o + 4):
                for combo in combinations_with_replacement(range(len(f.args)), k):
                    alpha = tuple(combo.count(j) for j in range(len(f.args)))
                    sym = f if not k else sp.Derivative(f, *[(f.args[j], m) for j, m in enumerate(alpha) if m])
                    out[(f.func, alpha)] = sym
        return {k: v for k, v in out.items()}

    def draw_point(self, tries: int = 400, need_inverse: bool = True):
        """A new sample point (:class:`PointData`), or None when no valid point was found.

        The metric must be finite there, and invertible unless ``need_inverse`` is false."""
        import mpmath

        with mpmath.workdps(DIGITS + 10):
            return self._draw_point(tries, need_inverse)

    def _draw_point(self, tries, need_inverse):
        for _ in range(tries):
            s = self._sampler.draw()
            if s is None:
                continue
            try:
                if self.field is not None:
                    vals = dict(s.values)
                    vals.update(s.funcs)
                    for v, (u, q) in s.angles.items():
                        if any(g.kind == "coord" and g.sym == v for g in self.field.base):
                            with arb_precision():
                                vals[v] = 2 * q * flint.arb(flint.fmpq(u.numerator, u.denominator)).atan()
                    angles = {v: u for v, (u, q) in s.angles.items()}
                    pt = self.field.point(vals, angles)
                    pdata = PointData(self, s, pt)
                else:
                    pdata = PointData(self, s, None)
                _ = pdata.g  # the metric must be finite there
                if need_inverse:
                    _ = pdata.ginv
            except (ZeroDivisionError, ValueError, KeyError, TypeError, NameError):
                continue
            return pdata
        return None

    def _sample(self, k: int):
        """The first ``k`` seeded sample points (fewer if the domain gives none), drawn on demand."""
        pts = self.__dict__.setdefault("_pts", [])
        while len(pts) < min(k, self.samples) and self.__dict__.get("_attempts", 0) < self.samples * 3:
            self.__dict__["_attempts"] = self.__dict__.get("_attempts", 0) + 1
            p = self.draw_point()
            if p is None:
                self.__dict__["_attempts"] = self.samples * 3  # the domain gives no point: stop trying
                break
            pts.append(p)
        return pts[:k]

    def sample_points(self):
        """The seeded sample points (list of :class:`PointData`), drawn once."""
        return list(self._sample(self.samples))

    # -- verification --------------------------------------------------------
    def _sampled_stage(self, fn, what, points, counts):
        """Evaluate ``fn`` at ``points``; a definite non-zero gives a failing :class:`Outcome`."""
        import mpmath

        for pd in points:
            try:
                with mpmath.workdps(DIGITS + 10), arb_precision():
                    res = fn(pd)
            except (ZeroDivisionError, ValueError):
                continue
            bad = None
            inexact = False
            for name, v in res.items():
                z = pd.zero_test(v)
                if z is False:
                    bad = (name, v)
                    break
                if z is None:
                    inexact = pd.inexact = True
            if bad is not None:
                return Outcome(
                    "fail",
                    "sampled",
                    f"{what} do not hold at a sample point: {bad[0]} = {_fmt_number(bad[1])}",
                    counterexample={
                        "point": dict(pd.sample.shown),
                        "component": bad[0],
                        "residual": _fmt_number(bad[1]),
                    },
                    points=counts[0],
                    inexact_points=counts[1],
                    path=self.path,
                )
            counts[0] += 1
            counts[1] += inexact
        return None

    def verify(self, fn: Callable[[Any], dict], *, budget: float | None = None, what: str = "the claim") -> Outcome:
        """Sampled stage, then symbolic proof of ``fn(X) == 0`` component-wise.

        The first :data:`QUICK_SAMPLES` points are evaluated before the proof; the remaining
        ``samples`` points only when the proof does not succeed (as evidence for an inconclusive
        result, or to find a counterexample)."""
        budget = self.budget if budget is None else budget
        counts = [0, 0]  # agreeing points, of which inexact
        # one budget for the whole check: the symbolic preparation the sample points need (first and
        # second derivatives of the metric) counts against it as much as the proof does
        try:
            with self.deadline(budget):
                failed = self._sampled_stage(fn, what, self._sample(QUICK_SAMPLES), counts)
                if failed is not None:
                    return failed
                nonzero, err = self._symbolic(fn, budget)
        except BudgetExceeded:
            nonzero, err = {}, "budget"
        if err or nonzero:
            try:
                # after a spent budget, only what is already prepared may be evaluated
                with self.deadline(0.0 if err == "budget" else None):
                    failed = self._sampled_stage(fn, what, self.sample_points()[QUICK_SAMPLES:], counts)
            except BudgetExceeded:
                failed = None
            if failed is not None:
                return failed
        agreed, inexact = counts
        if not self._sample(1):
            sampled_note = "no valid sample point could be drawn from the domain"
        else:
            sampled_note = f"{agreed} sample points agreed" + (
                f" ({inexact} in {_INEXACT[self.field is None]}, not exact)" if inexact else ""
            )
        if err == "budget":
            return Outcome(
                "inconclusive",
                "sampled",
                f"{sampled_note}; the symbolic proof did not finish within {budget:g} s ({self.path} path)",
                points=agreed,
                inexact_points=inexact,
                path=self.path,
            )
        if err:
            return Outcome(
                "inconclusive",
                "sampled",
                f"{sampled_note}; the symbolic proof failed ({err})",
                points=agreed,
                inexact_points=inexact,
                path=self.path,
            )
        if not nonzero:
            return Outcome(
                "pass",
                "symbolic",
                f"proved identically on the {self.path} path; {sampled_note}",
                points=agreed,
                inexact_points=inexact,
                path=self.path,
            )
        first = next(iter(nonzero))
        if self.field is not None and self.field.complete:
            # a definite non-zero: look for a point that shows it
            cex = None
            for _ in range(20):
                pd = self.draw_point()
                if pd is None:
                    break
                try:
                    v = fn(pd).get(first)
                except ZeroDivisionError:
                    continue
                if v is not None and pd.zero_test(v) is False:
                    cex = {"point": dict(pd.sample.shown), "component": first, "residual": _fmt_number(v)}
                    break
            if cex is None:
                cex = {"point": {}, "component": first, "residual": nonzero[first]}
            return Outcome(
                "fail",
                "symbolic",
                f"{what} do not hold: {first} = {_short(nonzero[first])} (not identically zero)",
                counterexample=cex,
                points=agreed,
                inexact_points=inexact,
                path=self.path,
                nonzero=nonzero,
            )
        return Outcome(
            "inconclusive",
            "sampled",
            f"{sampled_note}; the {self.path} normal form of {first} did not reduce to zero "
            f"({_short(nonzero[first])}), "
            "which this chart's generators cannot decide",
            points=agreed,
            inexact_points=inexact,
            path=self.path,
            nonzero=nonzero,
        )

    def _symbolic(self, fn, budget):
        """Run ``fn(self)`` and return ({component: residual string} of non-zeros, error)."""
        if self.field is not None:
            try:
                with self.deadline(budget):
                    res = fn(self)
                    nonzero = {k: v for k, v in res.items() if not self.is_zero(v)}
            except BudgetExceeded:
                return {}, "budget"
            except Unsupported as e:
                return {}, f"outside the exact field: {e}"
            except ZeroDivisionError as e:
                return {}, f"division by zero ({e})"
            return {k: self._show(v) for k, v in nonzero.items()}, None
        return _run_limited(lambda: {k: sp.sstr(v) for k, v in fn(self).items() if not self.is_zero(v)}, budget)

    def _show(self, v, limit: int = 3000) -> str:
        """A residual as text; a very large one is described instead of printed (factoring and
        printing it could take longer than the proof)."""
        size = sum(len(p) for p in v.c.values()) + len(v.d)
        if size > limit:
            return f"<a non-zero rational function with {size} terms>"
        return sp.sstr(self.to_sympy(v))

    def prove_values(self, fn, budget=None):
        """Compute ``fn(self)`` (a dict of values) within the budget: (dict or None, error)."""
        budget = self.budget if budget is None else budget
        if self.field is not None:
            try:
                with self.deadline(budget):
                    return fn(self), None
            except BudgetExceeded:
                return None, "budget"
        res, err = _run_limited(lambda: {k: self._settle(sp.cancel(v)) for k, v in fn(self).items()}, budget)
        if err:
            return res, err
        # a value with a distributional or sign-dependent part the domain does not settle is no result
        left = sorted({a for v in res.values() for a in unsettled(v)}, key=len)
        if left:
            return None, (
                f"the sympy path left {', '.join(left[:3])}{' ...' if len(left) > 3 else ''}, "
                "which the domain does not settle"
            )
        return res, None


def _short(s: str, limit: int = 200) -> str:
    return s if len(s) <= limit else s[: limit - 3] + "..."


def _run_limited(fn, seconds):
    """Run ``fn`` in a forked child limited to ``seconds`` of CPU time: (result, error).

    The child gets a CPU-time cap (so a loaded machine does not turn a proof into a timeout, as on
    the flint path); the parent also gives up after a generous wall-clock limit. The error is
    ``"budget"`` when its time ran out, the memory cap's wording (``"memory cap (3 GiB) reached"``,
    :func:`gravicat.engine.fork.describe_limit`) when it needed more memory."""
    from gravicat.engine.fork import describe_limit, run_forked

    out = run_forked(lambda emit: fn(), cpu_seconds=max(1.0, seconds), wall_seconds=max(4 * seconds, seconds + 30))
    if out.finished:
        return out.value, None
    if out.limit == "memory":
        return {}, describe_limit(out)
    if out.limit is not None:
        return {}, "budget"
    if out.error is not None:
        return {}, out.error
    return {}, "the proof process ended without a result"


# ---------------------------------------------------------------------------
# per-point data


def prove_zero(
    exprs: dict,
    coords,
    params,
    relations=(),
    *,
    seed=0,
    budget=DEFAULT_BUDGET,
    samples=DEFAULT_SAMPLES,
    what: str = "the identities",
) -> Outcome:
    """Sampled stage and proof that every sympy expression of ``exprs`` (name -> expr) is identically zero.

    For checks that need no curvature (limits, transforms): the field is built
    over the expressions themselves; ``relations`` (inequalities on
    ``coords`` and ``params``) bound the sample points. Undeclared symbols are
    treated as parameters.
    """
    from gravicat.format.chartspec import ChartSpec

    exprs = {k: sp.sympify(v) for k, v in exprs.items()}
    coords = tuple(coords)
    params = list(params)
    funcs = set()
    for e in exprs.values():
        for s in sorted(e.free_symbols - set(coords) - set(params), key=str):
            params.append(s)
        funcs |= e.atoms(sp.core.function.AppliedUndef)
    spec = ChartSpec(
        entry="",
        chart="",
        field_equations="none",
        coords=coords,
        params=tuple(params),
        metric=sp.ImmutableMatrix(sp.eye(len(coords))),
        functions=tuple(sorted(funcs, key=str)),
        domain=tuple(relations),
        extra={"_exprs": list(exprs.values())},
    )
    geo = Geometry(spec, seed=seed, budget=budget, samples=samples)
    return geo.verify(lambda X: {k: X.val(v) for k, v in exprs.items()}, what=what)
