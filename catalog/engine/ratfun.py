"""Exact differential field of a chart, on python-flint (the "flint" fast path).

Every expression of a chart is mapped to an element of a field

    K = Q(b_1, ..., b_n)[s_1, ..., s_k]

where the ``b_j`` are *base generators* (coordinates, parameters, values of
arbitrary functions and their partial derivatives, ``cos`` of an angle,
``exp``, ``log``, ``LambertW`` (principal branch) and symbolic powers, the
constants ``pi`` and ``e``, opaque sub-expressions), held in one
``fmpz_mpoly`` context, and the ``s_i`` are *square-root generators* with
``s_i**2 = R_i`` (``sqrt(...)``, half integer powers, and ``sin`` of an
angle, for which ``s**2 = 1 - cos**2``). A radicand ``R_i`` is in ``Q(b)``, or,
for a nested root that is not handled as below, in ``Q(b)[s_1..s_{i-1}]``
(a tower of quadratic extensions).

Algebraic generators (:class:`AlgGen`): a nested root ``r = sqrt(A + c sqrt(B))``
with ``A``, ``c``, ``B`` free of roots (Kerr-Schild's radius) is one more base
generator with its defining polynomial ``F = (r**2 - A)**2 - c**2 B`` (cleared
of denominators) and the derivation of implicit differentiation,
``dr = -F_x dx / F_r``; the inner root ``sqrt(B)`` is ``(r**2 - A)/c``. When
``F`` is ``F2 v**2 + F0`` in a coordinate or parameter ``v`` used by no other
generator, ``v`` is *eliminated*: ``r`` becomes a free variable and ``v`` a
square-root generator with ``v**2 = -F0/F2`` and ``dv/dv = 1`` (the same field,
with natural denominators; :meth:`Field._eliminate`). Otherwise numerators are
kept reduced modulo ``F`` (degree < 4 in ``r``) and denominators free of ``r``
(conjugates ``r -> -r``, ``r**2 -> -P2/L - r**2``). Either way an element is
zero exactly when its numerator is, which proves it zero on every root of
``F``; a non-zero one is a definite non-zero only when ``F`` is irreducible
(factored once; see :attr:`Field.complete`).

An element is kept as ``sum_m c_m * s^m / d``: ``m`` runs over bit masks of
square-root generators, ``c_m`` and ``d`` are integer polynomials in the base
generators, ``d`` is free of square roots (denominators are rationalised,
highest root first) and the fraction is reduced (by trial division with the
irreducible factors of ``d``, found once per denominator, rather than a
multivariate gcd each time). Products reduce
``s_i**2`` to ``R_i`` at once, so the representation never grows in the
square roots.

Each generator carries its derivation rule for every chart coordinate
(``d/dtheta cos(theta) = -sin(theta)``, ``d/dt a = a_t``, ``d exp(w) = exp(w) dw``,
``d sqrt(R) = sqrt(R) dR / (2R)``, ``d W(z) = W dz / (z (1 + W))``...), so
derivatives are exact and stay in K. ``exp(k W(z))`` is rewritten as
``(z / W(z))**k``; ``W(u exp(u))`` becomes ``u`` where the identity is exact
and ``u >= -1`` follows from the region (:func:`simplify_lambertw`).

Real roots (:class:`RootGen`): ``b**(p/q)`` with ``3 <= q <= 5`` and ``b`` a rational function
free of roots is written as a product of root generators ``rho**q = P``, one per prime of the
content of ``b`` and one per primitive polynomial of its numerator and denominator
(``(3 (rho - tau)/2)**(2/3) = 3**(2/3) (rho - tau)**(2/3) / 2**(2/3)``, Lemaitre's radius). The
relation is applied: numerators are reduced to degree < q in ``rho`` and denominators kept free
of it (an inverse is the adjugate of the multiplication matrix over its determinant, the norm),
with ``d rho = rho dP / (q P)``. An identity that reduces to zero holds for every choice of the
roots, the real ones included; a sample point where a base is not positive is not used. Other
rational powers (of a base with square roots, or ``q > 5``) stay generators without a relation.

Powers the region lets us write one way (:func:`~gravicat.engine.rewrite.merge_powers`, before
conversion): ``(c**k)**x = c**(k x)`` for rational ``k``, ``x`` where ``c > 0`` on the region
(``(r**(3/2))**(2/3) = r``, ``sqrt(1/r) = r**(-1/2)``), and the base of a power with a symbolic
exponent brought to one canonical quotient, so one rational base written two ways is one generator.

Signs the region decides (:func:`settle_signs`): ``Abs``, ``sign``, ``Heaviside`` and
``DiracDelta`` whose argument has one sign on the chart's domain and parameter ranges are replaced
before conversion (``sqrt(r**2) = Abs(r) = r`` where ``r > 0``).

Opaque sub-expressions (:func:`find_aliases`): a sum of several
coordinate-dependent roots or transcendental functions, e.g.
``1 + m1/sqrt(R1) + m2/sqrt(R2)``, is costly as an element (rationalising it
multiplies its conjugates). Such a sum is carried as a function of the
coordinates with generic partial derivatives (like a declared function
``a(t)``); :meth:`Field.is_zero` substitutes the explicit derivatives
(:meth:`Field.expand`) before testing, so zero tests stay exact.

Soundness: generators are treated as independent indeterminates, except for
the square-root relations, which are applied. An element that reduces to zero
is therefore identically zero. A non-zero result is only a definite non-zero
when the chart uses no generator with a hidden relation (see
:attr:`Field.complete`); otherwise callers must not call it a failure.

Anything else (``Abs`` and ``sign`` the region does not decide, other branches of ``LambertW``,
inverse trigonometric functions, exponents depending on coordinates) raises :class:`Unsupported`,
and the caller falls back to the pure sympy path.


The code lives in modules of this room along its seams; this module assembles :class:`Field` and
keeps exporting every name it always did:

* :mod:`.generators`: the generators, ``Unsupported``, ``BudgetExceeded``, ``arb_precision``;
* :mod:`.elements`: ``Elem`` and ``Point``;
* :mod:`.rewrite`: the sympy side (``prepare``, ``settle_signs``, ``unsettled``,
  ``simplify_lambertw``, ``find_aliases``);
* :mod:`.field_scan`, :mod:`.field_arith`, :mod:`.field_roots`, :mod:`.field_calculus`: the
  methods of :class:`Field` (scanning and conversion, arithmetic, roots, derivatives and points).
"""

from __future__ import annotations

import flint
import sympy as sp

from gravicat.engine.elements import Elem, Point
from gravicat.engine.field_arith import FieldArith
from gravicat.engine.field_calculus import FieldCalculus
from gravicat.engine.field_roots import FieldRoots
from gravicat.engine.field_scan import FieldScan
from gravicat.engine.generators import (
    ARB_BITS,
    AlgGen,
    BaseGen,
    BudgetExceeded,
    RootGen,
    SqrtGen,
    Unsupported,
    arb_precision,
    nested_parts,
)
from gravicat.engine.rewrite import (
    find_aliases,
    merge_powers,
    prepare,
    settle_signs,
    simplify_lambertw,
    unsettled,
)

__all__ = [  # every name other code imports from here, old and new
    "ARB_BITS", "AlgGen", "BaseGen", "BudgetExceeded", "Elem", "Field", "Point", "RootGen", "SqrtGen",
    "Unsupported", "arb_precision", "find_aliases", "nested_parts", "prepare", "settle_signs",
    "simplify_lambertw", "unsettled",
]


class Field(FieldScan, FieldArith, FieldRoots, FieldCalculus):
    """The exact differential field of a set of chart expressions.

    ``coords``: chart coordinates (derivations); ``params``: parameters;
    ``exprs``: every sympy expression that will be converted with
    :meth:`element`; ``functions``: declared applied functions ``a(t)``;
    ``extra_order``: how many derivative orders beyond those occurring to
    provide for arbitrary functions.
    """

    # nested roots as algebraic generators; False restores the tower of quadratic extensions (benchmarks)
    algebraic_roots = True
    # real roots b**(1/q), q >= 3, as generators with their relation applied; False: no relation (benchmarks)
    real_roots = True
    # denominators whose unknown part has more terms than this are reduced by gcd, not factored
    FACTOR_LIMIT = 400

    def __init__(self, coords, params, exprs, functions=(), extra_order=3, alias_from=(), relations=None):
        self.coords = tuple(coords)
        self.params = tuple(params)
        self.coord_index = {c: i for i, c in enumerate(self.coords)}
        self.deadline = None
        self.ops = 0
        self._gens: dict = {}  # key -> BaseGen (insertion order = dependency order)
        self._funcs: dict = {}  # function class -> (args, max order)
        self._sqrt_keys: list = []  # sympy radicands met while scanning
        self._trig: dict = {}  # angle atom -> lcm of denominators
        self._expq: dict = {}  # exponent atom -> lcm of denominators
        self._pending_trig = []
        self._root_split: dict = {}  # (base, q) -> [(root generator key, exponent)] or None
        # opaque sub-expressions (see find_aliases): sympy expression -> placeholder function application
        self.alias_sub: dict = {}
        self.alias_expr: dict = {}  # placeholder function class -> the expression it stands for
        taken = {str(x) for x in self.coords + self.params} | {str(f.func) for f in functions}
        if relations is not None:
            alias_from = [settle_signs(e, self.coords, relations) for e in alias_from]
        for X in find_aliases(alias_from, self.coords):
            deps = tuple(c for c in self.coords if c in X.free_symbols)
            k = len(self.alias_sub) + 1
            name = f"X{k}"
            while name in taken:
                name = "_" + name
            taken.add(name)
            ph = sp.Function(name, real=True)(*deps)
            self.alias_sub[X] = ph
            self.alias_expr[ph.func] = X
        self.relations = relations
        if relations is not None:
            # Abs, sign, Heaviside, DiracDelta that the region decides, then LambertW of u exp(u)
            exprs = [settle_signs(e, self.coords, relations) for e in exprs]
            exprs = [simplify_lambertw(sp.sympify(e), self.coords, self.params, relations) for e in exprs]
            # (c**k)**x = c**(k x) where c > 0; symbolic powers of one base written one way
            exprs = [merge_powers(e, self.coords, relations) for e in exprs]
        sub = self.alias_sub
        prepared = [prepare(e.xreplace(sub) if sub else e) for e in exprs]
        prepared += [prepare(X) for X in self.alias_sub]  # their own generators, for the explicit values
        for f in functions:
            self._scan_func(f, 0)
        for ph in self.alias_sub.values():
            self._scan_func(ph, 0)
        for e in prepared:
            self._scan(e)
        self._finish_scan(extra_order)
        self.base = list(self._gens.values())
        for i, g in enumerate(self.base):
            g.index = i
        names = tuple(f"g{i}" for i in range(len(self.base))) or ("g0",)
        self.ctx = flint.fmpz_mpoly_ctx.get(names)
        self.qctx = flint.fmpq_mpoly_ctx.get(names)
        self.pone = self.ctx.constant(1)
        self.pzero = self.ctx.constant(0)
        self.zero = Elem(self, {}, self.pone)
        self.one = Elem(self, {0: self.pone}, self.pone)
        self.sqrts: list[SqrtGen] = []
        self.tower_mask = 0  # bits of nested square roots
        self._mono: dict = {}
        self._sqrt_by_key: dict = {}
        self._memo: dict = {}
        self._dgen: dict = {}
        self._dlogsqrt: dict = {}
        self._arb_cache: dict = {}
        self._dfac: dict = {}  # denominator (text) -> its factorisation
        self._fbase: list = []  # irreducible factors of denominators met so far, with their degrees
        self.algs: list[AlgGen] = []  # algebraic generators whose relation is applied by reduction
        self._alg_of: dict = {}  # base index -> AlgGen (reduced or eliminated)
        self._alg_inner: dict = {}  # canonical radicand key -> the element sqrt(B) = (r**2 - A)/c
        self._alg_inner_sym: dict = {}
        self._alg_reducible = False
        self._elim: dict = {}  # eliminated symbol -> its element (a square-root generator)
        self.roots: list[RootGen] = []  # real root generators whose relation is applied by reduction
        self._root_of: dict = {}  # base index -> RootGen
        # square roots: sin generators first (their radicand is 1 - cos^2)
        for g in self.base:
            if g.kind == "cos":
                cpoly = self.ctx.gens()[g.index] if self.base else None
                s = self._new_sqrt(self.pone - cpoly * cpoly, self.pone, sp.sin(g.data["angle"]), trig=g)
                g.data["sin"] = s
        # algebraic generators (nested roots): defining polynomials, then the inner roots they replace
        for g in self.base:
            if g.kind == "alg":
                self._setup_alg(g)
        if len(self.algs) == 1:
            self._eliminate(self.algs[0])
        for g in self.base:
            if g.kind == "root":
                self._setup_root(g)
        for e in self._sqrt_keys:
            self._sqrt_of(self.element(e))
        # pi and e are transcendental, so treating them as free generators loses nothing; an
        # algebraic generator hides no relation when its defining polynomial is irreducible
        kinds = ("coord", "param", "func", "cos", "const", "alias") + (() if self._alg_reducible else ("alg",))
        if self._roots_independent():
            kinds += ("root",)
        self.complete = all(g.kind in kinds for g in self.base) and all(
            s.trig is not None or (s.coord is not None and not self._alg_reducible) for s in self.sqrts
        )
        self.alias_index = [g.index for g in self.base if g.kind == "alias"]
        self._alias_set = set(self.alias_index)
        self._alias_vals: dict = {}
        self._alias_pows: dict = {}

