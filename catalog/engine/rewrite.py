"""The sympy side before conversion to the exact field (see :mod:`gravicat.engine.ratfun`).

Hyperbolic and reciprocal trigonometric functions rewritten (:func:`prepare`), signs the region
decides settled (:func:`settle_signs`, :func:`unsettled`), ``W(u exp(u)) = u`` where it holds
(:func:`simplify_lambertw`), and the opaque sub-expressions carried as functions
(:func:`find_aliases`).
"""

from __future__ import annotations

import sympy as sp

from gravicat.engine.generators import (
    Unsupported,
)

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


def merge_powers(expr, coords, relations):
    """Powers the region lets us write one way, so equal values meet as one generator.

    * ``(c**k)**x -> c**(k x)`` for rational ``k`` and non-integer rational ``x`` where ``c > 0`` on
      the region (the rule holds for every real ``k``, ``x`` only then): ``(r**(3/2))**(2/3) = r`` and
      ``sqrt(1/r) = r**(-1/2)`` for ``r > 0``;
    * ``b**x`` with a symbolic exponent and a base that is a rational function of the coordinates
      and parameters: the base is brought to one canonical quotient (:func:`sympy.cancel`), so
      ``((x - 1)/(x + 1))**delta`` and the same base written with another denominator are the
      same generator. Nothing else is changed."""
    expr = sp.sympify(expr)
    if relations is None:
        return expr
    # one cheap look first: most expressions hold no power these rules touch
    pows = [p for p in expr.atoms(sp.Pow) if not p.exp.is_Integer]
    if not any((p.exp.is_Rational and isinstance(p.base, sp.Pow) and p.base.exp.is_Rational)
               or not p.exp.is_Number for p in pows):
        return expr
    sub = _positive_parametrisation(tuple(coords), relations)
    symbols = set(coords)

    def nested(e):
        # rational exponents only: b**(delta/2) and b**delta would be unrelated generators, while
        # (b**delta)**(1/2) is the square root of one element
        return (isinstance(e, sp.Pow) and e.exp.is_Rational and not e.exp.is_Integer
                and isinstance(e.base, sp.Pow) and e.base.exp.is_Rational
                and _sign_on(e.base.base, sub) == 1)

    def merge(e):
        return sp.Pow(e.base.base, e.base.exp * e.exp)

    for _ in range(4):  # a few levels of nesting; each pass removes one
        if not expr.has(sp.Pow) or not any(nested(a) for a in sp.preorder_traversal(expr)):
            break
        expr = expr.replace(nested, merge)

    def symbolic(e):
        if not isinstance(e, sp.Pow) or e.exp.is_Rational or e.exp.is_Number or e.base is sp.E:
            return False
        b = e.base
        if not (b.free_symbols & symbols) or b.has(sp.Function, sp.Derivative):
            return False
        return b.is_rational_function(*sorted(b.free_symbols, key=str)) and sp.cancel(b) != b

    if any(symbolic(a) for a in sp.preorder_traversal(expr)):
        expr = expr.replace(symbolic, lambda e: sp.Pow(sp.cancel(e.base), e.exp))
    return expr


def unsettled(expr) -> list:
    """The distributional or sign-dependent sub-expressions (``DiracDelta``, ``Heaviside``, ``sign``,
    ``Abs``) left in ``expr``, as text: a value containing one is no result."""
    expr = sp.sympify(expr)
    return sorted({sp.sstr(a) for a in expr.atoms(*_SIGNED)}, key=len)


def simplify_lambertw(expr, coords, params, relations):
    """Replace ``W(u exp(u))`` by ``u`` where that holds: the identity ``W(z) = u`` is checked exactly
    (``z = u exp(u)`` in a field of its own) and the branch condition ``u >= -1`` of the principal
    branch is shown on the region (:func:`_nonnegative_on` of ``u + 1``); otherwise ``W`` stays."""
    from gravicat.engine.ratfun import Field  # the field is built on this module: import at call time


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
