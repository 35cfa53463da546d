"""The sign of an expression on a chart's whole domain and parameter ranges, proved by sign analysis.

Used to prove energy conditions (``rho >= 0``, ``rho + p_i >= 0``...) where an inequality can be
proved, instead of only sampling it. The method is elementary and sound (a sign it returns holds on
the whole region; when it cannot show one it returns None):

1. every variable is written through positive (or non-negative) new variables from the region's
   relations: a coordinate or parameter with a lower bound ``v > b`` becomes ``b + w``, an upper
   bound ``v < c`` gives ``c - w``, both give ``b + (c - b) w/(1 + w)``, with ``w > 0`` (``>= 0`` for a
   closed bound), substitutions chained, never in a cycle; a parameter declared positive stays a
   positive symbol;
2. ``cos(x)`` and ``sin(x)`` of a coordinate become the half-angle forms ``(1 - t^2)/(1 + t^2)`` and
   ``2 t/(1 + t^2)`` (``t > 0`` when ``0 < x < pi`` on the domain, else any real ``t``); a cosine or
   sine of another argument is a value in ``[-1, 1]``; ``exp(...)`` is a positive variable; a square
   root is a non-negative variable ``s`` with ``s^2`` reduced to its radicand; an odd root is
   positive when its radicand is, else any real; arbitrary functions and anything else are real
   variables of unknown sign;
3. numerator and denominator are factored; each factor is settled when it is an even power, or a
   polynomial whose monomials all have one sign (coefficients of one sign, variables of unknown
   sign only in even powers) - a sum of positive monomials in positive variables is positive.

Replacing a relation between variables by independent variables only enlarges the region, so a
sign shown for the result holds on the region (it may fail to show one that holds: then None). The
new variables reach every point of the region but a few ends (the upper end of a closed range, a
cosine of -1); the quantities analysed are continuous where the metric is smooth, so a non-strict
sign (``nonnegative``, ``nonpositive``) holds there too; a strict one is shown off those ends.

Room: physics (sympy only).
"""

from __future__ import annotations

__all__ = ["sign_on_region", "region_relations", "SIGNS"]

SIGNS = ("positive", "nonnegative", "zero", "nonpositive", "negative")

_MAX_OPS = 4000  # larger expressions are not analysed (factoring them could take long)
_MAX_FACTOR_OPS = 400  # nor a factor this large once the region's variables are substituted


def region_relations(spec) -> tuple:
    """The relations that bound a chart's points: the parameter ranges, then the domain."""
    return tuple(spec.param_ranges) + tuple(spec.domain)


def _bounds(variables, relations):
    """variable -> ([(lower bound, closed)], [(upper bound, closed)]) from relations ``v op b``."""
    import sympy as sp

    out = {v: ([], []) for v in variables}
    for rel in relations:
        if rel is sp.true or rel is sp.false or not isinstance(rel, sp.core.relational.Relational):
            continue
        op = rel.rel_op
        if op not in (">", ">=", "<", "<="):
            continue
        closed = op in (">=", "<=")
        for side, other, lower in ((rel.lhs, rel.rhs, op in (">", ">=")), (rel.rhs, rel.lhs, op in ("<", "<="))):
            if side in out and side not in other.free_symbols:
                out[side][0 if lower else 1].append((other, closed))
    return out


def _parametrise(variables, relations):
    """Variable -> expression in new positive/non-negative dummies (see the module docstring)."""
    import sympy as sp

    bounds = _bounds(variables, relations)
    sub: dict = {}

    def closure(syms):
        seen, todo = set(), list(syms)
        while todo:
            x = todo.pop()
            if x in seen:
                continue
            seen.add(x)
            if x in sub:
                todo.extend(sub[x].free_symbols)
        return seen

    for v in variables:
        lows, highs = bounds[v]
        lows = [(b, c) for b, c in lows if v not in closure(b.free_symbols)]
        if not lows and not highs:
            continue
        highs = [(b, c) for b, c in highs if v not in closure(b.free_symbols)]
        # prefer bounds that are numbers or use parameters only (simplest first)
        lows.sort(key=lambda bc: sp.count_ops(bc[0]))
        highs.sort(key=lambda bc: sp.count_ops(bc[0]))
        if lows and highs:
            (lo, c1), (hi, _c2) = lows[0], highs[0]
            w = sp.Dummy("w", nonnegative=True) if c1 else sp.Dummy("w", positive=True)
            sub[v] = lo + (hi - lo) * w / (1 + w)  # [lo, hi) or (lo, hi): hi by continuity
        elif lows:
            lo, c = lows[0]
            sub[v] = lo + (sp.Dummy("w", nonnegative=True) if c else sp.Dummy("w", positive=True))
        else:
            hi, c = highs[0]
            sub[v] = hi - (sp.Dummy("w", nonnegative=True) if c else sp.Dummy("w", positive=True))
    return sub


class _Analyser:
    def __init__(self, coords, params, relations):
        import sympy as sp

        self.sp = sp
        self.coords = tuple(coords)
        self.params = tuple(params)
        self.relations = tuple(relations)
        self.atoms: dict = {}  # replaced sub-expression -> dummy
        self.roots: dict = {}  # square-root dummy -> radicand (already substituted)
        self.angles = self._angles()

    def _angles(self):
        """Coordinates with ``0 < x < pi`` (or a narrower interval inside it) on the domain."""
        sp = self.sp
        bnd = _bounds(self.coords, self.relations)
        out = set()
        for x, (lows, highs) in bnd.items():
            lo_ok = any(b.is_number and bool(b >= 0) for b, _ in lows)
            hi_ok = any(b.is_number and bool(b <= sp.pi) for b, _ in highs)
            if lo_ok and hi_ok:
                out.add(x)
        return out

    # -- step 2: atoms --------------------------------------------------------
    def _dummy(self, key, **assume):
        d = self.atoms.get(key)
        if d is None:
            d = self.atoms[key] = self.sp.Dummy("z", **assume)
        return d

    def replace_atoms(self, expr):
        sp = self.sp
        expr = sp.sympify(expr)
        # trigonometric functions of a bare coordinate: half-angle variable
        reps = {}
        for f in expr.atoms(sp.cos, sp.sin, sp.tan, sp.cot, sp.sec, sp.csc):
            x = f.args[0]
            if x in self.coords:
                t = self._dummy(("half", x), positive=True) if x in self.angles else self._dummy(("half", x), real=True)
                c, s = (1 - t**2) / (1 + t**2), 2 * t / (1 + t**2)
                reps[f] = {sp.cos: c, sp.sin: s, sp.tan: s / c, sp.cot: c / s, sp.sec: 1 / c, sp.csc: 1 / s}[f.func]
            elif isinstance(f, (sp.cos, sp.sin)):
                t = self._dummy(("bounded", f), real=True)
                reps[f] = (1 - t**2) / (1 + t**2)  # a value in (-1, 1]: -1 by continuity
        if reps:
            expr = expr.xreplace(reps)
        return expr

    def other_atoms(self, expr, depth=0):
        """exp, roots, functions and anything non-polynomial -> dummies with the signs they have."""
        sp = self.sp
        reps = {}
        for e in sorted(expr.atoms(sp.Function, sp.Derivative), key=sp.count_ops, reverse=True):
            if isinstance(e, sp.exp):
                reps[e] = self._dummy(("exp", e), positive=True)
            else:
                reps[e] = self._dummy(("f", e), real=True)
        if reps:
            expr = expr.xreplace(reps)
        for p in sorted(expr.atoms(sp.Pow), key=sp.count_ops, reverse=True):
            if p not in expr.atoms(sp.Pow):
                continue
            ex = p.exp
            if ex.is_Integer:
                continue
            if ex.is_Rational:
                base = p.base
                q = ex.q
                if q == 2:
                    s = self.atoms.get(("sqrt", base))
                    if s is None:
                        s = self.atoms[("sqrt", base)] = sp.Dummy("s", nonnegative=True)
                        self.roots[s] = base
                    expr = expr.xreplace({p: s ** ex.p})
                    continue
                sign = self.sign(base, depth + 1) if depth < 2 else None
                assume = {"positive": True} if sign == "positive" else {"real": True}
                d = self._dummy(("root", p), **assume)
                expr = expr.xreplace({p: d})
            else:
                sign = self.sign(p.base, depth + 1) if depth < 2 else None
                d = self._dummy(("pow", p), positive=True) if sign == "positive" else self._dummy(("pow", p), real=True)
                expr = expr.xreplace({p: d})
        return expr

    # -- step 3: signs --------------------------------------------------------
    def _reduce_roots(self, poly_expr):
        """Replace s^k by radicand^(k//2) s^(k%2) for each square-root dummy s."""
        sp = self.sp
        if not self.roots:
            return poly_expr
        out = sp.expand(poly_expr)
        for _ in range(3):
            changed = False
            for s, rad in self.roots.items():
                if out.has(s):
                    def power(e, s=s):
                        return isinstance(e, sp.Pow) and e.base == s and e.exp.is_Integer and e.exp >= 2

                    new = sp.expand(out.replace(power, lambda e, s=s, rad=rad: rad ** (e.exp // 2) * s ** (e.exp % 2)))
                    if new != out:
                        out, changed = new, True
            if not changed:
                break
        return out

    def _var_kind(self, x):
        if x.is_positive:
            return "pos"
        if x.is_nonnegative:
            return "nonneg"
        return "real"

    def _poly_sign(self, f):
        """'positive' | 'nonnegative' | 'negative' | 'nonpositive' | 'zero' | None for a polynomial f."""
        sp = self.sp
        f = sp.expand(f)
        if f == 0:
            return "zero"
        if f.is_number:
            if f.is_positive:
                return "positive"
            if f.is_negative:
                return "negative"
            return None
        syms = sorted(f.free_symbols, key=str)
        kinds = {x: self._var_kind(x) for x in syms}
        try:
            P = sp.Poly(f, *syms)
        except sp.PolynomialError:
            return None
        signs = set()
        strict = False
        for monom, coeff in P.terms():
            if not coeff.is_number:
                return None
            if coeff.is_positive:
                s = 1
            elif coeff.is_negative:
                s = -1
            else:
                return None
            all_pos = True
            for x, k in zip(syms, monom, strict=True):
                if not k:
                    continue
                if kinds[x] == "real":
                    if k % 2:
                        return None
                    all_pos = False
                elif kinds[x] == "nonneg":
                    all_pos = False
            signs.add(s)
            strict = strict or all_pos
        if len(signs) != 1:
            return None
        s = signs.pop()
        if s > 0:
            return "positive" if strict else "nonnegative"
        return "negative" if strict else "nonpositive"

    def _product_sign(self, expr, denominator: bool):
        """(sign, strict) of a polynomial from its factors, or None. An even power is >= 0; in a
        denominator, where the value is finite, it is > 0."""
        sp = self.sp
        if expr == 0:
            return 0, True
        try:
            coeff, factors = sp.factor_list(expr)
        except (sp.PolynomialError, NotImplementedError):
            coeff, factors = sp.Integer(1), [(expr, 1)]
        total = self._poly_sign(coeff)
        if total not in ("positive", "negative"):
            return None
        sign, strict = (1 if total == "positive" else -1), True
        for f, k in factors:
            if k % 2 == 0:  # >= 0; > 0 where the base has a strict sign (or in a denominator)
                strict = strict and (denominator or self._poly_sign(f) in ("positive", "negative"))
                continue
            s = self._poly_sign(f)
            if s is None:
                return None
            if s == "zero":
                return 0, True
            if s in ("negative", "nonpositive"):
                sign = -sign
            if s in ("nonnegative", "nonpositive") and not denominator:
                strict = False
        return sign, strict

    def sign(self, expr, depth=0):
        sp = self.sp
        expr = sp.sympify(expr)
        if expr == 0:
            return "zero"
        expr = sp.together(self.other_atoms(expr, depth))
        num, den = sp.fraction(expr)
        parts = []
        for piece, is_den in ((num, False), (den, True)):
            piece = sp.together(self._reduce_roots(piece))
            top, bottom = sp.fraction(piece)
            parts += [(top, is_den), (bottom, not is_den)]
        sign, strict = 1, True
        for piece, is_den in parts:
            got = self._product_sign(piece, is_den)
            if got is None:
                return None
            s, st = got
            if s == 0:
                if is_den:
                    return None
                return "zero"
            if is_den and not st:
                return None
            sign *= s
            strict = strict and st
        if sign > 0:
            return "positive" if strict else "nonnegative"
        return "negative" if strict else "nonpositive"


def _chain(expr, sub):
    for _ in range(len(sub) + 1):
        new = expr.xreplace(sub)
        if new == expr:
            break
        expr = new
    return expr


def sign_on_region(expr, coords, params, relations) -> str | None:
    """The sign of ``expr`` (sympy) at every point of the region the ``relations`` cut out of the
    coordinates and parameters: one of :data:`SIGNS`, or None when the analysis cannot show one
    (see the module docstring).

    The expression is factored in the chart's own variables first; each factor of odd power is then
    settled on its own (first with the variables' own assumptions, then through the parametrisation
    of the region), so the substitutions never expand the whole expression."""
    import sympy as sp

    expr = sp.sympify(expr)
    if expr == 0:
        return "zero"
    if sp.count_ops(expr) > _MAX_OPS:
        return None
    variables = tuple(coords) + tuple(params)
    try:
        an = _Analyser(coords, params, relations)
        expr = sp.together(an.replace_atoms(expr))
        sub = _parametrise(variables, relations)
        sign, strict = 1, True
        num, den = sp.fraction(expr)
        for piece, is_den in ((num, False), (den, True)):
            if sp.count_ops(piece) > _MAX_OPS:
                return None
            coeff, factors = sp.factor_list(piece)
            for f, k in [(coeff, 1), *factors]:
                if k % 2 == 0:
                    strict = strict and (is_den or an.sign(f) in ("positive", "negative"))
                    continue
                s = an.sign(f)
                if s is None and sub:
                    g = _chain(f, sub)
                    s = an.sign(g) if sp.count_ops(g) <= _MAX_FACTOR_OPS else None
                if s is None:
                    return None
                if s == "zero":
                    return None if is_den else "zero"
                if s in ("negative", "nonpositive"):
                    sign = -sign
                if s in ("nonnegative", "nonpositive"):
                    if is_den:
                        return None
                    strict = False
    except (TypeError, ValueError, RecursionError, sp.PolynomialError, NotImplementedError):
        return None
    if sign > 0:
        return "positive" if strict else "nonnegative"
    return "negative" if strict else "nonpositive"
