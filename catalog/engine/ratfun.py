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
"""

from __future__ import annotations

import math
import time
from contextlib import contextmanager
from fractions import Fraction
from itertools import combinations_with_replacement

import flint
import sympy as sp
from flint.utils.flint_exceptions import DomainError

ARB_BITS = 320  # working precision of the interval-arithmetic sampling fallback


class Unsupported(Exception):
    """The expression cannot be represented on the flint fast path."""


class BudgetExceeded(Exception):
    """The time budget of the running proof is spent."""


@contextmanager
def arb_precision(bits: int = ARB_BITS):
    old = flint.ctx.prec
    flint.ctx.prec = bits
    try:
        yield
    finally:
        flint.ctx.prec = old


# ---------------------------------------------------------------------------
# generators


class BaseGen:
    """A base generator: one variable of the polynomial context."""

    __slots__ = ("kind", "sym", "key", "index", "data", "label")

    def __init__(self, kind, sym, key, data=None, label=""):
        self.kind = kind  # coord | param | const | func | exp | pow | cos | log
        self.sym = sym  # the sympy expression it stands for
        self.key = key
        self.index = -1
        self.data = data or {}
        self.label = label or str(sym)


class SqrtGen:
    """A square-root generator ``s`` with ``s**2 = num/den`` (both base polynomials), or, for a
    nested root (``tower``), ``s**2 = radicand``, an element that uses earlier square roots."""

    __slots__ = ("bit", "num", "den", "sym", "trig", "radicand", "tower", "coord")

    def __init__(self, bit, num, den, sym, trig=None, tower=False):
        self.coord = None  # index of the eliminated coordinate or parameter it stands for (see Field._eliminate)
        self.bit = bit
        self.num = num  # None for a nested root
        self.den = den
        self.sym = sym  # sympy expression (sqrt(R) or sin(w))
        self.trig = trig  # the BaseGen of the matching cos, for sin generators
        self.radicand = None  # Elem, set after creation
        self.tower = tower


class AlgGen:
    """An algebraic generator ``r = sqrt(A + c sqrt(B))`` (base generator ``index``), a root of
    ``F = L r**4 + P2 r**2 + P0`` (``(r**2 - A)**2 - c**2 B`` cleared of denominators; ``L``, ``P2``,
    ``P0`` free of ``r``). While it is in :attr:`Field.algs`, numerators are kept reduced modulo
    ``F`` (degree < 4 in ``r``) and denominators free of ``r``, so an element is zero exactly when
    its numerator is; after :meth:`Field._eliminate` it only serves derivatives and point values."""

    __slots__ = ("gen", "index", "poly", "L", "P2", "P0", "low", "r2", "r4", "flip", "A", "c", "B")

    def __init__(self, gen, index, poly, L, P2, P0, r, ngens, A, c, B):
        self.gen = gen  # the BaseGen
        self.index = index
        self.poly = poly  # F
        self.L, self.P2, self.P0 = L, P2, P0
        self.r2 = r * r
        self.r4 = self.r2 * self.r2
        self.low = P2 * self.r2 + P0  # L r**4 = -low modulo F
        self.flip = [-x if k == index else x for k, x in enumerate(ngens)]  # r -> -r
        self.A, self.c, self.B = A, c, B  # elements (free of every root)


class RootGen:
    """A real root generator ``rho = P**(1/q)`` (``q >= 3``; base generator ``index``) of a
    polynomial ``P`` free of roots: a prime, or a primitive polynomial such as ``rho - tau``. While
    it is in :attr:`Field.roots`, numerators are kept reduced modulo ``rho**q - P`` (degree < q in
    ``rho``) and denominators free of ``rho`` (inverses through the adjugate of the
    multiplication matrix, whose determinant is the norm), so an element is zero exactly when its
    numerator is. ``d rho = rho dP / (q P)``."""

    __slots__ = ("gen", "index", "q", "P", "rq")

    def __init__(self, gen, index, q, P, rq):
        self.gen, self.index, self.q, self.P, self.rq = gen, index, q, P, rq


def _has_root(e) -> bool:
    """``e`` uses a square-root generator (a non-integer power or ``sin``)."""
    if e.has(sp.sin):
        return True
    return any(not p.exp.is_Integer for p in e.atoms(sp.Pow))


def nested_parts(b):
    """``(A, c, B)`` with ``b = A + c*sqrt(B)`` and ``A``, ``c``, ``B`` free of roots, ``c != 0``
    (powers of ``sqrt(B)`` are reduced with ``sqrt(B)**2 = B``), or None."""
    if not isinstance(b, sp.Add) or b.has(sp.sin):
        return None
    halves = [p for p in b.atoms(sp.Pow) if not p.exp.is_Integer]
    if not halves or any(not p.exp.is_Rational or p.exp.q != 2 for p in halves):
        return None
    bases = {p.base for p in halves}
    if len(bases) != 1:
        return None
    B = bases.pop()
    if _has_root(B) or not B.free_symbols:
        return None
    S = sp.Dummy("S")
    e = b.replace(lambda x: x.is_Pow and x.base == B and not x.exp.is_Integer, lambda x: S ** int(2 * x.exp))
    e = sp.expand(e)
    A = sp.Integer(0)
    c = sp.Integer(0)
    for k, coeff in sp.collect(e, S, evaluate=False).items():
        if k == 1:
            k_exp = 0
        elif k == S:
            k_exp = 1
        elif k.is_Pow and k.base == S and k.exp.is_Integer:
            k_exp = int(k.exp)
        else:
            return None
        if coeff.has(S):
            return None
        term = coeff * B ** (k_exp // 2)
        if k_exp % 2:
            c += term
        else:
            A += term
    if c == 0 or _has_root(A) or _has_root(c):
        return None
    return A, c, B


# ---------------------------------------------------------------------------
# elements


class Elem:
    """``sum_m c[m] * s^m / d`` (see the module docstring). Immutable."""

    __slots__ = ("F", "c", "d", "_q")

    def __init__(self, F, c, d):
        self.F = F
        self.c = c  # dict mask -> non-zero fmpz_mpoly
        self.d = d  # fmpz_mpoly, positive leading coefficient
        self._q = None  # cached fmpq_mpoly copies for evaluation

    # -- predicates -------------------------------------------------------
    def is_zero(self) -> bool:
        return not self.c

    def is_const(self) -> bool:
        return not self.c or (set(self.c) == {0} and self.c[0].is_constant() and self.d.is_constant())

    def is_plain(self) -> bool:
        """No square-root generator occurs."""
        return not self.c or (len(self.c) == 1 and 0 in self.c)

    def num0(self):
        return self.c.get(0, self.F.pzero)

    def __repr__(self):
        return f"Elem({self.F.to_sympy(self)})"

    # -- arithmetic -------------------------------------------------------
    def _coerce(self, other):
        if isinstance(other, Elem):
            return other
        return self.F.const(other)

    def __neg__(self):
        return Elem(self.F, {m: -p for m, p in self.c.items()}, self.d)

    def __add__(self, other):
        other = self._coerce(other)
        if not self.c:
            return other
        if not other.c:
            return self
        F = self.F
        F.tick()
        a, b = self, other
        if a.d == b.d:
            return F.make(_addc(a.c, b.c), a.d)
        if a.d.is_one():
            return F.make_reduced(_addc(_scalec(a.c, b.d), b.c), b.d)
        if b.d.is_one():
            return F.make_reduced(_addc(a.c, _scalec(b.c, a.d)), a.d)
        fa = F._den_factors(a.d) if not a.d.is_constant() else None
        fb = F._den_factors(b.d) if fa is not None and not b.d.is_constant() else None
        if fb is not None:
            # gcd of the denominators from their factorisations; the sum can only cancel factors of it
            eb = {str(f): e for f, e in fb[1]}
            common = [(f, min(e, eb[str(f)])) for f, e in fa[1] if str(f) in eb]
            gi = flint.fmpz(math.gcd(int(fa[0]), int(fb[0])))
            g = F.ctx.constant(gi)
            for f, e in common:
                g = g * f**e
            da = a.d / g
            db = b.d / g
            num = _addc(_scalec(a.c, db), _scalec(b.c, da))
            if not num:
                return F.zero
            num, h = F._divide_out(num, common, gi)
            return F.make_reduced(num, (a.d / h) * db if not h.is_one() else a.d * db)
        g = a.d.gcd(b.d)
        if g.is_one():
            return F.make_reduced(_addc(_scalec(a.c, b.d), _scalec(b.c, a.d)), a.d * b.d)
        da = a.d / g
        db = b.d / g
        num = _addc(_scalec(a.c, db), _scalec(b.c, da))
        if not num:
            return F.zero
        h = g
        for p in num.values():
            h = h.gcd(p)
            if h.is_one():
                break
        if h.is_one():
            return F.make_reduced(num, a.d * db)
        return F.make_reduced({m: p / h for m, p in num.items()}, (a.d / h) * db)

    __radd__ = __add__

    def __sub__(self, other):
        return self + (-self._coerce(other))

    def __rsub__(self, other):
        return self._coerce(other) + (-self)

    def __mul__(self, other):
        other = self._coerce(other)
        F = self.F
        if not self.c or not other.c:
            return F.zero
        F.tick()
        a, b = self, other
        if len(a.c) == 1 and len(b.c) == 1 and 0 in a.c and 0 in b.c:
            an, bn, ad, bd = a.c[0], b.c[0], a.d, b.d
            if not bd.is_one():
                cc, bd = F._cancel({0: an}, bd)
                an = cc[0]
            if not ad.is_one():
                cc, ad = F._cancel({0: bn}, ad)
                bn = cc[0]
            return F.make_reduced({0: an * bn}, ad * bd)
        if F.tower_mask:
            ov = 0
            for m1 in a.c:
                for m2 in b.c:
                    ov |= m1 & m2
            if ov & F.tower_mask:
                return F.mul_tower(a, b)
        return F.make(*F.mulc(a.c, b.c, a.d * b.d))

    __rmul__ = __mul__

    def inv(self):
        F = self.F
        if not self.c:
            raise ZeroDivisionError("division by an element that is identically zero")
        if self.is_plain():
            return F._inv_plain(self.c[0], self.d)
        # rationalise: multiply by the conjugates until the norm is free of square roots
        n = Elem(F, dict(self.c), F.pone)
        mult = F.one
        # highest root first: a nested root's radicand only uses lower ones
        for i in reversed(range(len(F.sqrts))):
            bit = 1 << i
            if not any(m & bit for m in n.c):
                continue
            conj = Elem(F, {m: (-p if m & bit else p) for m, p in n.c.items()}, n.d)
            mult = mult * conj
            n = n * conj
            if not n.c:
                raise ZeroDivisionError("division by an element that is zero (dependent square roots)")
        if not n.is_plain():  # pragma: no cover - only with dependent radicands
            raise Unsupported("could not rationalise a denominator")
        return Elem(F, {0: self.d}, F.pone) * mult * n.inv()

    def __truediv__(self, other):
        other = self._coerce(other)
        return self * other.inv()

    def __rtruediv__(self, other):
        return self._coerce(other) * self.inv()

    def __pow__(self, k: int):
        if not isinstance(k, int):
            raise TypeError("only integer powers of elements")
        if k < 0:
            return self.inv() ** (-k)
        out = self.F.one
        base = self
        while k:
            if k & 1:
                out = out * base
            k >>= 1
            if k:
                base = base * base
        return out

    # -- calculus ---------------------------------------------------------
    def diff(self, i: int) -> Elem:
        """Derivative with respect to chart coordinate number ``i``."""
        return self.F.diff(self, i)

    # -- evaluation -------------------------------------------------------
    def _needs(self):
        """(base generator indices, square-root bits) this element uses."""
        used = set()
        bits = 0
        for m, p in self.c.items():
            bits |= m
            used.update(j for j, e in enumerate(p.degrees()) if e)
        used.update(j for j, e in enumerate(self.d.degrees()) if e)
        return used, bits

    def evaluate(self, pt):
        """Value at a :class:`Point`: ``fmpq`` when every generator it uses has
        an exact value there, else an ``arb`` ball (the polynomials are still
        evaluated exactly in the generators that have exact values)."""
        F = self.F
        if not self.c:
            return flint.fmpq(0)
        if self._q is None:
            used, bits = self._needs()
            self._q = [used, bits, None]
        used, bits, qpolys = self._q
        if pt.fill is not None:
            missing = [j for j in used if pt.abase[j] is None]
            if missing:
                with arb_precision():
                    for j in missing:
                        pt.fill(j)
        if qpolys is None:
            qpolys = ({m: F.to_q(p) for m, p in self.c.items()}, F.to_q(self.d))
            self._q[2] = qpolys
        qc, qd = qpolys
        if all(pt.base[j] is not None for j in used):
            vals = pt.exact_values()
            den = qd(*vals)
            if den == 0:
                raise ZeroDivisionError("denominator vanishes at the point")
            sq_exact = True
            i = 0
            m = bits
            while m:
                if m & 1 and pt.sqrt[i] is None:
                    sq_exact = False
                    break
                m >>= 1
                i += 1
            if sq_exact:
                total = flint.fmpq(0)
                for m, p in qc.items():
                    v = p(*vals)
                    if m:
                        v = v * pt.sqrt_product(m, True)
                    total += v
                return total / den
            with arb_precision():
                total = flint.arb(0)
                for m, p in qc.items():
                    v = p(*vals)
                    if v == 0:
                        continue
                    total += flint.arb(v) * pt.sqrt_product(m, False) if m else flint.arb(v)
                return total / den
        # some generator has no exact value: substitute the exact ones, then interval arithmetic
        with arb_precision():
            sub = {j: pt.base[j] for j in used if pt.base[j] is not None}

            def ev(q):
                return F.eval_arb(q.subs(sub) if sub else q, pt.abase)

            den = ev(qd)
            if den.contains(0):
                raise ZeroDivisionError("denominator not separated from zero at the point")
            total = flint.arb(0)
            for m, p in qc.items():
                v = ev(p)
                if m:
                    v = v * pt.sqrt_product(m, False)
                total += v
            return total / den


def _addc(a, b):
    out = dict(a)
    for m, p in b.items():
        q = out.get(m)
        if q is None:
            out[m] = p
        else:
            s = q + p
            if s.is_zero():
                del out[m]
            else:
                out[m] = s
    return out


def _scalec(c, f):
    return {m: p * f for m, p in c.items()}


# ---------------------------------------------------------------------------
# the field


class Point:
    """Values of the generators at one point: exact (``fmpq`` or None) and interval."""

    __slots__ = ("base", "sqrt", "abase", "asqrt", "_prod", "_vals", "fill")

    def __init__(self, base, sqrt, abase, asqrt):
        self.base = base  # fmpq or None (not rational) per base generator
        self.sqrt = sqrt  # fmpq or None per square-root generator
        self.abase = abase  # arb per base generator
        self.asqrt = asqrt  # arb per square-root generator
        self._prod = {}
        self._vals = None
        self.fill = None  # computes a generator value on first use (opaque generators)

    def exact_values(self):
        """The exact values as evaluation arguments (0 stands in for generators without one)."""
        if self._vals is None:
            self._vals = [v if v is not None else flint.fmpq(0) for v in self.base]
        return self._vals

    def sqrt_product(self, mask, exact):
        key = (mask, exact)
        v = self._prod.get(key)
        if v is None:
            vals = self.sqrt if exact else self.asqrt
            v = flint.fmpq(1) if exact else flint.arb(1)
            i = 0
            m = mask
            while m:
                if m & 1:
                    v = v * vals[i]
                m >>= 1
                i += 1
            self._prod[key] = v
        return v


_HYPER = (sp.sinh, sp.cosh, sp.tanh, sp.coth, sp.sech, sp.csch)
_TRIG = (sp.sin, sp.cos, sp.tan, sp.cot, sp.sec, sp.csc)


def prepare(expr):
    """Rewrite hyperbolic functions as exponentials and tan/cot/sec/csc via sin, cos."""
    expr = sp.sympify(expr)
    if expr.has(*_HYPER):
        expr = expr.replace(lambda e: isinstance(e, _HYPER), lambda e: e.rewrite(sp.exp))
    if expr.has(sp.exp) and expr.has(sp.log):
        # exp(c*(t + log(w))) -> exp(c t) * w**c, so that exp and log do not stay independent generators
        expr = expr.replace(
            lambda e: isinstance(e, sp.exp), lambda e: sp.expand_power_exp(sp.exp(sp.expand(e.args[0])))
        )
    if expr.has(sp.tan, sp.cot, sp.sec, sp.csc):
        expr = expr.replace(lambda e: isinstance(e, (sp.tan, sp.cot, sp.sec, sp.csc)), _trig_via_sin_cos)
    if expr.has(sp.LambertW):
        # one generator per argument, whatever form the argument was written in
        expr = expr.replace(
            lambda e: isinstance(e, sp.LambertW) and _principal(e), lambda e: sp.LambertW(sp.expand(e.args[0]))
        )
    if expr.has(sp.LambertW) and expr.has(sp.exp):
        # exp(k W(z)) = (z / W(z))**k (W exp(W) = z on every branch), so exp(W) is not a new generator
        expr = expr.replace(lambda e: isinstance(e, sp.exp) and e.args[0].has(sp.LambertW), _exp_of_lambertw)
    return expr


def _exp_of_lambertw(e):
    rest = []
    factor = sp.Integer(1)
    for t in sp.Add.make_args(sp.expand(e.args[0], deep=False)):
        c, m = t.as_coeff_Mul()
        if isinstance(m, sp.LambertW) and _principal(m) and c.is_Integer:
            factor = factor * (m.args[0] / m) ** c
        else:
            rest.append(t)
    return sp.exp(sp.Add(*rest)) * factor


def _principal(w) -> bool:
    return len(w.args) == 1 or w.args[1] == 0


def _nonnegative_on(expr, coords, relations) -> bool:
    """``expr >= 0`` everywhere on the region, shown with sympy's assumptions after writing each
    coordinate with a one-sided bound ``v > b`` (``v < b``) as ``b + p`` (``b - p``), ``p > 0``."""
    sub = {}
    for rel in relations:
        if rel is sp.true or rel is sp.false or not isinstance(rel, sp.core.relational.Relational):
            continue
        for side, other, lower in (
            (rel.lhs, rel.rhs, rel.rel_op in (">", ">=")),
            (rel.rhs, rel.lhs, rel.rel_op in ("<", "<=")),
        ):
            if side in coords and side not in sub and side not in other.free_symbols:
                if other.free_symbols & set(coords):
                    continue
                p = sp.Dummy("p", positive=True)
                sub[side] = other + p if lower else other - p
    try:
        return bool(sp.together(expr.xreplace(sub)).is_nonnegative)
    except (TypeError, ValueError):  # pragma: no cover - defensive
        return False


_SIGNED = (sp.Abs, sp.sign, sp.Heaviside, sp.DiracDelta)


def _positive_parametrisation(coords, relations) -> dict:
    """Coordinate -> ``b + p`` (``b - p``) with ``p`` a positive dummy (non-negative for ``>=``,
    ``<=``), one per relation ``v > b`` (``v < b``) of the region, ``b`` free of ``v`` (it may use
    other coordinates: ``rho > tau``; substitutions are chained, never in a cycle). Every point of
    the region is reached with such dummies, so a sign shown for the substituted expression holds
    on the region."""
    sub: dict = {}

    def closure(syms):
        out, todo = set(), list(syms)
        while todo:
            x = todo.pop()
            if x in out:
                continue
            out.add(x)
            if x in sub:
                todo.extend(sub[x].free_symbols)
        return out

    for rel in relations or ():
        if rel is sp.true or rel is sp.false or not isinstance(rel, sp.core.relational.Relational):
            continue
        for side, other, lower in (
            (rel.lhs, rel.rhs, rel.rel_op in (">", ">=")),
            (rel.rhs, rel.lhs, rel.rel_op in ("<", "<=")),
        ):
            if side not in coords or side in sub or side in closure(other.free_symbols):
                continue
            # a closed bound reaches the boundary itself: p >= 0 there
            p = sp.Dummy("p", positive=True) if rel.rel_op in (">", "<") else sp.Dummy("p", nonnegative=True)
            sub[side] = other + p if lower else other - p
            break
    return sub


def _chain(x, sub):
    for _ in range(len(sub)):
        y = x.xreplace(sub)
        if y == x:
            break
        x = y
    return x


def _sign_on(x, sub):
    """1, -1 or 0 when the sign of ``x`` is the same on the whole region (see
    :func:`_positive_parametrisation`), else None."""
    try:
        y = sp.together(_chain(x, sub)) if sub else x
        if y.is_positive:
            return 1
        if y.is_negative:
            return -1
        if y.is_zero:
            return 0
        if y.is_nonnegative:
            return 2  # >= 0: enough for Abs
        if y.is_nonpositive:
            return -2
    except (TypeError, ValueError, RecursionError):  # pragma: no cover - defensive
        return None
    return None


def settle_signs(expr, coords, relations):
    """``Abs``, ``sign``, ``Heaviside`` and ``DiracDelta`` of an argument whose sign the region
    decides, replaced by their values there: ``Abs(r) -> r`` (so ``sqrt(r**2) -> r``) where
    ``r >= 0``, ``sign(x) -> 1`` and ``Heaviside(x) -> 1`` where ``x > 0``, ``DiracDelta(x) -> 0``
    where ``x != 0``. What the region does not decide is left as it is (the caller must not pass
    it off as a result: see :func:`unsettled`)."""
    expr = sp.sympify(expr)
    if not expr.has(*_SIGNED):
        return expr
    sub = _positive_parametrisation(tuple(coords), relations)

    def rule(e):
        x = e.args[0]
        s = _sign_on(x, sub)
        if s is None:
            return e
        if isinstance(e, sp.Abs):
            return x if s >= 0 else -x
        if s in (2, -2):
            return e
        if isinstance(e, sp.sign):
            return sp.Integer(s)
        if isinstance(e, sp.Heaviside):
            return sp.Integer(1) if s > 0 else (sp.Integer(0) if s < 0 else e)
        return sp.Integer(0) if s != 0 else e  # DiracDelta(x, k...) off its support

    return expr.replace(lambda e: isinstance(e, _SIGNED), rule)


def unsettled(expr) -> list:
    """The distributional or sign-dependent sub-expressions (``DiracDelta``, ``Heaviside``, ``sign``,
    ``Abs``) left in ``expr``, as text: a value containing one is no result."""
    expr = sp.sympify(expr)
    return sorted({sp.sstr(a) for a in expr.atoms(*_SIGNED)}, key=len)


def simplify_lambertw(expr, coords, params, relations):
    """Replace ``W(u exp(u))`` by ``u`` where that holds: the identity ``W(z) = u`` is checked exactly
    (``z = u exp(u)`` in a field of its own) and the branch condition ``u >= -1`` of the principal
    branch is shown on the region (:func:`_nonnegative_on` of ``u + 1``); otherwise ``W`` stays."""

    def rule(w):
        z = w.args[0]
        ft = sp.factor_terms(sp.powsimp(z))
        v = sp.Integer(0)
        rest = []
        for f in sp.Mul.make_args(ft):
            if isinstance(f, sp.exp):
                v += f.args[0]
            elif f.is_Pow and f.base is sp.E:
                v += f.exp
            else:
                rest.append(f)
        if v == 0:
            return w
        P = sp.Mul(*rest)
        try:
            sub = Field(coords, params, [P - v])
            same = sub.element(P - v).is_zero()
        except (Unsupported, ZeroDivisionError):
            return w
        if same and _nonnegative_on(v + 1, coords, relations):
            return v
        return w

    if not expr.has(sp.LambertW):
        return expr
    return expr.replace(lambda e: isinstance(e, sp.LambertW) and _principal(e), rule)


def _is_heavy_atom(e, coords) -> bool:
    """A coordinate-dependent node that is not a rational operation and makes exact arithmetic costly:
    a fractional power of anything but a single symbol, or a function (exp, tanh, LambertW...) of an
    argument other than a rational multiple of one coordinate."""
    if isinstance(e, sp.Pow):
        return not e.exp.is_Integer and not e.base.is_Symbol
    if isinstance(e, sp.Function) and not isinstance(e, sp.core.function.AppliedUndef):
        if len(e.args) == 1:
            c, m = e.args[0].as_coeff_Mul()
            if m in coords and c.is_Rational:
                return False
        return True
    return False


def _heavy_atoms(e, coords) -> set:
    out = set()
    stack = [e]
    while stack:
        x = stack.pop()
        if not (x.free_symbols & coords):
            continue
        if _is_heavy_atom(x, coords):
            out.add(x)
            continue
        stack.extend(x.args)
    return out


def find_aliases(exprs, coords) -> list:
    """Sub-expressions worth treating as opaque functions of the coordinates.

    A sum reached from the top of an expression through sums, products and integer powers, with at
    least two terms that carry at least two different heavy atoms (see :func:`_is_heavy_atom`), for
    example ``1 + m1/sqrt(R1) + m2/sqrt(R2)`` or ``tanh(s (r + R)) - tanh(s (r - R))``. As an
    element of the field such a sum is costly (rationalising it multiplies its conjugates), while
    the curvature of a metric built from it is compact in terms of the sum and its derivatives."""
    cs = set(coords)
    found: list = []

    def visit(e):
        if e.is_Add:
            heavy = [_heavy_atoms(t, cs) for t in e.args]
            atoms = set().union(*heavy)
            if sum(1 for h in heavy if h) >= 2 and len(atoms) >= 2:
                if not e.has(sp.core.function.AppliedUndef, sp.Derivative) and e not in found:
                    found.append(e)
                return
            for t in e.args:
                visit(t)
        elif e.is_Mul:
            for t in e.args:
                visit(t)
        elif e.is_Pow and e.exp.is_Integer:
            visit(e.base)

    for e in exprs:
        visit(sp.sympify(e))
    return found


def _trig_via_sin_cos(e):
    w = e.args[0]
    if isinstance(e, sp.tan):
        return sp.sin(w) / sp.cos(w)
    if isinstance(e, sp.cot):
        return sp.cos(w) / sp.sin(w)
    if isinstance(e, sp.sec):
        return 1 / sp.cos(w)
    return 1 / sp.sin(w)


def _split_linear(e):
    """``e`` as ``c0 + sum c_k m_k`` with rational ``c`` (list of (c, m))."""
    c0 = sp.Integer(0)
    terms = []
    for t in sp.Add.make_args(sp.expand(e)):
        c, m = t.as_coeff_Mul()
        if m == 1 or m.is_number and m.is_Rational:
            c0 += t
        elif not c.is_Rational:
            raise Unsupported(f"non-rational coefficient in {e}")
        else:
            terms.append((sp.Rational(c), m))
    if not c0.is_Rational:
        raise Unsupported(f"non-rational constant in {e}")
    return sp.Rational(c0), terms


class Field:
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

    # -- scanning (phase 1: which generators exist) ------------------------
    def _gen(self, key, kind, sym, data=None, label=""):
        g = self._gens.get(key)
        if g is None:
            g = BaseGen(kind, sym, key, data, label)
            self._gens[key] = g
        return g

    def _scan_func(self, f, order):
        if not isinstance(f, sp.core.function.AppliedUndef):
            raise Unsupported(f"not a function application: {f}")
        for a in f.args:
            if a not in self.coord_index:
                raise Unsupported(f"function {f} has an argument that is not a coordinate")
        if len(set(f.args)) != len(f.args):
            raise Unsupported(f"repeated argument in {f}")
        old = self._funcs.get(f.func)
        if old is not None and old[0] != f.args:
            raise Unsupported(f"function {f.func} used with different arguments")
        self._funcs[f.func] = (f.args, max(order, old[1] if old else 0))

    def _scan(self, e):
        if e.is_Rational:
            return
        if e.is_Symbol:
            if e in self.coord_index:
                self._gen(("coord", e), "coord", e)
            else:
                self._gen(("param", e), "param", e)
            return
        if e is sp.pi or e is sp.E:
            self._gen(("const", e), "const", e)
            return
        if e.is_Number:
            raise Unsupported(f"inexact number {e}")
        if isinstance(e, sp.core.function.AppliedUndef):
            self._scan_func(e, 0)
            return
        if isinstance(e, sp.Derivative):
            f = e.expr
            if not isinstance(f, sp.core.function.AppliedUndef):
                raise Unsupported(f"derivative of a non-function: {e}")
            self._scan_func(f, sum(n for _, n in e.variable_count))
            return
        if isinstance(e, (sp.Add, sp.Mul)):
            for a in e.args:
                self._scan(a)
            return
        if isinstance(e, sp.Pow):
            b, x = e.args
            if x.is_Integer:
                self._scan(b)
                return
            if x.is_Rational and x.q == 2:
                self._scan(b)
                if not self._scan_alg(b) and b not in self._sqrt_keys:
                    self._sqrt_keys.append(b)
                return
            if x.is_Rational:
                self._scan(b)
                split = self._root_split_of(b, x.q)
                if split is not None:
                    for key, _e in split:
                        base = key[1]
                        self._scan(base)
                        self._gen(key, "root", base ** sp.Rational(1, x.q), {"base": base, "q": x.q})
                    return
                # b**(p/q) of a base with roots: a generator rho = b**(1/q) with d rho = rho db / (q b);
                # rho**q = b is not applied
                self._gen(
                    ("pow", b, sp.Rational(1, x.q)),
                    "pow",
                    b ** sp.Rational(1, x.q),
                    {"base": b, "exp": sp.Rational(1, x.q)},
                )
                return
            if b is sp.E:
                self._scan(sp.exp(x))
                return
            self._scan(b)
            c0, terms = _split_linear(x)
            if c0.q not in (1, 2):
                raise Unsupported(f"power {e}")
            if c0.q == 2 and b not in self._sqrt_keys:
                self._sqrt_keys.append(b)
            for c, m in terms:
                if m.free_symbols & set(self.coords) or m.has(sp.core.function.AppliedUndef):
                    raise Unsupported(f"exponent depending on a coordinate: {e}")
                self._scan(m)
                self._gen(("pow", b, m / c.q), "pow", b ** (m / c.q), {"base": b, "exp": m / c.q})
            return
        if isinstance(e, sp.exp):
            c0, terms = _split_linear(e.args[0])
            if c0 != 0:
                self._gen(("const", sp.E), "const", sp.E)
            for c, m in terms:
                self._scan(m)
                # one generator exp(m/q) per atom m, q the lcm of the denominators met (exp(m/2) = exp(m/4)**2)
                self._expq[m] = math.lcm(self._expq.get(m, 1), c.q)
            return
        if isinstance(e, sp.log):
            w = e.args[0]
            self._scan(w)
            self._gen(("log", w), "log", e, {"arg": w})
            return
        if isinstance(e, sp.LambertW):
            if not _principal(e):
                raise Unsupported(f"a non-principal branch of LambertW: {e}")
            z = e.args[0]
            self._scan(z)
            self._gen(("lambertw", z), "lambertw", e, {"arg": z})
            return
        if isinstance(e, (sp.sin, sp.cos)):
            w = e.args[0]
            c, m = sp.expand(w).as_coeff_Mul()
            if not c.is_Rational or c == 0:
                raise Unsupported(f"trigonometric argument {w}")
            if isinstance(m, sp.Add):
                # a sum is its own angle: no addition theorem is applied
                c, m = sp.Integer(1), sp.expand(w)
            if m not in self.coord_index:
                self._scan(m)
            self._trig[m] = math.lcm(self._trig.get(m, 1), sp.Rational(c).q)
            self._pending_trig.append(m)
            return
        raise Unsupported(f"{type(e).__name__} is not on the fast path: {e}")

    def _root_split_of(self, b, q):
        """``b**(1/q)`` (``q >= 3``, ``b`` a rational function free of roots) as a product of root
        generators: ``[(key, e)]`` with ``b**(1/q) = prod rho_key**e``, from
        ``b = (c_n n) / (c_d d)``, the contents split into primes and ``n``, ``d`` primitive with a
        positive leading coefficient. None when ``b`` is not of that kind (then a generator with no
        relation, as before)."""
        key = (b, q)
        if key in self._root_split:
            return self._root_split[key]
        out = None
        numeric = b.is_Rational and b > 0
        if self.real_roots and 3 <= q <= 5 and (b.free_symbols or numeric) and not _has_root(b) and not b.atoms(
            sp.Function
        ):
            out = []
            num, den = sp.fraction(sp.together(b))
            for part, sign in ((num, 1), (den, -1)):
                c, rest = sp.factor_terms(sp.expand(part)).as_coeff_Mul()
                rest = sp.expand(rest)
                if c < 0:
                    c, rest = -c, sp.expand(-rest)
                if rest.is_number:
                    if rest != 1:
                        out = None
                        break
                else:
                    out.append((("root", rest, q), sign))
                c = sp.Rational(c)
                for n, sg in ((int(c.p), sign), (int(c.q), -sign)):
                    if n > 10**12:
                        out = None
                        break
                    for prime, e in sp.factorint(n).items():
                        out.append((("root", sp.Integer(prime), q), sg * e))
                if out is None:
                    break
        self._root_split[key] = out
        return out

    def _scan_alg(self, b) -> bool:
        """Register ``sqrt(b)`` as an algebraic generator when ``b = A + c sqrt(B)`` with ``A``, ``c``,
        ``B`` free of roots (see :func:`nested_parts`), unless an earlier one has the same inner root
        (two defining polynomials sharing ``sqrt(B)`` would hide a relation between them; the later
        root then becomes an ordinary square root over the field of the first)."""
        key = ("alg", b)
        if key in self._gens:
            return True
        if not self.algebraic_roots:
            return False
        parts = nested_parts(b)
        if parts is None:
            return False
        A, c, B = parts
        Bx = sp.expand(B)
        if any(g.kind == "alg" and g.data["Bx"] == Bx for g in self._gens.values()):
            return False
        self._gen(key, "alg", sp.sqrt(b), {"A": A, "c": c, "B": B, "Bx": Bx, "radicand": b})
        return True

    def _finish_scan(self, extra_order):
        for m, q in self._expq.items():
            self._gen(("exp", m), "exp", sp.exp(m / q), {"arg": m / q, "q": q})
        for m, q in self._trig.items():
            angle = m / q
            self._gen(("cos", m), "cos", sp.cos(angle), {"atom": m, "q": q, "angle": angle})
        for func, (args, order) in self._funcs.items():
            top = order + extra_order
            for k in range(top + 1):
                for combo in combinations_with_replacement(range(len(args)), k):
                    alpha = tuple(combo.count(j) for j in range(len(args)))
                    f = func(*args)
                    sym = f
                    if k:
                        sym = sp.Derivative(f, *[(args[j], n) for j, n in enumerate(alpha) if n])
                    label = func.__name__ + ("_" + "".join(str(args[j]) * n for j, n in enumerate(alpha)) if k else "")
                    data = {"func": func, "args": args, "alpha": alpha, "top": top}
                    kind = "func"
                    if func in self.alias_expr:
                        kind = "alias"
                        data["expr"] = self.alias_expr[func]
                        label = "[" + label + "]"
                    self._gen(("func", func, alpha), kind, sym, data, label)

    # -- elements ------------------------------------------------------------
    def tick(self):
        self.ops += 1
        if self.deadline is not None and not self.ops & 63 and time.process_time() > self.deadline:
            raise BudgetExceeded()

    def sum(self, elems) -> Elem:
        """Sum of elements: terms with equal denominators are added before any gcd is taken."""
        groups: list = []  # [denominator, {mask: numerator}, the element when it is alone]
        for e in elems:
            if not e.c:
                continue
            for grp in groups:
                if grp[0] == e.d:
                    acc = grp[1]
                    for m, p in e.c.items():
                        q = acc.get(m)
                        acc[m] = p if q is None else q + p
                    grp[2] = None
                    break
            else:
                groups.append([e.d, dict(e.c), e])
        self.tick()
        out = self.zero
        for d, acc, alone in groups:
            out = out + (alone if alone is not None else self.make(acc, d))
        return out

    def const(self, v) -> Elem:
        if isinstance(v, Elem):
            return v
        if isinstance(v, (int, flint.fmpz)):
            v = flint.fmpq(v)
        elif isinstance(v, Fraction):
            v = flint.fmpq(v.numerator, v.denominator)
        elif isinstance(v, sp.Rational):
            v = flint.fmpq(int(v.p), int(v.q))
        if not isinstance(v, flint.fmpq):
            raise TypeError(f"not a rational constant: {v!r}")
        if v == 0:
            return self.zero
        return Elem(self, {0: self.ctx.constant(v.p)}, self.ctx.constant(v.q))

    def gen_elem(self, g: BaseGen) -> Elem:
        return Elem(self, {0: self.ctx.gens()[g.index]}, self.pone)

    def make(self, c, d) -> Elem:
        """Reduce ``c/d`` by the gcd (numerators modulo the algebraic generators' polynomials first)
        and normalise the sign of ``d``."""
        c = {m: p for m, p in c.items() if not p.is_zero()}
        if not c:
            return self.zero
        if self.algs or self.roots:
            c, d, _ = self._reduce_alg(c, d)
            if not c:
                return self.zero
        if not d.is_one():
            c, d = self._cancel(c, d)
        return self.make_reduced(c, d)

    def _den_factors(self, d):
        """``d = cont * prod f**e``: (cont, [(f, e)]) with ``f`` irreducible, cached; None when the
        part not found in the factor base is too large to factor cheaply (the caller takes a gcd).
        Factors met before are found by trial division; only what is left is factored."""
        key = str(d)
        if key in self._dfac:
            return self._dfac[key]
        cont = d.content()
        rest = d / self.ctx.constant(cont) if cont != 1 else d
        facs = []
        degs = rest.degrees()
        for f, fdeg in self._fbase:
            if rest.is_constant():
                break
            if any(x > y for x, y in zip(fdeg, degs, strict=True)):
                continue
            e = 0
            while True:
                try:
                    rest = rest / f
                except DomainError:
                    break
                e += 1
            if e:
                facs.append((f, e))
                degs = rest.degrees()
        out = None
        if rest.is_constant():
            out = (cont * rest.leading_coefficient(), facs)
        elif len(rest) <= self.FACTOR_LIMIT:
            unit, more = rest.factor()
            for f, e in more:
                self._fbase.append((f, f.degrees()))
                facs.append((f, e))
            out = (cont * unit, facs)
        if len(self._dfac) > 20000:
            self._dfac.clear()
        self._dfac[key] = out
        return out

    def _cancel(self, c, d):
        """``c/d`` with the gcd of ``d`` and every component divided out: trial division by the
        irreducible factors of ``d`` (much cheaper than a multivariate gcd when, as in curvature
        computations, denominators are products of powers of a few factors), then the integer content."""
        fd = None if d.is_constant() else self._den_factors(d)
        if fd is None:
            g = d
            for p in c.values():
                g = g.gcd(p)
                if g.is_one():
                    return c, d
            return {m: p / g for m, p in c.items()}, d / g
        cont, facs = fd
        c, div = self._divide_out(c, facs, cont)
        return c, (d / div if not div.is_one() else d)

    def _divide_out(self, c, facs, cont):
        """Divide every component of ``c`` by the largest ``prod f**k`` (``k <= e`` for each
        ``(f, e)`` of ``facs``) times the largest factor of the integer ``cont`` that divides them
        all: (new components, the divisor)."""
        div = self.pone
        for f, e in facs:
            k = 0
            while k < e:
                try:
                    c = {m: p / f for m, p in c.items()}
                except DomainError:
                    break
                k += 1
            if k:
                div = div * f**k
        if abs(cont) != 1:
            gi = abs(cont)
            for p in c.values():
                gi = flint.fmpz(math.gcd(int(gi), int(p.content())))
                if gi == 1:
                    break
            if gi != 1:
                k = self.ctx.constant(gi)
                c = {m: p / k for m, p in c.items()}
                div = div * k
        return c, div

    def make_reduced(self, c, d) -> Elem:
        if self.algs or self.roots:
            c, d, changed = self._reduce_alg(c, d)
            if not c:
                return self.zero
            if changed and not d.is_constant():
                # a full gcd costs more than it saves here; monomial factors (norms such as a**2 z**2) go
                g = d.term_content()
                for p in c.values():
                    if g.is_one():
                        break
                    g = g.gcd(p.term_content())
                if not g.is_one():
                    c = {m: p / g for m, p in c.items()}
                    d = d / g
        if d.leading_coefficient() < 0:
            c = {m: -p for m, p in c.items()}
            d = -d
        if d.is_zero():
            raise ZeroDivisionError("zero denominator")
        return Elem(self, c, d)

    def mulc(self, ac, bc, den):
        """Product of two component dicts; returns (components, denominator)."""
        overl = 0
        for m1 in ac:
            for m2 in bc:
                overl |= m1 & m2
        extra = self.pone
        out: dict = {}
        for m1, p1 in ac.items():
            for m2, p2 in bc.items():
                o = m1 & m2
                f = p1 * p2
                i = 0
                oo = overl
                while oo:
                    if oo & 1:
                        s = self.sqrts[i]
                        if o >> i & 1:
                            f = f * s.num
                        elif not s.den.is_one():
                            f = f * s.den
                    oo >>= 1
                    i += 1
                m = m1 ^ m2
                q = out.get(m)
                out[m] = f if q is None else q + f
        i = 0
        oo = overl
        while oo:
            if oo & 1 and not self.sqrts[i].den.is_one():
                extra = extra * self.sqrts[i].den
            oo >>= 1
            i += 1
        return out, den * extra

    # -- algebraic generators ---------------------------------------------------
    def _setup_alg(self, g: BaseGen):
        """Defining polynomial of the algebraic generator ``g`` and the inner root it replaces."""
        d = g.data
        A, c, B = (self._el(prepare(d[k])) for k in ("A", "c", "B"))
        if not (A.is_plain() and c.is_plain() and B.is_plain()) or not c.c:
            raise Unsupported(f"nested root {g.sym}: parts outside the base field")
        j = g.index
        gens = self.ctx.gens()
        r = Elem(self, {0: gens[j]}, self.pone)
        u = r * r - A
        P = (u * u - c * c * B).num0()  # cleared of denominators (the algs list is still empty here)
        r2 = gens[j] * gens[j]
        L, rest = divmod(P, r2 * r2)
        P2, P0 = divmod(rest, r2)
        if any(q.degrees()[j] > 0 for q in (L, P2, P0)) or L.is_zero():
            raise Unsupported(f"nested root {g.sym}: unexpected defining polynomial")
        if L.leading_coefficient() < 0:
            P, L, P2, P0 = -P, -L, -P2, -P0
        _cf, facs = P.factor()
        if sum(e for f, e in facs if f.degrees()[j] > 0) != 1:
            self._alg_reducible = True  # a non-zero remainder is then not a definite non-zero
        al = AlgGen(g, j, P, L, P2, P0, gens[j], gens, A, c, B)
        self.algs.append(al)
        self._alg_of[j] = al
        # sqrt(B) = (r**2 - A)/c: the inner root is no generator of its own
        key, factor = self._canon_sqrt(B.c[0], B.d)
        self._alg_inner[key] = (r * r - A) / (c * self.const(factor))

    def _eliminate(self, al: AlgGen):
        """Trade the algebraic generator's relation for a square root: when ``F`` is ``F2 v**2 + F0``
        in a coordinate or parameter ``v`` that occurs in no other generator (Kerr-Schild's
        ``r**4 - (x**2 + y**2 + z**2 - a**2) r**2 - a**2 z**2`` in ``y``), the field
        ``Q(..., v)[r]/(F)`` is ``Q(..., r)[s]/(s**2 - R)`` with ``s = v``, ``R = -F0/F2``: ``r``
        becomes a free variable (no reduction, natural denominators such as ``r**4 + a**2 z**2``) and
        ``v`` a square-root generator with ``dv/dv = 1``. Keeps the reduction when no ``v`` fits."""
        P, j = al.poly, al.index
        gens = self.ctx.gens()
        best = None
        for g in self.base:
            k = g.index
            if g.kind not in ("coord", "param") or P.degrees()[k] != 2:
                continue
            if any(h is not g and h is not al.gen and g.sym in h.sym.free_symbols for h in self.base):
                continue
            if self.alias_sub and any(g.sym in X.free_symbols for X in self.alias_sub):
                continue
            v2 = gens[k] * gens[k]
            F2, F0 = divmod(P, v2)
            if F2.degrees()[k] > 0 or F0.degrees()[k] > 0 or F2.is_zero() or F0.degrees()[j] <= 0:
                continue
            rank = (g.kind != "coord", len(F2), -k)
            if best is None or rank < best[0]:
                best = (rank, g, F2, F0)
        if best is None:
            return
        _rank, v, F2, F0 = best
        self.algs = []  # r is free now
        s = self._new_sqrt(-F0, F2, v.sym) if F2.leading_coefficient() > 0 else self._new_sqrt(F0, -F2, v.sym)
        s.coord = v.index
        self._elim = {v.sym: Elem(self, {1 << s.bit: self.pone}, self.pone)}
        self._elim_gen = v
        # every conversion so far used v as a variable: start again
        self._memo.clear()
        self._mono.clear()
        self._dgen.clear()
        self._dlogsqrt.clear()
        self._alg_inner.clear()
        d = al.gen.data
        A, c, B = (self._el(prepare(d[k])) for k in ("A", "c", "B"))
        r = self.gen_elem(al.gen)
        inner = (r * r - A) / c
        if B.is_plain():
            key, factor = self._canon_sqrt(B.c[0], B.d)
            self._alg_inner[key] = inner / self.const(factor)
        self._alg_inner_sym = {d["B"]: inner}

    def _poly_el(self, p) -> Elem:
        """A polynomial of the context as an element (an eliminated variable becomes its root)."""
        if not self._elim or p.degrees()[self._elim_gen.index] <= 0:
            return self.make({0: p}, self.pone)
        k = self._elim_gen.index
        s = next(iter(self._elim.values()))
        out = self.zero
        power = self.one
        rest = p
        v = self.ctx.gens()[k]
        while not rest.is_zero():
            rest, low = divmod(rest, v)  # low: the terms free of v
            if not low.is_zero():
                out = out + Elem(self, {0: low}, self.pone) * power
            power = power * s
        return out

    def _root_free(self, a: Elem, limit: int = 600):
        """``a`` (eliminated form) rewritten over the original variables with the algebraic
        generator reduced modulo its polynomial, when the result does not use it; else None.
        For display only (the element lives in another representation); small elements only."""
        al = next(iter(self._alg_of.values()))
        v = self._elim_gen
        bit = next(iter(self._elim.values())).c
        (mask,) = bit
        if set(a.c) - {0, mask} or sum(len(p) for p in a.c.values()) + len(a.d) > limit:
            return None
        # necessary condition, cheap: r -> -r is an automorphism here (R is even in r); a value free of
        # the root is invariant under it
        flipped = self.make({m: p.compose(*al.flip) for m, p in a.c.items()}, self.pone) / self.make(
            {0: a.d.compose(*al.flip)}, self.pone
        )
        if (flipped - a).c:
            return None
        num = a.c.get(0, self.pzero)
        if mask in a.c:
            num = num + a.c[mask] * self.ctx.gens()[v.index]
        cont, facs = self._den_factors(a.d)
        saved = self.algs, self._elim
        self.algs, self._elim = [al], {}
        try:
            out = self.make({0: num}, self.ctx.constant(cont))
            cache = self.__dict__.setdefault("_root_free_inv", {})
            for f, e in facs:
                key = str(f)
                inv = cache.get(key)
                if inv is None:
                    inv = cache[key] = self._inv_plain(f, self.pone)
                out = out * inv**e
        except (ZeroDivisionError, Unsupported):
            return None
        finally:
            self.algs, self._elim = saved
        if any(p.degrees()[al.index] > 0 for p in out.c.values()) or out.d.degrees()[al.index] > 0:
            return None
        return out

    def _reduce_alg(self, c, d):
        """Numerators of degree >= 4 in an algebraic generator reduced modulo its polynomial
        (``L r**4 = -(P2 r**2 + P0)``; a non-constant ``L`` joins the denominator)."""
        changed = False
        for al in self.algs:
            j = al.index
            while any(p.degrees()[j] >= 4 for p in c.values()):
                changed = True
                out = {}
                for m, p in c.items():
                    if p.degrees()[j] >= 4:
                        q, rem = divmod(p, al.r4)
                        p = rem * al.L - q * al.low if not al.L.is_one() else rem - q * al.low
                    elif not al.L.is_one():
                        p = p * al.L
                    if not p.is_zero():
                        out[m] = p
                c = out
                if not al.L.is_one():
                    d = d * al.L
        for rg in self.roots:
            j, q = rg.index, rg.q
            if any(p.degrees()[j] >= q for p in c.values()):
                changed = True
                out = {}
                for m, p in c.items():
                    while p.degrees()[j] >= q:
                        quo, rem = divmod(p, rg.rq)  # rho**q = P
                        p = rem + quo * rg.P
                    if not p.is_zero():
                        out[m] = p
                c = out
        return c, d, changed

    def _uses_alg(self, p) -> bool:
        degs = p.degrees()
        return any(degs[al.index] > 0 for al in self.algs)

    def _inv_plain(self, num, den) -> Elem:
        """``den / num`` for base polynomials; an algebraic generator in ``num`` is removed by
        multiplying with its conjugates (``r -> -r``, then ``r**2 -> -P2/L - r**2``)."""
        if self.roots and any(num.degrees()[rg.index] > 0 for rg in self.roots):
            return self._inv_roots(num, den)
        if not self.algs or not self._uses_alg(num):
            return self.make_reduced({0: den}, num)
        x = Elem(self, {0: num}, self.pone)
        mult = Elem(self, {0: den}, self.pone)
        for al in self.algs:
            p = x.num0()
            if p.degrees()[al.index] <= 0:
                continue
            self.tick()
            xm = Elem(self, {0: p.compose(*al.flip)}, self.pone)
            y = x * xm  # even in r: (alpha + beta r**2) / y.d
            if not y.c:
                raise ZeroDivisionError("division by zero modulo a reducible defining polynomial")
            beta, alpha = divmod(y.num0(), al.r2)
            if beta.degrees()[al.index] > 0 or alpha.degrees()[al.index] > 0:  # pragma: no cover - defensive
                raise Unsupported("could not rationalise a denominator with a nested root")
            conj = alpha * al.L - beta * al.P2 - beta * al.L * al.r2
            nrm = alpha * alpha * al.L - alpha * beta * al.P2 + beta * beta * al.P0
            if nrm.is_zero():
                raise ZeroDivisionError("division by zero modulo a reducible defining polynomial")
            mult = mult * xm * Elem(self, {0: conj}, self.pone) * Elem(self, {0: y.d}, self.pone)
            x = Elem(self, {0: nrm}, self.pone)
        return mult * self.make_reduced({0: self.pone}, x.num0())

    # -- real root generators -------------------------------------------------
    def _setup_root(self, g: BaseGen):
        """The relation ``rho**q = P`` of the root generator ``g`` (see :meth:`_root_split_of`)."""
        P = self._el(prepare(g.data["base"]))
        if not P.is_plain() or not P.d.is_one() or not P.c:
            raise Unsupported(f"root {g.sym}: base outside the polynomials of the field")
        P = P.c[0]
        if any(P.degrees()[h.index] > 0 for h in self.base if h.kind in ("root", "alg", "pow")):
            raise Unsupported(f"root {g.sym}: base uses another root")
        j = g.index
        rg = RootGen(g, j, g.data["q"], P, self.ctx.gens()[j] ** g.data["q"])
        self.roots.append(rg)
        self._root_of[j] = rg

    def _roots_independent(self) -> bool:
        """No hidden relation among the root generators: prime ``q`` and bases that are distinct
        primes or distinct irreducible polynomials, none of them a ``q``-th power (then
        ``x**q - P`` is irreducible and the roots of different bases are independent)."""
        if not self.roots:
            return True
        seen = []
        for rg in self.roots:
            if not sp.isprime(rg.q):
                return False
            if rg.P.is_constant():
                n = int(rg.P.leading_coefficient())
                if not sp.isprime(n):
                    return False
            else:
                _c, facs = rg.P.factor()
                if len(facs) != 1 or facs[0][1] != 1 or abs(int(_c)) != 1:
                    return False
            key = str(rg.P)
            if key in seen:
                return False
            seen.append(key)
        return True

    def _inv_roots(self, num, den) -> Elem:
        """``den / num`` when ``num`` uses root generators: multiplied by the cofactor of each
        (the adjugate of its multiplication matrix), the denominator becomes the norm, free of it."""
        mult = Elem(self, {0: den}, self.pone)
        x = self.make({0: num}, self.pone)
        for rg in self.roots:
            p = x.num0()
            if p.degrees()[rg.index] <= 0:
                continue
            self.tick()
            cof, nrm = self._root_cofactor(p, rg)
            if not nrm.c:
                raise ZeroDivisionError("division by zero modulo a reducible root relation")
            mult = mult * cof * Elem(self, {0: x.d}, self.pone)
            x = nrm
        return mult * self._inv_plain(x.num0(), x.d)  # x is free of root generators now

    def _root_cofactor(self, p, rg: RootGen):
        """(w, N) with ``p w = N`` modulo ``rho**q - P``, ``N`` free of ``rho``: ``w`` is the first
        column of the adjugate of the multiplication-by-``p`` matrix on ``1, rho, ..., rho**(q-1)``
        and ``N`` its determinant (the norm)."""
        j, q = rg.index, rg.q
        coeffs = {}
        for exps, c in p.terms():
            e = exps[j]
            mono = list(exps)
            mono[j] = 0
            t = self.ctx.from_dict({tuple(mono): c})
            coeffs[e] = coeffs[e] + t if e in coeffs else t
        a = [Elem(self, {0: coeffs[k]}, self.pone) if k in coeffs else self.zero for k in range(q)]
        Pel = Elem(self, {0: rg.P}, self.pone)
        # column k: p rho**k = sum_i a_i rho**(i+k), rho**q = P
        M = [[a[r - k] if r >= k else a[r - k + q] * Pel for k in range(q)] for r in range(q)]

        def det(rows, cols):
            if len(rows) == 1:
                return M[rows[0]][cols[0]]
            out = self.zero
            r0, rest = rows[0], rows[1:]
            for idx, cc in enumerate(cols):
                if not M[r0][cc].c:
                    continue
                t = M[r0][cc] * det(rest, cols[:idx] + cols[idx + 1 :])
                out = out + t if idx % 2 == 0 else out - t
            return out

        rows = list(range(1, q))
        w = [det(rows, [c for c in range(q) if c != i]) * (-1 if i % 2 else 1) for i in range(q)]
        N = self.sum([M[0][i] * w[i] for i in range(q)])
        rho = self.gen_elem(rg.gen)
        cof = self.sum([w[i] * rho**i for i in range(q)])
        return cof, N

    def _canon_sqrt(self, num, den):
        """``sqrt(num/den) = factor * sqrt(k pn / pd)``: the canonical radicand's key and ``factor``."""
        cn, cd = _content(num), _content(den)
        s, k = _square_split(int(cn) * int(cd))
        num = (num / self.ctx.constant(cn)) * k
        den = den / self.ctx.constant(cd)
        return (str(num), str(den)), flint.fmpq(s, int(cd))

    def _new_sqrt(self, num, den, sym, trig=None, radicand=None) -> SqrtGen:
        if len(self.sqrts) >= 24:
            raise Unsupported("too many square roots")
        s = SqrtGen(len(self.sqrts), num, den, sym, trig, tower=radicand is not None)
        self.sqrts.append(s)
        if radicand is not None:
            s.radicand = radicand
            self.tower_mask |= 1 << s.bit
        else:
            s.radicand = self.make({0: num}, den)
        return s

    def _mono_elem(self, m1: int, m2: int) -> Elem:
        """``s^m1 * s^m2`` as an element (nested roots replaced by their radicands)."""
        key = (m1, m2) if m1 <= m2 else (m2, m1)
        r = self._mono.get(key)
        if r is None:
            o = m1 & m2
            if not o:
                r = Elem(self, {m1 ^ m2: self.pone}, self.pone)
            else:
                i = o.bit_length() - 1  # the highest common root
                bit = 1 << i
                r = self.sqrts[i].radicand * self._mono_elem(m1 ^ bit, m2 ^ bit)
            self._mono[key] = r
        return r

    def mul_tower(self, a: Elem, b: Elem) -> Elem:
        """Product when nested roots occur in both factors (each square reduced to its radicand)."""
        groups: dict = {}  # denominator (as text) -> (denominator, {mask: polynomial})
        for m1, p1 in a.c.items():
            for m2, p2 in b.c.items():
                f = p1 * p2
                mono = self._mono_elem(m1, m2)
                key = str(mono.d)
                grp = groups.get(key)
                if grp is None:
                    grp = groups[key] = (mono.d, {})
                acc = grp[1]
                for m, q in mono.c.items():
                    t = f * q if not q.is_one() else f
                    old = acc.get(m)
                    acc[m] = t if old is None else old + t
        den = a.d * b.d
        out = self.zero
        for d, acc in groups.values():
            out = out + self.make(acc, d * den)
        return out

    def _sqrt_of(self, R: Elem) -> Elem:
        """``sqrt(R)`` as an element (principal root), creating the generator if new."""
        if not R.c:
            return self.zero
        if not R.is_plain():
            return self._nested_sqrt(R)
        num, den = R.c[0], R.d
        outer = None
        if self._alg_of and any(num.degrees()[j] > 0 for j in self._alg_of):
            # sqrt(r**2 Q) = r sqrt(Q): an algebraic generator is a principal root, so r >= 0
            tc = num.term_content().degrees()
            gens = self.ctx.gens()
            for al in self._alg_of.values():
                k2 = tc[al.index] // 2
                if k2:
                    num = num / gens[al.index] ** (2 * k2)
                    t = Elem(self, {0: gens[al.index] ** k2}, self.pone)
                    outer = t if outer is None else outer * t
            if outer is not None:
                rest = self._sqrt_of(self.make_reduced({0: num}, den))
                return outer * rest
        # canonical radicand: sqrt((cn pn)/(cd pd)) = (s/cd) sqrt(k pn / pd) with cn cd = s^2 k, so that
        # sqrt(Lambda/3) and sqrt(3 Lambda) share one generator
        cn, cd = _content(num), _content(den)
        s, k = _square_split(int(cn) * int(cd))
        num = (num / self.ctx.constant(cn)) * k
        den = den / self.ctx.constant(cd)
        factor = flint.fmpq(s, int(cd))
        if self._alg_inner:
            inner = self._alg_inner.get((str(num), str(den)))
            if inner is not None:  # the inner root of a nested one: (r**2 - A)/c
                return self.const(factor) * inner
        if num.is_constant() and den.is_constant():
            # a rational constant: exact when it is a square
            v = flint.fmpq(int(num.leading_coefficient()), int(den.leading_coefficient()))
            if v > 0 and v.p.isqrt() ** 2 == v.p and v.q.isqrt() ** 2 == v.q:
                return self.const(factor * flint.fmpq(v.p.isqrt(), v.q.isqrt()))
        key = (str(num), str(den))
        s = self._sqrt_by_key.get(key)
        if s is None:
            Rsym = self.poly_to_sympy(num) / self.poly_to_sympy(den)
            s = self._new_sqrt(num, den, sp.sqrt(Rsym))
            self._sqrt_by_key[key] = s
        return self.const(factor) * Elem(self, {1 << s.bit: self.pone}, self.pone)

    def _nested_sqrt(self, R: Elem) -> Elem:
        """``sqrt(R)`` for a radicand that uses square roots: a new root on top of them (a tower).

        The relation ``s**2 = R`` is applied; ``R`` being a square in the lower field would be a
        hidden relation, so such a field is never :attr:`complete`."""
        key = ("nested", tuple(sorted((m, str(p)) for m, p in R.c.items())), str(R.d))
        s = self._sqrt_by_key.get(key)
        if s is None:
            s = self._new_sqrt(None, R.d, sp.sqrt(self.to_sympy(R, factor=False)), radicand=R)
            self._sqrt_by_key[key] = s
        return Elem(self, {1 << s.bit: self.pone}, self.pone)

    def element(self, expr) -> Elem:
        """Convert a sympy expression (whose atoms were scanned) to an element."""
        expr = sp.sympify(expr)
        if self.relations is not None and expr.has(*_SIGNED):
            expr = settle_signs(expr, self.coords, self.relations)
        if self.relations is not None and expr.has(sp.LambertW):
            expr = simplify_lambertw(expr, self.coords, self.params, self.relations)
        if self.alias_sub:
            expr = expr.xreplace(self.alias_sub)
        expr = prepare(expr)
        return self._el(expr)

    # -- opaque sub-expressions ----------------------------------------------
    def alias_value(self, j: int) -> Elem:
        """The explicit value of alias generator number ``j`` (the derivative its index says)."""
        v = self._alias_vals.get(j)
        if v is None:
            g = self.base[j]
            alpha = g.data["alpha"]
            if not any(alpha):
                v = self._el(prepare(g.data["expr"]))
            else:
                k = next(i for i, e in enumerate(alpha) if e)
                lower = list(alpha)
                lower[k] -= 1
                h = self._gens[("func", g.data["func"], tuple(lower))]
                v = self.alias_value(h.index).diff(self.coord_index[g.data["args"][k]])
            self._alias_vals[j] = v
        return v

    def _alias_power(self, j: int, e: int) -> Elem:
        key = (j, e)
        v = self._alias_pows.get(key)
        if v is None:
            v = self.alias_value(j) if e == 1 else self._alias_power(j, e - 1) * self.alias_value(j)
            self._alias_pows[key] = v
        return v

    def uses_alias(self, a: Elem) -> bool:
        if not self.alias_index or not a.c:
            return False
        used, _bits = a._needs()
        return bool(used & self._alias_set)

    def _expand_poly(self, p) -> Elem:
        idx = self.alias_index
        groups: dict = {}
        for exps, c in p.terms():
            key = tuple(exps[j] for j in idx)
            rest = list(exps)
            for j in idx:
                rest[j] = 0
            groups.setdefault(key, {})[tuple(rest)] = c
        out = self.zero
        for key, terms in groups.items():
            t = Elem(self, {0: self.ctx.from_dict(terms)}, self.pone)
            for j, e in zip(idx, key, strict=True):
                if e:
                    t = t * self._alias_power(j, e)
            out = out + t
        return out

    def expand(self, a: Elem) -> Elem:
        """``a`` with every opaque generator replaced by its explicit value."""
        if not self.uses_alias(a):
            return a
        num = self.zero
        for m, p in a.c.items():
            t = self._expand_poly(p)
            if m:
                t = t * Elem(self, {m: self.pone}, self.pone)
            num = num + t
        if not num.c:
            return self.zero
        return num / self._expand_poly(a.d)

    def is_zero(self, a: Elem) -> bool:
        """Exact zero test (opaque generators are expanded first)."""
        if not a.c:
            return True
        if not self.uses_alias(a):
            return False
        return not self.expand(a).c

    def _el(self, e) -> Elem:
        r = self._memo.get(e)
        if r is not None:
            return r
        r = self._el_new(e)
        self._memo[e] = r
        return r

    def _g(self, key) -> Elem:
        g = self._gens.get(key)
        if g is None:
            raise Unsupported(f"expression outside this field: {key}")
        return self.gen_elem(g)

    def _el_new(self, e) -> Elem:
        if e.is_Rational:
            return self.const(e)
        if e.is_Symbol:
            if self._elim and e in self._elim:
                return self._elim[e]
            return self._g(("coord", e) if e in self.coord_index else ("param", e))
        if e is sp.pi or e is sp.E:
            return self._g(("const", e))
        if isinstance(e, sp.core.function.AppliedUndef):
            return self._g(("func", e.func, (0,) * len(e.args)))
        if isinstance(e, sp.Derivative):
            f = e.expr
            alpha = [0] * len(f.args)
            for v, n in e.variable_count:
                if v not in f.args:
                    return self.zero
                alpha[f.args.index(v)] += n
            return self._g(("func", f.func, tuple(alpha)))
        if isinstance(e, sp.Add):
            out = self.zero
            for a in e.args:
                out = out + self._el(a)
            return out
        if isinstance(e, sp.Mul):
            out = self.one
            for a in e.args:
                out = out * self._el(a)
            return out
        if isinstance(e, sp.Pow):
            b, x = e.args
            if x.is_Integer:
                return self._el(b) ** int(x)
            if x.is_Rational and x.q == 2:
                g = self._gens.get(("alg", b))
                if g is not None:
                    return self.gen_elem(g) ** int(x.p)
                if self._elim and b in self._alg_inner_sym:
                    return self._alg_inner_sym[b] ** int(x.p)
                return self._sqrt_of(self._el(b)) ** int(x.p)
            if x.is_Rational:
                split = self._root_split.get((b, x.q))
                if split is not None:
                    out = self.one
                    for key, e in split:
                        out = out * self._g(key) ** int(e * x.p)
                    return out
                return self._g(("pow", b, sp.Rational(1, x.q))) ** int(x.p)
            if b is sp.E:
                return self._el(sp.exp(x))
            c0, terms = _split_linear(x)
            out = self.one
            if c0 != 0:
                bb = self._el(b)
                out = bb ** int(c0.p // 1) if c0.q == 1 else self._sqrt_of(bb) ** int(c0.p)
            for c, m in terms:
                out = out * self._g(("pow", b, m / c.q)) ** int(c * c.q)
            return out
        if isinstance(e, sp.exp):
            c0, terms = _split_linear(e.args[0])
            out = self.one
            if c0 != 0:
                if not c0.is_Integer:
                    raise Unsupported(f"exp of a non-integer constant: {e}")
                out = self._g(("const", sp.E)) ** int(c0)
            for c, m in terms:
                g = self._gens.get(("exp", m))
                if g is None:
                    raise Unsupported(f"expression outside this field: {e}")
                out = out * self.gen_elem(g) ** int(c * g.data["q"])
            return out
        if isinstance(e, sp.log):
            return self._g(("log", e.args[0]))
        if isinstance(e, sp.LambertW) and _principal(e):
            return self._g(("lambertw", e.args[0]))
        if isinstance(e, (sp.sin, sp.cos)):
            w = e.args[0]
            c, m = sp.expand(w).as_coeff_Mul()
            if isinstance(m, sp.Add):
                c, m = sp.Integer(1), sp.expand(w)
            g = self._gens[("cos", m)]
            k = int(sp.Rational(c) * g.data["q"])  # multiple of the base angle
            C = self.gen_elem(g)
            S = Elem(self, {1 << g.data["sin"].bit: self.pone}, self.pone)
            sign = 1
            if k < 0:
                k = -k
                sign = -1
            if isinstance(e, sp.cos):
                return _cheb_T(self, C, k)
            return S * _cheb_U(self, C, k - 1) * sign if k else self.zero
        raise Unsupported(f"{type(e).__name__}: {e}")

    # -- derivatives ---------------------------------------------------------
    def dgen(self, j: int, i: int):
        """Derivative of base generator ``j`` along coordinate ``i`` (Elem or None)."""
        key = (j, i)
        if key in self._dgen:
            return self._dgen[key]
        g = self.base[j]
        x = self.coords[i]
        r = None
        if g.kind == "coord":
            r = self.one if g.sym == x else None
        elif g.kind in ("param", "const"):
            r = None
        elif g.kind in ("func", "alias"):
            args, alpha = g.data["args"], g.data["alpha"]
            if x in args:
                a = list(alpha)
                a[args.index(x)] += 1
                h = self._gens.get(("func", g.data["func"], tuple(a)))
                if h is None:
                    raise Unsupported(f"derivative order of {g.data['func'].__name__} beyond {g.data['top']}")
                r = self.gen_elem(h)
        elif g.kind == "exp":
            dw = self._el(g.data["arg"]).diff(i)
            r = None if dw.is_zero() else self.gen_elem(g) * dw
        elif g.kind == "pow":
            b = self._el(g.data["base"])
            db = b.diff(i)
            r = None if db.is_zero() else self.gen_elem(g) * self._el(g.data["exp"]) * db / b
        elif g.kind == "log":
            w = self._el(g.data["arg"])
            dw = w.diff(i)
            r = None if dw.is_zero() else dw / w
        elif g.kind == "root":
            # rho**q = P: d rho = rho dP / (q P)
            rg = self._root_of[j]
            dP = self.dpoly(rg.P, i)
            if dP.c:
                r = self.gen_elem(g) * dP / (Elem(self, {0: rg.P}, self.pone) * rg.q)
        elif g.kind == "alg":
            # implicit differentiation of F(r) = 0: dr = -(sum_k dF/dg_k dg_k) / (dF/dr)
            al = self._alg_of[j]
            P = al.poly
            terms = []
            for k, dk in enumerate(P.degrees()):
                if k == j or not dk:
                    continue
                rk = self.dgen(k, i)
                if rk is not None:
                    terms.append(self._poly_el(P.derivative(k)) * rk)
            if terms:
                Fx = self.sum(terms)
                if Fx.c:
                    r = -(Fx / self._poly_el(P.derivative(j)))
        elif g.kind == "lambertw":
            # W exp(W) = z: dW = W dz / (z (1 + W))
            z = self._el(g.data["arg"])
            dz = z.diff(i)
            if not dz.is_zero():
                W = self.gen_elem(g)
                r = W * dz / (z * (W + 1))
        elif g.kind == "cos":
            atom = g.data["atom"]
            if atom in self.coord_index:
                dw = self.const(flint.fmpq(1, g.data["q"])) if atom == x else self.zero
            else:
                dw = self._el(g.data["angle"]).diff(i)
            if not dw.is_zero():
                S = Elem(self, {1 << g.data["sin"].bit: self.pone}, self.pone)
                r = -(S * dw)
        if r is not None and r.is_zero():
            r = None
        self._dgen[key] = r
        return r

    def dlogsqrt(self, k: int, i: int):
        """``d s_k / s_k`` along coordinate ``i``: ``dR / (2 R)`` (Elem or None)."""
        key = (k, i)
        if key in self._dlogsqrt:
            return self._dlogsqrt[key]
        s = self.sqrts[k]
        if s.coord is not None:
            # s is the eliminated variable itself: ds/s = dv/v = s/R along v, 0 along the others
            v = self.base[s.coord]
            r = Elem(self, {1 << s.bit: self.pone}, self.pone) / s.radicand if v.sym == self.coords[i] else None
        elif s.trig is not None:
            # s = sin(w), c = cos(w): ds/s = c dw / s = -c dc / s^2 = -c dc / (1 - c^2)
            C = self.gen_elem(s.trig)
            dc = self.dgen(s.trig.index, i)
            r = None if dc is None else -(C * dc) / s.radicand
        else:
            dR = s.radicand.diff(i)
            r = None if dR.is_zero() else dR / (s.radicand * 2)
        self._dlogsqrt[key] = r
        return r

    def dpoly(self, p, i: int) -> Elem:
        """Derivative of a base polynomial along coordinate ``i``."""
        degs = p.degrees()
        acc_poly = None
        acc = None
        for j, dj in enumerate(degs):
            if not dj:
                continue
            r = self.dgen(j, i)
            if r is None:
                continue
            pj = p.derivative(j)
            if r.is_plain() and r.d.is_one():
                t = pj * r.c[0]
                acc_poly = t if acc_poly is None else acc_poly + t
            else:
                t = Elem(self, {0: pj}, self.pone) * r
                acc = t if acc is None else acc + t
        out = self.zero
        if acc_poly is not None and not acc_poly.is_zero():
            out = (
                Elem(self, {0: acc_poly}, self.pone)
                if not (self.algs or self.roots)
                else self.make({0: acc_poly}, self.pone)
            )
        if acc is not None:
            out = out + acc
        return out

    def diff(self, a: Elem, i: int) -> Elem:
        if not a.c:
            return self.zero
        self.tick()
        # d(N/d) = dN/d - N dd/d^2, N = sum c_m s^m
        dn = self.zero
        for m, p in a.c.items():
            sm = Elem(self, {m: self.pone}, self.pone)
            term = self.dpoly(p, i)
            if m:
                lg = self.zero
                k = 0
                mm = m
                while mm:
                    if mm & 1:
                        r = self.dlogsqrt(k, i)
                        if r is not None:
                            lg = lg + r
                    mm >>= 1
                    k += 1
                if not lg.is_zero():
                    term = term + Elem(self, {0: p}, self.pone) * lg
                term = term * sm
            dn = dn + term
        if a.d.is_constant():
            return dn / Elem(self, {0: a.d}, self.pone) if not a.d.is_one() else dn
        dd = self.dpoly(a.d, i)
        if dd.is_zero():
            return dn * Elem(self, {0: self.pone}, a.d)
        if a.is_plain() and dn.is_plain() and dd.is_plain() and dn.d.is_one() and dd.d.is_one():
            n = a.c[0]
            num = dn.num0() * a.d - n * dd.num0()
            return self.make({0: num}, a.d * a.d)
        inv_d = Elem(self, {0: self.pone}, a.d)
        return dn * inv_d - Elem(self, dict(a.c), self.pone) * dd * inv_d * inv_d

    # -- conversions ---------------------------------------------------------
    def to_q(self, p):
        return flint.fmpq_mpoly(p, self.qctx)

    def eval_arb(self, p, base):
        if p.is_constant():
            return flint.arb(p.leading_coefficient()) if not p.is_zero() else flint.arb(0)
        total = flint.arb(0)
        pows: dict = {}
        for exps, coeff in p.terms():
            t = flint.arb(coeff)
            for j, e in enumerate(exps):
                if e:
                    key = (j, e)
                    v = pows.get(key)
                    if v is None:
                        v = pows[key] = base[j] ** e
                    t = t * v
            total += t
        return total

    def gen_sym(self, j: int, opaque: bool = False):
        """sympy form of base generator ``j``: an opaque one as its explicit expression (its
        derivatives evaluated), or with ``opaque`` as its placeholder function (``X1(t, x)``,
        ``Derivative(X1(t, x), x)``; :attr:`alias_sub` maps each expression to its placeholder)."""
        g = self.base[j]
        if g.kind != "alias" or opaque:
            return g.sym
        cache = self.__dict__.setdefault("_gen_sym_cache", {})
        key = (j, opaque)
        v = cache.get(key)
        if v is None:
            alpha, args = g.data["alpha"], g.data["args"]
            spec = [(args[k], e) for k, e in enumerate(alpha) if e]
            X = g.data["expr"]
            if not spec:
                v = X
            elif opaque:
                v = sp.Derivative(X, *spec, evaluate=False)
            else:
                v = sp.diff(X, *spec)
            cache[key] = v
        return v

    def gen_syms(self, opaque: bool = False):
        return [self.gen_sym(j, opaque) for j in range(len(self.base))]

    def poly_to_sympy(self, p, opaque: bool = False):
        terms = []
        for exps, coeff in p.terms():
            t = sp.Integer(int(coeff))
            for j, e in enumerate(exps):
                if e:
                    t = t * self.gen_sym(j, opaque) ** e
            terms.append(t)
        return sp.Add(*terms)

    def _factored(self, p, opaque: bool = False):
        if p.is_constant():
            return sp.Integer(int(p.leading_coefficient()))
        c, facs = p.factor()
        out = sp.Integer(int(c))
        facs = [[f, e] for f, e in facs]
        # (cos w - 1)(cos w + 1) = -sin(w)**2
        for g in self.base:
            if g.kind != "cos":
                continue
            C = self.ctx.gens()[g.index]
            lo = next((fe for fe in facs if fe[0] == C - 1), None)
            hi = next((fe for fe in facs if fe[0] == C + 1), None)
            if lo is not None and hi is not None:
                m = min(lo[1], hi[1])
                out = out * (-1) ** m * g.data["sin"].sym ** (2 * m)
                lo[1] -= m
                hi[1] -= m
        facs = [(f, e) for f, e in facs if e]
        for f, e in facs:
            out = out * self.poly_to_sympy(f, opaque) ** e
        return out

    def to_sympy(self, a: Elem, factor: bool = True, opaque: bool = False):
        """The element as a sympy expression in the chart's own symbols (see :meth:`gen_sym`).

        With an eliminated variable (see :meth:`_eliminate`) a value that is free of the nested root
        (Kerr's Kretschmann scalar in Kerr-Schild coordinates) is shown as a rational function of
        the chart's own symbols; otherwise the root appears as its explicit expression."""
        if not a.c:
            return sp.Integer(0)
        if self._elim:
            alt = self._root_free(a)
            if alt is not None:
                a = alt
        conv = self._factored if factor else self.poly_to_sympy
        num = sp.Integer(0)
        for m, p in a.c.items():
            t = conv(p, opaque)
            k = 0
            mm = m
            while mm:
                if mm & 1:
                    t = t * self.sqrts[k].sym
                mm >>= 1
                k += 1
            num = num + t
        return num / conv(a.d, opaque)

    # -- points --------------------------------------------------------------
    def point(self, values: dict, angles: dict | None = None) -> Point:
        """Generator values at a point.

        ``values``: sympy symbol (coordinate, parameter) or function generator
        key ``(func, alpha)`` -> rational (Fraction / fmpq / int), or an
        ``arb`` for a coordinate whose value is not rational (an angle that
        also occurs outside trigonometric functions). ``angles``: angle atom ->
        rational ``u = tan(angle/2)``: exact cos and sin of that angle. The
        remaining generators (pi, exp, log, other angles, square roots of
        non-squares) get interval values; an element that needs none of them
        still evaluates exactly. A negative radicand raises ValueError.
        """
        angles = angles or {}
        nb, ns = len(self.base), len(self.sqrts)
        ex: list = [None] * nb
        sq: list = [None] * ns

        def q(v):
            if isinstance(v, Fraction):
                return flint.fmpq(v.numerator, v.denominator)
            if isinstance(v, sp.Rational):
                return flint.fmpq(int(v.p), int(v.q))
            if isinstance(v, (flint.fmpq, flint.arb)):
                return v
            return flint.fmpq(v)

        with arb_precision():
            ab: list = [None] * nb
            asq: list = [None] * ns
            pending = []
            for g in self.base:
                v = None
                if g.kind in ("coord", "param"):
                    if g.sym not in values:
                        raise KeyError(f"no value for {g.sym}")
                    v = q(values[g.sym])
                elif g.kind == "func":
                    v = q(values[(g.data["func"], g.data["alpha"])])
                elif g.kind == "cos" and g.data["atom"] in angles:
                    u = q(angles[g.data["atom"]])
                    v = (1 - u * u) / (1 + u * u)
                    s = 2 * u / (1 + u * u)
                    sq[g.data["sin"].bit] = s
                    asq[g.data["sin"].bit] = flint.arb(s)
                else:
                    pending.append(g)
                    continue
                if isinstance(v, flint.fmpq):
                    ex[g.index] = v
                ab[g.index] = flint.arb(v)
            pt = Point(ex, sq, ab, asq)
            pend = {g.index: g for g in pending}

            def ensure(el):
                used, bits = el._needs()
                for j in used:
                    ensure_base(j)
                i = 0
                while bits:
                    if bits & 1:
                        ensure_sqrt(i)
                    bits >>= 1
                    i += 1

            def ensure_base(j):
                if ab[j] is not None:
                    return
                g = pend[j]
                if g.kind == "const":
                    val = flint.arb.pi() if g.sym is sp.pi else flint.arb(1).exp()
                elif g.kind == "alias":
                    w = self.alias_value(j)
                    ensure(w)
                    val = w.evaluate(pt)
                    if isinstance(val, flint.fmpq):
                        ex[j] = val
                        pt._vals = None
                    val = flint.arb(val)
                elif g.kind == "alg":
                    # r = sqrt(A + c sqrt(B)) from its explicit expression (exact when both are squares)
                    al = self._alg_of[j]
                    for part in (al.A, al.c, al.B):
                        ensure(part)
                    vB = al.B.evaluate(pt)
                    sB = _sqrt_value(vB)
                    val = _sqrt_value(al.A.evaluate(pt) + al.c.evaluate(pt) * sB)
                    if isinstance(val, flint.fmpq):
                        ex[j] = val
                        pt._vals = None
                    val = flint.arb(val)
                elif g.kind == "root":
                    rg = self._root_of[j]
                    Pel = Elem(self, {0: rg.P}, self.pone)
                    ensure(Pel)
                    val = _root_value(Pel.evaluate(pt), rg.q)
                    if isinstance(val, flint.fmpq):
                        ex[j] = val
                        pt._vals = None
                    val = flint.arb(val)
                elif g.kind == "lambertw":
                    w = self._el(g.data["arg"])
                    ensure(w)
                    val = flint.arb(w.evaluate(pt)).lambertw()
                    if not val.is_finite():
                        raise ValueError("LambertW of an argument below -1/e")
                elif g.kind in ("exp", "log"):
                    w = self._el(g.data["arg"])
                    ensure(w)
                    w = flint.arb(w.evaluate(pt))
                    val = w.exp() if g.kind == "exp" else w.log()
                elif g.kind == "pow":
                    b, e = self._el(g.data["base"]), self._el(g.data["exp"])
                    ensure(b)
                    ensure(e)
                    val = (flint.arb(b.evaluate(pt)).log() * e.evaluate(pt)).exp()
                else:  # cos of a general angle
                    w = self._el(g.data["angle"])
                    ensure(w)
                    w = flint.arb(w.evaluate(pt))
                    val = w.cos()
                    asq[g.data["sin"].bit] = w.sin()
                ab[j] = val

            def ensure_sqrt(i):
                if asq[i] is not None:
                    return
                s = self.sqrts[i]
                if s.trig is not None:
                    ensure_base(s.trig.index)
                    return
                if s.coord is not None:  # the eliminated coordinate or parameter: its own value
                    sq[i] = ex[s.coord]
                    asq[i] = ab[s.coord]
                    return
                ensure(s.radicand)
                rv = s.radicand.evaluate(pt)
                if isinstance(rv, flint.fmpq):
                    if rv < 0:
                        raise ValueError("negative radicand")
                    if rv.p.isqrt() ** 2 == rv.p and rv.q.isqrt() ** 2 == rv.q:
                        sq[i] = flint.fmpq(rv.p.isqrt(), rv.q.isqrt())
                        asq[i] = flint.arb(sq[i])
                        return
                    rv = flint.arb(rv)
                if rv < 0:
                    raise ValueError("negative radicand")
                if rv.contains(0):
                    raise ValueError("radicand too close to zero")
                asq[i] = rv.sqrt()

            for g in pending:
                if g.kind != "alias":  # opaque generators (and their derivatives) on first use only
                    ensure_base(g.index)
            for i in range(len(self.sqrts)):
                ensure_sqrt(i)
        pt.fill = ensure_base
        return pt


def _sqrt_value(v):
    """Principal square root of an ``fmpq`` (exact when it is a square) or of an ``arb``."""
    if isinstance(v, flint.fmpq):
        if v < 0:
            raise ValueError("negative radicand")
        if v.p.isqrt() ** 2 == v.p and v.q.isqrt() ** 2 == v.q:
            return flint.fmpq(v.p.isqrt(), v.q.isqrt())
        v = flint.arb(v)
    if v < 0:
        raise ValueError("negative radicand")
    if v.contains(0):
        raise ValueError("radicand too close to zero")
    return v.sqrt()


def _root_value(v, q):
    """Real ``q``-th root of a positive ``fmpq`` (exact when it is a ``q``-th power) or ``arb``; a
    base that is not positive is outside the chart's real domain (ValueError)."""
    if isinstance(v, flint.fmpq):
        if v <= 0:
            raise ValueError("a root of a base that is not positive")
        a, ea = sp.integer_nthroot(int(v.p), q)
        b, eb = sp.integer_nthroot(int(v.q), q)
        if ea and eb:
            return flint.fmpq(a, b)
        v = flint.arb(v)
    if not v > 0:
        raise ValueError("a root of a base not separated from zero")
    return v.root(q)


def _content(p):
    c = flint.fmpz(0)
    for x in p.coeffs():
        c = flint.fmpz(math.gcd(int(c), int(x)))
        if c == 1:
            break
    return abs(c)


def _square_split(c):
    """``c = s**2 * r`` with ``s`` the product of small square factors (trial division)."""
    c = int(c)
    s = 1
    if c == 0:
        return 1, 0
    for p in (2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47):
        while c % (p * p) == 0:
            c //= p * p
            s *= p
    r = math.isqrt(c)
    if r * r == c:
        s *= r
        c = 1
    return s, c


def _cheb_T(F, C, k):
    if k == 0:
        return F.one
    t0, t1 = F.one, C
    for _ in range(k - 1):
        t0, t1 = t1, C * t1 * 2 - t0
    return t1


def _cheb_U(F, C, k):
    if k < 0:
        return F.zero
    if k == 0:
        return F.one
    u0, u1 = F.one, C * 2
    for _ in range(k - 1):
        u0, u1 = u1, C * u1 * 2 - u0
    return u1
