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

from gravicat.engine.ratfun import BudgetExceeded, Elem, Field, Unsupported, arb_precision, settle_signs, unsettled
from gravicat.engine.sampling import DIGITS, Sampler

__all__ = ["Geometry", "PointData", "Outcome", "prove_zero", "BudgetExceeded", "Unsupported"]

DEFAULT_BUDGET = 20.0
_INEXACT = {False: "interval arithmetic", True: f"{DIGITS + 10}-digit floating point"}

# real-variable conventions for the sympy path's floating evaluation
_MP_EXTRA = {
    "DiracDelta": lambda *a: 0,
    "Heaviside": lambda x, *a: 1 if x > 0 else 0,
    "sign": lambda x: (x > 0) - (x < 0),
}
DEFAULT_SAMPLES = 8
QUICK_SAMPLES = 3  # points evaluated before the symbolic proof (the rest only when it does not succeed)


# ---------------------------------------------------------------------------
# curvature, generic over the number type


class _Curvature:
    """Tensor formulas shared by the symbolic chart and the per-point data.

    Subclasses provide ``n``, ``g``, ``dg`` (``dg[c][a][b] = d_c g_ab``),
    ``ddg`` (``ddg[c][d][a][b]``), ``zero``, ``_iz(v)`` (is v certainly 0;
    only used to skip work), ``_nf(v)`` (normal form) and ``_inverse()``.
    Curvature needs no derivative of a Christoffel symbol: the lowered
    Riemann tensor comes from the second derivatives of g (see
    :attr:`riemann_lower`), and everything else from it by contraction.
    """

    n: int

    def vanishes(self, v) -> bool:
        """Cheap test that ``v`` is certainly zero (structural zeros; never a proof of non-zero)."""
        return self._iz(v)

    def _sum(self, terms):
        field = getattr(self, "field", None)
        if field is not None:
            return field.sum(terms)
        out = self.zero
        for t in terms:
            out = out + t
        return out

    @cached_property
    def _inv_det(self):
        return self._inverse()

    @cached_property
    def ginv(self):
        """Inverse metric g^ab (list of lists)."""
        return self._inv_det[0]

    @cached_property
    def det(self):
        """det g."""
        return self._inv_det[1]

    @cached_property
    def christoffel_first(self):
        """Gamma_abc = (d_b g_ac + d_c g_ab - d_a g_bc)/2 (first index lowered)."""
        n, dg, iz = self.n, self.dg, self._iz
        out = [[[self.zero] * n for _ in range(n)] for _ in range(n)]
        for a in range(n):
            for b in range(n):
                for c in range(b, n):
                    v = dg[b][a][c] + dg[c][a][b] - dg[a][b][c]
                    if not iz(v):
                        v = self._nf(v / 2)
                    out[a][b][c] = out[a][c][b] = v
        return out

    @cached_property
    def christoffel(self):
        """Gamma^a_bc (symmetric in b, c)."""
        n, gi, G1, iz = self.n, self.ginv, self.christoffel_first, self._iz
        out = [[[self.zero] * n for _ in range(n)] for _ in range(n)]
        for a in range(n):
            for b in range(n):
                for c in range(b, n):
                    v = self._sum(gi[a][e] * G1[e][b][c] for e in range(n) if not iz(gi[a][e]) and not iz(G1[e][b][c]))
                    v = self._nf(v)
                    out[a][b][c] = out[a][c][b] = v
        return out

    @cached_property
    def ricci(self):
        """R_bd = g^ac R_abcd (= d_a Gamma^a_bd - d_d Gamma^a_ab + Gamma^a_ae Gamma^e_bd - Gamma^a_de Gamma^e_ab)."""
        n, gi, L, iz = self.n, self.ginv, self.riemann_lower, self._iz
        out = [[self.zero] * n for _ in range(n)]
        for b in range(n):
            for d in range(b, n):
                terms = [
                    gi[a][c] * L[a][b][c][d]
                    for a in range(n)
                    for c in range(n)
                    if not iz(gi[a][c]) and not iz(L[a][b][c][d])
                ]
                if terms:
                    v = self._nf(self._sum(terms))
                    out[b][d] = out[d][b] = v
        return out

    @cached_property
    def riemann_lower(self):
        """R_abcd = (g_ad,bc + g_bc,ad - g_ac,bd - g_bd,ac)/2 + Gamma^e_bc Gamma_ead - Gamma^e_bd Gamma_eac.

        Only the 21 components with a < b, c < d, (a, b) <= (c, d) are computed; the others follow
        from the antisymmetry in each pair and the pair exchange symmetry. No derivative of a
        Christoffel symbol is needed (second derivatives of g only)."""
        n, ddg, G1, G, iz = self.n, self.ddg, self.christoffel_first, self.christoffel, self._iz
        out = [[[[self.zero] * n for _ in range(n)] for _ in range(n)] for _ in range(n)]
        pairs = [(a, b) for a in range(n) for b in range(a + 1, n)]
        for i, (a, b) in enumerate(pairs):
            for c, d in pairs[i:]:
                terms = [t for t in (ddg[b][c][a][d], ddg[a][d][b][c]) if not iz(t)]
                terms += [-t for t in (ddg[b][d][a][c], ddg[a][c][b][d]) if not iz(t)]
                v = self._sum(terms) / 2 if terms else self.zero
                quad = []
                for e in range(n):
                    if not iz(G[e][b][c]) and not iz(G1[e][a][d]):
                        quad.append(G[e][b][c] * G1[e][a][d])
                    if not iz(G[e][b][d]) and not iz(G1[e][a][c]):
                        quad.append(-(G[e][b][d] * G1[e][a][c]))
                if quad:
                    v = v + self._sum(quad)
                if iz(v):
                    continue
                v = self._nf(v)
                if iz(v):
                    continue
                w = -v
                out[a][b][c][d] = out[b][a][d][c] = out[c][d][a][b] = out[d][c][b][a] = v
                out[b][a][c][d] = out[a][b][d][c] = out[d][c][a][b] = out[c][d][b][a] = w
        return out

    @cached_property
    def riemann(self):
        """R^a_bcd = g^ae R_ebcd (convention R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + ...)."""
        n, gi, L, iz = self.n, self.ginv, self.riemann_lower, self._iz
        out = [[[[self.zero] * n for _ in range(n)] for _ in range(n)] for _ in range(n)]
        for a in range(n):
            for b in range(n):
                for c in range(n):
                    for d in range(c + 1, n):
                        terms = [
                            gi[a][e] * L[e][b][c][d] for e in range(n) if not iz(gi[a][e]) and not iz(L[e][b][c][d])
                        ]
                        if terms:
                            v = self._nf(self._sum(terms))
                            out[a][b][c][d] = v
                            out[a][b][d][c] = -v if not iz(v) else self.zero
        return out

    @cached_property
    def _bivector_inverse(self):
        """Index pairs a < b and G2[(a, b), (e, f)] = g^ae g^bf - g^af g^be (non-zero entries)."""
        n, gi, iz = self.n, self.ginv, self._iz
        pairs = [(a, b) for a in range(n) for b in range(a + 1, n)]
        G2 = {}
        for i, (a, b) in enumerate(pairs):
            for e, f in pairs[i:]:
                terms = []
                if not iz(gi[a][e]) and not iz(gi[b][f]):
                    terms.append(gi[a][e] * gi[b][f])
                if not iz(gi[a][f]) and not iz(gi[b][e]):
                    terms.append(-(gi[a][f] * gi[b][e]))
                if terms:
                    v = self._nf(self._sum(terms))
                    if not iz(v):
                        G2[(a, b), (e, f)] = G2[(e, f), (a, b)] = v
        return pairs, G2

    @cached_property
    def ricci_scalar(self):
        """R = g^ab R_ab."""
        n, gi, Ric, iz = self.n, self.ginv, self.ricci, self._iz
        return self._nf(
            self._sum(
                gi[a][b] * Ric[a][b] for a in range(n) for b in range(n) if not iz(gi[a][b]) and not iz(Ric[a][b])
            )
        )

    @cached_property
    def einstein(self):
        """G_ab = R_ab - R g_ab / 2."""
        n, g, Ric, R, iz = self.n, self.g, self.ricci, self.ricci_scalar, self._iz
        out = [[self.zero] * n for _ in range(n)]
        for a in range(n):
            for b in range(a, n):
                v = Ric[a][b]
                if not iz(g[a][b]) and not iz(R):
                    v = self._nf(v - g[a][b] * R / 2)
                out[a][b] = out[b][a] = v
        return out

    @cached_property
    def ricci_mixed(self):
        """R^a_b = g^ac R_cb."""
        n, gi, Ric, iz = self.n, self.ginv, self.ricci, self._iz
        return [
            [
                self._nf(self._sum(gi[a][c] * Ric[c][b] for c in range(n) if not iz(gi[a][c]) and not iz(Ric[c][b])))
                for b in range(n)
            ]
            for a in range(n)
        ]

    @cached_property
    def ricci_square(self):
        """R_ab R^ab."""
        n, M, iz = self.n, self.ricci_mixed, self._iz
        return self._nf(
            self._sum(M[a][b] * M[b][a] for a in range(n) for b in range(n) if not iz(M[a][b]) and not iz(M[b][a]))
        )

    @cached_property
    def riemann_mixed(self):
        """R^ab_cd = g^ae g^bf R_efcd: dict {(a, b, c, d): value} of the non-zero components with
        a < b and c < d (antisymmetric in both pairs)."""
        pairs, G2 = self._bivector_inverse
        L, iz = self.riemann_lower, self._iz
        out = {}
        for a, b in pairs:
            row = [(ef, G2[(a, b), ef]) for ef in pairs if ((a, b), ef) in G2]
            for c, d in pairs:
                terms = [v * L[e][f][c][d] for (e, f), v in row if not iz(L[e][f][c][d])]
                if terms:
                    v = self._nf(self._sum(terms))
                    if not iz(v):
                        out[a, b, c, d] = v
        return out

    @cached_property
    def kretschmann(self):
        """R_abcd R^abcd = sum R^ab_cd R^cd_ab."""
        M = self.riemann_mixed
        terms = []
        for (a, b, c, d), v in M.items():
            if a < b:
                w = M.get((c, d, a, b))
                if w is not None:
                    terms.append(v * w)
        return self._nf(self._sum(terms) * 4) if terms else self.zero

    @cached_property
    def weyl_square(self):
        """C_abcd C^abcd = K - 4/(n-2) R_ab R^ab + 2/((n-1)(n-2)) R^2 (n >= 3)."""
        n = self.n
        if n < 3:
            return self.zero
        R = self.ricci_scalar
        v = self.kretschmann - self.ricci_square * 4 / (n - 2) + R * R * 2 / ((n - 1) * (n - 2))
        return self._nf(v)


def _invert(M, n, iz, nf, one, zero, pick=None):
    """Inverse and determinant by Gauss-Jordan elimination, block by block."""
    # connected blocks of the non-zero pattern
    seen = [False] * n
    blocks = []
    for i in range(n):
        if seen[i]:
            continue
        stack, blk = [i], []
        seen[i] = True
        while stack:
            k = stack.pop()
            blk.append(k)
            for j in range(n):
                if not seen[j] and (not iz(M[k][j]) or not iz(M[j][k])):
                    seen[j] = True
                    stack.append(j)
        blocks.append(sorted(blk))
    inv = [[zero] * n for _ in range(n)]
    det = one
    for blk in blocks:
        m = len(blk)
        A = [[M[blk[i]][blk[j]] for j in range(m)] + [one if i == j else zero for j in range(m)] for i in range(m)]
        for col in range(m):
            cands = [r for r in range(col, m) if not iz(A[r][col])]
            if not cands:
                raise ZeroDivisionError("the metric is degenerate")
            piv = pick(A, cands, col) if pick else cands[0]
            if piv != col:
                A[col], A[piv] = A[piv], A[col]
                det = -det
            p = A[col][col]
            det = nf(det * p)
            pinv = one / p
            A[col] = [nf(x * pinv) if not iz(x) else zero for x in A[col]]
            for r in range(m):
                if r != col and not iz(A[r][col]):
                    f = A[r][col]
                    A[r] = [nf(A[r][j] - f * A[col][j]) if not iz(A[col][j]) else A[r][j] for j in range(2 * m)]
        for i in range(m):
            for j in range(m):
                inv[blk[i]][blk[j]] = A[i][m + j]
    return inv, det


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


def _descartes(coeffs) -> tuple[int, int]:
    """(negative, positive) root counts of a polynomial with only real roots (ascending coefficients)."""

    def changes(cs):
        signs = [c > 0 for c in cs if c != 0]
        return sum(1 for i in range(1, len(signs)) if signs[i] != signs[i - 1])

    return changes([c if i % 2 == 0 else -c for i, c in enumerate(coeffs)]), changes(coeffs)


def inertia(rows) -> tuple[tuple[int, int, int], bool]:
    """((negative, zero, positive) eigenvalue counts of a symmetric matrix, certain).

    The characteristic polynomial of a real symmetric matrix has only real roots, so Descartes'
    rule of signs on its coefficients counts the positive and negative eigenvalues exactly. With
    rational entries (``fmpq``) that is exact arithmetic; with interval entries (``arb`` balls of
    a sample point, or rationals mixed with balls) it is certain when the constant coefficient's
    ball excludes zero and every sign a coefficient whose ball contains zero might have gives the
    same counts. Otherwise (e.g. a nearly singular matrix) the floating-point eigenvalues of the
    midpoints are counted, and ``certain`` is False. Raises ValueError when an entry is not a
    finite number (never a numerical library's own exception).
    """
    import flint

    from gravicat.engine.ratfun import arb_precision

    n = len(rows)
    flat = [v for row in rows for v in row]
    if all(isinstance(v, flint.fmpq) for v in flat):
        p = flint.fmpq_mat(n, n, flat).charpoly()
        coeffs = [p[i] for i in range(n + 1)]  # ascending
        zero = next(i for i, c in enumerate(coeffs) if c != 0)
        neg, pos = _descartes(coeffs)
        return (neg, zero, pos), True
    if all(isinstance(v, (flint.fmpq, flint.fmpz, flint.arb, int)) for v in flat):
        # a floating-point entry (mpmath, float) carries no error bound: it is never taken as exact
        with arb_precision():
            balls = [v if isinstance(v, flint.arb) else flint.arb(v) for v in flat]
            if not all(b.is_finite() for b in balls):
                raise ValueError("a metric component is not a finite number")
            p = flint.arb_mat(n, n, balls).charpoly()
            coeffs = [p[i] for i in range(n + 1)]
        counts = _ball_descartes(coeffs)
        if counts is not None:
            return (counts[0], 0, counts[1]), True
    import numpy as np

    mids = [float(v.mid()) if hasattr(v, "mid") else float(v) for v in flat]
    if not all(np.isfinite(mids)):
        raise ValueError("a metric component is not a finite number")
    try:
        vals = np.linalg.eigvalsh(np.array(mids).reshape(n, n))
    except np.linalg.LinAlgError as exc:
        raise ValueError(f"the eigenvalues of the metric could not be computed ({exc})") from None
    tol = 1e-12 * max(1.0, float(np.max(np.abs(vals))))
    return (int(np.sum(vals < -tol)), int(np.sum(np.abs(vals) <= tol)), int(np.sum(vals > tol))), False


def _ball_descartes(coeffs) -> tuple[int, int] | None:
    """(negative, positive) root counts of a real-rooted polynomial with ball coefficients (ascending),
    or None when the balls do not decide them. The constant coefficient must exclude 0 (no zero
    root); a middle coefficient whose ball contains 0 may have either sign or be 0, and the counts
    are certain when every such choice gives the same counts (the true polynomial is one of them)."""
    from itertools import product

    if not (coeffs[0] > 0 or coeffs[0] < 0):
        return None
    signs = [1 if c > 0 else -1 if c < 0 else None for c in coeffs]
    open_ = [i for i, s in enumerate(signs) if s is None]
    if len(open_) > 6:
        return None
    found = set()
    for choice in product((-1, 0, 1), repeat=len(open_)):
        trial = list(signs)
        for i, v in zip(open_, choice, strict=True):
            trial[i] = v
        found.add(_descartes(trial))
        if len(found) > 1:
            return None
    return found.pop()


def _short(s: str, limit: int = 200) -> str:
    return s if len(s) <= limit else s[: limit - 3] + "..."


def _run_limited(fn, seconds):
    """Run ``fn`` in a forked child limited to ``seconds`` of CPU time: (result, error).

    The child gets a CPU-time cap (so a loaded machine does not turn a proof into a timeout, as on
    the flint path); the parent also gives up after a generous wall-clock limit. The error is
    ``"budget"`` when a limit stopped the child."""
    from gravicat.engine.fork import run_forked

    out = run_forked(lambda emit: fn(), cpu_seconds=max(1.0, seconds), wall_seconds=max(4 * seconds, seconds + 30))
    if out.finished:
        return out.value, None
    if out.limit is not None:
        return {}, "budget"
    if out.error is not None:
        return {}, out.error
    return {}, "the proof process ended without a result"


# ---------------------------------------------------------------------------
# per-point data


class PointData(_Curvature):
    """Exact (or interval) values at one sample point: g, dg, ddg evaluated
    from the symbolic side; inverse, Christoffel symbols and curvature
    computed here from those numbers (same formulas as the symbolic side,
    with d Gamma from the second derivatives of g)."""

    def __init__(self, geometry: Geometry, sample, point):
        self.geometry = geometry
        self.sample = sample
        self.point = point
        self.n = geometry.n
        self.coords = geometry.coords
        self.inexact = False
        self._cache: dict = {}
        self._evc: dict = {}
        if point is not None:
            self.zero = flint.fmpq(0)
            self.one = flint.fmpq(1)
        else:
            import mpmath

            self._mp = mpmath
            self.zero = mpmath.mpf(0)
            self.one = mpmath.mpf(1)

    # evaluation of symbolic values at this point
    def ev(self, v):
        if isinstance(v, Elem):
            if not v.c:
                return self.zero
            key = id(v)
            hit = self._evc.get(key)
            if hit is None or hit[0] is not v:
                hit = (v, v.evaluate(self.point))
                self._evc[key] = hit
            return hit[1]
        return self._ev_sym(v)

    @cached_property
    def _subs_funcs(self):
        geo = self.geometry
        items = sorted(geo._sym_funcs.items(), key=lambda kv: -sum(kv[0][1]))
        return [(sym, sp.Symbol(f"_f{i}")) for i, ((_k, _a), sym) in enumerate(items)], [
            self.sample.funcs[k] for k, _ in items
        ]

    def _ev_sym(self, expr):
        mp = self._mp
        key = expr
        f = self.geometry._dcache.get(("lamb", key))
        pairs, fvals = self._subs_funcs
        syms = list(self.geometry.params) + list(self.geometry.coords) + [s for _, s in pairs]
        if f is None:
            e = sp.sympify(expr)
            for sym, s in pairs:
                e = e.subs(sym, s)
            f = sp.lambdify(syms, e, modules=[_MP_EXTRA, "mpmath"])
            self.geometry._dcache[("lamb", key)] = f
        with mp.workdps(DIGITS + 10):
            args = [self.sample.numeric[s] for s in list(self.geometry.params) + list(self.geometry.coords)]
            args += [mp.mpf(x.numerator) / x.denominator for x in fvals]
            val = f(*args)
            if isinstance(val, mp.mpc):
                if abs(val.imag) > mp.mpf(10) ** (-DIGITS):
                    raise ValueError("complex value")
                val = val.real
            if not mp.isfinite(val):
                raise ZeroDivisionError("not finite")
            return mp.mpf(val)

    @staticmethod
    def _iz(v) -> bool:
        return v == 0  # an arb ball equals 0 only when it is exactly 0

    @contextmanager
    def precision(self):
        """Context for arithmetic on these values (interval and floating values need extra digits)."""
        import mpmath

        with mpmath.workdps(DIGITS + 10), arb_precision():
            yield

    def _nf(self, v):
        return v

    def zero_test(self, v):
        """True (exactly 0), False (certainly non-zero) or None (0 within the working precision)."""
        if isinstance(v, (flint.fmpq, int, Fraction)):
            return v == 0
        if isinstance(v, flint.arb):
            return None if v.contains(0) else False
        mp = self._mp
        scale = max([mp.mpf(1)] + [abs(self.g[a][b]) for a in range(self.n) for b in range(self.n)])
        return None if abs(v) <= scale * mp.mpf(10) ** (-(DIGITS // 2)) else False

    # geometry-facing API (same names as Geometry)
    def val(self, expr):
        key = ("v", expr)
        if key not in self._cache:
            self._cache[key] = self.ev(self.geometry.val(expr))
        return self._cache[key]

    def dval(self, expr, i):
        key = ("d", expr, i)
        if key not in self._cache:
            self._cache[key] = self.ev(self.geometry.dval(expr, i))
        return self._cache[key]

    def ddval(self, expr, i, j):
        key = ("dd", expr, min(i, j), max(i, j))
        if key not in self._cache:
            self._cache[key] = self.ev(self.geometry.ddval(expr, i, j))
        return self._cache[key]

    def const(self, q):
        if self.point is not None:
            q = Fraction(q)
            return flint.fmpq(q.numerator, q.denominator)
        return self._mp.mpf(Fraction(q).numerator) / Fraction(q).denominator

    def label(self, name, *idx):
        return self.geometry.label(name, *idx)

    @cached_property
    def g(self):
        geo = self.geometry
        n = self.n
        return [[self.ev(geo.g[a][b]) for b in range(n)] for a in range(n)]

    @cached_property
    def dg(self):
        geo = self.geometry
        n = self.n
        return [[[self.ev(geo.dg[c][a][b]) for b in range(n)] for a in range(n)] for c in range(n)]

    @cached_property
    def ddg(self):
        geo = self.geometry
        n = self.n
        return [
            [[[self.ev(geo.ddg[c][d][a][b]) for b in range(n)] for a in range(n)] for d in range(n)] for c in range(n)
        ]

    def _inverse(self):
        def pick(A, cands, col):
            if self.point is None or any(isinstance(A[r][col], flint.arb) for r in cands):
                return max(
                    cands, key=lambda r: abs(float(A[r][col].mid() if isinstance(A[r][col], flint.arb) else A[r][col]))
                )
            return cands[0]

        with arb_precision():
            inv, det = _invert(self.g, self.n, self._iz, self._nf, self.one, self.zero, pick)
        if self._iz(det) or (isinstance(det, flint.arb) and det.contains(0)):
            raise ZeroDivisionError("degenerate metric at the point")
        return inv, det


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
