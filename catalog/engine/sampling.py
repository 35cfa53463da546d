"""Random rational points of a chart's domain and parameter ranges, at generic places.

Rejection sampling from boxes read off the inequalities: a relation of the
form ``v > expr`` or ``expr < v`` whose right side only involves variables
already drawn gives a bound for ``v``; parameters are drawn first (in their
declared order, so ``0 <= a < M`` sees ``M``), then coordinates; every
relation is finally checked on the whole point in 50-digit arithmetic.
Angles that occur inside trigonometric functions are drawn through the
rational parameter ``u = tan(angle/2)`` so their sine and cosine are exact
rationals. The generator is a seeded :class:`random.Random`.

Points are *generic*: each drawn value (parameter, coordinate, ``u`` of an
angle, value of an arbitrary function or of one of its derivatives) is a
fraction ``k / p**e`` whose denominator is a power of a prime ``p >= 7`` that
belongs to that value alone, with ``k`` prime to ``p``. So no value is 0, +-1,
an integer or a simple fraction (1/2, 3/2...), no value equals a rational
bound of its range, and no two values are equal or in a simple ratio (the
``p``-adic valuations differ): a point never lies on an axis (``u = 0``,
``sin(theta) = 0``), an equator (``u = +-1``), the edge of a range, or a
place such as ``r = 2 M`` by construction. Singular sets of measure zero
(axes, horizons) are therefore not sampled; the verifiers report them from
the symbolic side instead.
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


# denominators of the values of a point: each drawn value gets its own prime (>= 7)
PRIMES = tuple(p for p in range(7, 400) if all(p % d for d in range(2, int(p**0.5) + 1)))


def generic_fraction(x: float, p: int, lo=None, hi=None) -> Fraction:
    """The fraction ``k / p**e`` nearest to ``x`` (smallest ``e >= 1``) with ``k`` prime to ``p`` and
    strictly inside ``(lo, hi)`` when given: never an integer, never a rational bound with another
    denominator, never equal to a value drawn with another prime."""
    if not math.isfinite(x):
        raise ValueError("not a finite number")
    den = p
    while True:
        k = round(x * den)
        for cand in (k, k + 1, k - 1, k + 2, k - 2):
            if cand % p == 0:
                continue
            q = Fraction(cand, den)
            if (lo is None or q > lo) and (hi is None or q < hi):
                return q
        if den > 10**40:  # an interval narrower than anything drawn from floats
            raise ValueError("the interval is too narrow to draw a point in")
        den *= p


def is_generic(q: Fraction, p: int) -> bool:
    """Is ``q`` a value :func:`generic_fraction` can return for the prime ``p``?"""
    d = q.denominator
    while d % p == 0:
        d //= p
    return d == 1 and q.denominator != 1


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
        # one prime denominator per drawn value (see the module docstring), fixed by the seed
        keys = [*self.params, *self.coords, *(key for key, _label in self.func_keys)]
        pool = list(PRIMES[: max(16, 2 * len(keys))])
        if len(keys) > len(pool):
            raise ValueError(f"too many values to sample generically ({len(keys)})")
        self.primes = dict(zip(keys, self.rng.sample(pool, len(keys)), strict=True))
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
            return self._generic_integer(x, lo, hi)
        try:
            return generic_fraction(x, self.primes[v], lo, hi)
        except ValueError:
            return None

    @staticmethod
    def _generic_integer(x, lo, hi):
        """An integer near ``x`` strictly inside the bounds, avoiding 0 and +-1 where the range allows."""
        k = round(x)
        inside = [c for c in range(k - 3, k + 4) if (lo is None or c > lo) and (hi is None or c < hi)]
        if not inside:
            return None
        plain = [c for c in inside if abs(c) > 1]
        return Fraction(min(plain or inside, key=lambda c: abs(c - x)))

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
                # an angle without a bound ranges over a whole period, centred on 0
                a = lo if lo is not None else (-math.pi * q if hi is None else hi - 2 * math.pi * q)
                b = hi if hi is not None else a + 2 * math.pi * q
                lo2, hi2 = max(a, -math.pi * q * 0.98), min(b, math.pi * q * 0.98)
                if hi2 <= lo2:
                    return None
                theta = lo2 + (hi2 - lo2) * self.rng.uniform(0.03, 0.97)
                try:  # u = tan(angle/(2 q)) is increasing on the interval
                    u = generic_fraction(
                        math.tan(theta / (2 * q)), self.primes[v], math.tan(lo2 / (2 * q)), math.tan(hi2 / (2 * q))
                    )
                except ValueError:
                    return None
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
            y = self.rng.uniform(0.25, 3.0) if sum(alpha) == 0 else self.rng.uniform(-3.0, 3.0)
            x = generic_fraction(y, self.primes[key])
            funcs[key] = x
            shown[label] = str(x)
        return Sample(values, angles, num, shown, funcs)
