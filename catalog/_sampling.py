"""Random rational points of a chart's domain and parameter ranges.

Rejection sampling from boxes read off the inequalities: a relation of the
form ``v > expr`` or ``expr < v`` whose right side only involves variables
already drawn gives a bound for ``v``; parameters are drawn first (in their
declared order, so ``0 <= a < M`` sees ``M``), then coordinates; every
relation is finally checked on the whole point in 50-digit arithmetic.
Angles that occur inside trigonometric functions are drawn through the
rational parameter ``u = tan(angle/2)`` so their sine and cosine are exact
rationals. The generator is a seeded :class:`random.Random`.
"""

from __future__ import annotations

import math
import random
from dataclasses import dataclass, field
from fractions import Fraction

import mpmath
import sympy as sp

DIGITS = 50


@dataclass
class Sample:
    values: dict  # symbol -> Fraction (parameters, coordinates not drawn as angles)
    angles: dict  # angle atom (a coordinate) -> (u, q): coordinate = 2*q*atan(u)
    numeric: dict  # symbol -> mpmath number (every coordinate and parameter)
    shown: dict = field(default_factory=dict)  # name -> exact value as a string
    funcs: dict = field(default_factory=dict)  # (func, alpha) -> Fraction


def _fraction(x: float, rng: random.Random, lo=None, hi=None) -> Fraction:
    """A rational with a small denominator near ``x``, strictly inside (lo, hi) when given."""
    den = rng.choice((3, 4, 5, 7, 8, 9, 11, 13, 16, 17, 19, 23))
    while True:
        q = Fraction(x).limit_denominator(den)
        if (lo is None or q > lo) and (hi is None or q < hi) or den > 10**12:
            return q
        den *= 10


_MP_FUNCS = {
    "exp": "exp",
    "log": "log",
    "sin": "sin",
    "cos": "cos",
    "tan": "tan",
    "sinh": "sinh",
    "cosh": "cosh",
    "tanh": "tanh",
    "asin": "asin",
    "acos": "acos",
    "atan": "atan",
    "Abs": "fabs",
    "LambertW": "lambertw",
}


def mp_function(syms, expr):
    """``f(*values)`` evaluating ``expr`` in mpmath at the current precision.

    A direct tree walk (much cheaper to build than ``sympy.lambdify``, which prints and compiles
    source); expressions it does not know fall back to lambdify."""
    index = {s: i for i, s in enumerate(syms)}

    def build(e):
        if e.is_Symbol:
            i = index[e]
            return lambda a: a[i]
        if e.is_Integer:
            v = int(e)
            return lambda a: v
        if e.is_Rational:
            p, q = int(e.p), int(e.q)
            return lambda a: mpmath.mpf(p) / q
        if e is sp.pi:
            return lambda a: +mpmath.pi
        if e is sp.E:
            return lambda a: +mpmath.e
        if e.is_Add or e.is_Mul:
            first, *rest = [build(x) for x in e.args]
            add = e.is_Add

            def combine(a):
                v = mpmath.mpf(first(a))
                for f in rest:
                    v = v + f(a) if add else v * f(a)
                return v

            return combine
        if e.is_Pow:
            b = build(e.base)
            if e.exp.is_Integer:
                k = int(e.exp)
                return lambda a: mpmath.mpf(b(a)) ** k
            if e.exp == sp.Rational(1, 2):
                return lambda a: mpmath.sqrt(b(a))
            x = build(e.exp)
            return lambda a: mpmath.power(b(a), x(a))
        name = _MP_FUNCS.get(type(e).__name__)
        if name is not None and len(e.args) == 1:
            fn = getattr(mpmath, name)
            g = build(e.args[0])
            return lambda a: fn(g(a))
        raise NotImplementedError(type(e).__name__)

    try:
        f = build(sp.sympify(expr))
    except (NotImplementedError, KeyError):
        return sp.lambdify(syms, expr, modules="mpmath", docstring_limit=0)
    return lambda *args: f(args)


def _rel_parts(rel):
    op = rel.rel_op
    if op in (">", ">="):
        return rel.lhs - rel.rhs, op == ">"
    if op in ("<", "<="):
        return rel.rhs - rel.lhs, op == "<"
    raise ValueError(f"unsupported relation {rel}")


class Sampler:
    """Draws points; ``angle_q`` maps angle coordinates to their denominators ``q``."""

    def __init__(self, coords, params, relations, angle_q=None, func_keys=(), seed=0, defaults=None):
        """``func_keys``: ``((func, alpha), label)`` for each value of an arbitrary function."""
        self.coords = tuple(coords)
        self.params = tuple(params)
        self.rng = random.Random(seed)
        self.angle_q = dict(angle_q or {})
        self.func_keys = list(func_keys)
        self.defaults = defaults or {}
        self.relations = []
        syms = list(self.params) + list(self.coords)
        for rel in relations:
            if rel is sp.true:
                continue
            if rel is sp.false:
                raise ValueError("an inequality of the domain is always false")
            diff, strict = _rel_parts(rel)
            free = diff.free_symbols
            f = mp_function(syms, diff)
            bound = None
            for side, other, lower in (
                (rel.lhs, rel.rhs, rel.rel_op in (">", ">=")),
                (rel.rhs, rel.lhs, rel.rel_op in ("<", "<=")),
            ):
                if side.is_Symbol and side not in other.free_symbols:
                    bound = (side, other.free_symbols, mp_function(syms, other), lower)
                    break
            self.relations.append((rel, free, f, strict, bound))

    # -- bounds -----------------------------------------------------------------
    def _bounds(self, v, num):
        lo = hi = None
        lo_strict = hi_strict = False
        if v.is_positive or v.is_nonnegative:
            lo, lo_strict = 0.0, bool(v.is_positive)
        elif v.is_negative or v.is_nonpositive:
            hi, hi_strict = 0.0, bool(v.is_negative)
        syms = list(self.params) + list(self.coords)
        for rel, _free, _f, _strict, bound in self.relations:
            if bound is None or bound[0] != v or not bound[1] <= set(num):
                continue
            try:
                with mpmath.workdps(DIGITS):
                    val = bound[2](*[num.get(s, mpmath.mpf(0)) for s in syms])
                    if isinstance(val, mpmath.mpc):
                        if abs(val.imag) > mpmath.mpf(10) ** (-DIGITS + 10):
                            continue
                        val = val.real
                    val = float(val)
            except (TypeError, ValueError, ZeroDivisionError):
                continue
            if not math.isfinite(val):
                continue
            strict = rel.rel_op in (">", "<")
            if bound[3]:
                if lo is None or val >= lo:
                    lo, lo_strict = val, strict
            else:
                if hi is None or val <= hi:
                    hi, hi_strict = val, strict
        return lo, hi, lo_strict, hi_strict

    def _draw_value(self, v, lo, hi):
        rng = self.rng
        if lo is not None and hi is not None:
            if hi <= lo:
                return None
            x = lo + (hi - lo) * rng.uniform(0.03, 0.97)
        elif lo is not None:
            x = lo + max(1.0, abs(lo)) * rng.uniform(0.05, 4.0)
        elif hi is not None:
            x = hi - max(1.0, abs(hi)) * rng.uniform(0.05, 4.0)
        elif v.is_positive or v.is_nonnegative:
            x = rng.uniform(0.2, 3.0)
        elif v.is_negative or v.is_nonpositive:
            x = -rng.uniform(0.2, 3.0)
        else:
            x = rng.uniform(-3.0, 3.0)
        if v.is_integer:
            return Fraction(round(x))
        return _fraction(x, rng, lo, hi)

    def draw(self):
        """One point, or None after a failed attempt (the caller retries)."""
        num: dict = {}
        values: dict = {}
        angles: dict = {}
        shown: dict = {}
        for v in list(self.params) + list(self.coords):
            lo, hi, _, _ = self._bounds(v, num)
            if v in self.angle_q:
                q = self.angle_q[v]
                a = lo if lo is not None else (0.0 if hi is None else hi - 6.0)
                b = hi if hi is not None else a + 6.0
                lo2, hi2 = max(a, -math.pi * q * 0.98), min(b, math.pi * q * 0.98)
                if hi2 <= lo2:
                    return None
                theta = lo2 + (hi2 - lo2) * self.rng.uniform(0.03, 0.97)
                u = _fraction(math.tan(theta / (2 * q)), self.rng)
                angles[v] = (u, q)
                with mpmath.workdps(DIGITS):
                    num[v] = 2 * q * mpmath.atan(mpmath.mpf(u.numerator) / u.denominator)
                shown[str(v)] = f"2*atan({u})" if q == 1 else f"{2 * q}*atan({u})"
                continue
            x = self._draw_value(v, lo, hi)
            if x is None:
                return None
            values[v] = x
            with mpmath.workdps(DIGITS):
                num[v] = mpmath.mpf(x.numerator) / x.denominator
            shown[str(v)] = str(x)
        syms = list(self.params) + list(self.coords)
        with mpmath.workdps(DIGITS):
            args = [num[s] for s in syms]
            for _rel, _free, f, strict, _bound in self.relations:
                try:
                    val = f(*args)
                except (ZeroDivisionError, ValueError, TypeError):
                    return None
                if isinstance(val, mpmath.mpc):
                    if abs(val.imag) > mpmath.mpf(10) ** (-DIGITS + 10):
                        return None
                    val = val.real
                if val < 0 or (strict and val == 0):
                    return None
            for s in self.params:  # declared assumptions (relations they imply were simplified away)
                val = num[s]
                if (
                    (s.is_positive and val <= 0)
                    or (s.is_nonnegative and val < 0)
                    or (s.is_negative and val >= 0)
                    or (s.is_nonpositive and val > 0)
                    or (s.is_nonzero and val == 0)
                ):
                    return None
        funcs = {}
        for key, label in self.func_keys:
            _func, alpha = key
            if sum(alpha) == 0:
                x = _fraction(self.rng.uniform(0.25, 3.0), self.rng)
            else:
                x = _fraction(self.rng.uniform(-3.0, 3.0), self.rng)
            funcs[key] = x
            shown[label] = str(x)
        return Sample(values, angles, num, shown, funcs)
