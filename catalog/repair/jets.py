"""Second-order jets in ball arithmetic: a value at a point with its first and second derivatives.

A value at a point is the value, the first derivatives and the second derivatives with respect
to the chart's coordinates (dicts keyed by coordinate index and by sorted index pairs; a missing
key is an exact zero). Numbers are python-flint ``arb`` balls. :class:`_Evaluator` evaluates a
checked syntax tree (never code) to a jet, or a line element to a quadratic form of jets.
"""

from __future__ import annotations

import ast
from collections.abc import Callable, Mapping
from fractions import Fraction
from typing import Any

from gravicat.format.expr import (
    _ADDITIVE,
    _MULTIPLICATIVE,
    _chain,
)

# =========================================================================== ball-arithmetic jets
#
# A value at a point is a second-order jet: the value, the first derivatives and the second
# derivatives with respect to the chart's coordinates (dicts keyed by coordinate index and by
# sorted index pairs; a missing key is an exact zero). Numbers are flint.arb balls.


class _Undefined(Exception):
    """The expression is not defined (or not smooth) at the point: division by zero, log of a negative..."""


class _NotQuadratic(Exception):
    """A line element that is not a quadratic form in the differentials."""


def _flint():
    import flint

    return flint


class _Prec:
    """Working precision of flint's arb arithmetic (process-global in flint), restored on exit."""

    def __init__(self, bits: int):
        self.bits = bits

    def __enter__(self):
        ctx = _flint().ctx
        self.old = ctx.prec
        ctx.prec = self.bits

    def __exit__(self, *exc):
        _flint().ctx.prec = self.old


_EMPTY: dict = {}


class _J:
    __slots__ = ("v", "d", "h")

    def __init__(self, v, d=_EMPTY, h=_EMPTY):
        self.v = v
        self.d = d
        self.h = h


class _Q(dict):
    """A quadratic form in the differentials: monomial key () / (i,) / (i, j) with i <= j -> _J."""


def _zero():
    return _flint().arb(0)


def _key(i, j):
    return (i, j) if i <= j else (j, i)


def _merge(a: dict, b: dict, sign: int) -> dict:
    if not b:
        return a
    if not a:
        return b if sign > 0 else {k: -x for k, x in b.items()}
    out = dict(a)
    for k, x in b.items():
        if k in out:
            out[k] = out[k] + x if sign > 0 else out[k] - x
        else:
            out[k] = x if sign > 0 else -x
    return out


def _jadd(a: _J, b: _J, sign: int = 1) -> _J:
    return _J(a.v + b.v if sign > 0 else a.v - b.v, _merge(a.d, b.d, sign), _merge(a.h, b.h, sign))


def _jneg(a: _J) -> _J:
    return _J(-a.v, {k: -x for k, x in a.d.items()} if a.d else _EMPTY,
              {k: -x for k, x in a.h.items()} if a.h else _EMPTY)


def _jscale(a: _J, c) -> _J:
    return _J(a.v * c, {k: x * c for k, x in a.d.items()} if a.d else _EMPTY,
              {k: x * c for k, x in a.h.items()} if a.h else _EMPTY)


def _jmul(a: _J, b: _J) -> _J:
    if not a.d and not a.h:
        return _jscale(b, a.v)
    if not b.d and not b.h:
        return _jscale(a, b.v)
    av, bv = a.v, b.v
    d = {}
    for k, x in a.d.items():
        d[k] = x * bv
    for k, y in b.d.items():
        d[k] = d[k] + av * y if k in d else av * y
    h = {}
    for k, x in a.h.items():
        h[k] = x * bv
    for k, y in b.h.items():
        h[k] = h[k] + av * y if k in h else av * y
    for i, x in a.d.items():
        for j, y in b.d.items():
            k = _key(i, j)
            t = x * y
            if i == j:
                t = t * 2
            h[k] = h[k] + t if k in h else t
    return _J(av * bv, d, h)


def _jchain(a: _J, f0, f1, f2) -> _J:
    """f(a) from f(x), f'(x), f''(x) at x = a.v (chain rule to second order)."""
    if not a.d and not a.h:
        return _J(f0)
    d = {k: f1 * x for k, x in a.d.items()}
    h = {k: f1 * x for k, x in a.h.items()}
    items = list(a.d.items())
    for p, (i, x) in enumerate(items):
        for j, y in items[p:]:
            k = _key(i, j)
            t = f2 * x * y
            h[k] = h[k] + t if k in h else t
    return _J(f0, d, h)


def _nonzero(x) -> None:
    if x.contains(0):
        raise _Undefined("division by zero")


def _positive(x) -> None:
    if not x > 0:
        raise _Undefined("argument not positive")


def _jinv(a: _J) -> _J:
    x = a.v
    _nonzero(x)
    f0 = 1 / x
    if not a.d and not a.h:
        return _J(f0)
    return _jchain(a, f0, -f0 * f0, 2 * f0 * f0 * f0)


def _is_int(x) -> int | None:
    if x.is_exact():
        z = x.unique_fmpz()
        if z is not None:
            return int(z)
    return None


def _jpow_int(a: _J, k: int) -> _J:
    if k == 0:
        return _J(_flint().arb(1))
    if k == 1:
        return a
    x = a.v
    if k < 0:
        _nonzero(x)
    f0 = x**k
    if not a.d and not a.h:
        return _J(f0)
    f1 = k * x ** (k - 1)
    f2 = k * (k - 1) * x ** (k - 2) if k != 1 else _zero()
    return _jchain(a, f0, f1, f2)


def _jpow_real(a: _J, w) -> _J:
    """a**w for a real constant w that is not an integer: the base must be positive (real power)."""
    x = a.v
    _positive(x)
    f0 = x**w
    if not a.d and not a.h:
        return _J(f0)
    return _jchain(a, f0, w * x ** (w - 1), w * (w - 1) * x ** (w - 2))


def _jpow(a: _J, w: _J) -> _J:
    if not w.d and not w.h:
        k = _is_int(w.v)
        if k is not None:
            return _jpow_int(a, k)
        return _jpow_real(a, w.v)
    # a**w = exp(w log a)
    return _jcall("exp", _jmul(w, _jcall("log", a)))


def _f_sin(x):
    s, c = x.sin_cos()
    return s, c, -s


def _f_cos(x):
    s, c = x.sin_cos()
    return c, -s, -c


def _f_tan(x):
    _nonzero(x.cos())
    t = x.tan()
    u = 1 + t * t
    return t, u, 2 * t * u


def _f_cot(x):
    _nonzero(x.sin())
    k = x.cot()
    u = 1 + k * k
    return k, -u, 2 * k * u


def _f_sec(x):
    s, c = x.sin_cos()
    _nonzero(c)
    sec = 1 / c
    t = s * sec
    return sec, sec * t, sec * (t * t + sec * sec)


def _f_csc(x):
    s, c = x.sin_cos()
    _nonzero(s)
    csc = 1 / s
    k = c * csc
    return csc, -csc * k, csc * (k * k + csc * csc)


def _f_asin(x):
    w = 1 - x * x
    _positive(w)
    r = w.sqrt()
    return x.asin(), 1 / r, x / (w * r)


def _f_acos(x):
    w = 1 - x * x
    _positive(w)
    r = w.sqrt()
    return x.acos(), -1 / r, -x / (w * r)


def _f_atan(x):
    w = 1 + x * x
    return x.atan(), 1 / w, -2 * x / (w * w)


def _f_sinh(x):
    s, c = x.sinh_cosh()
    return s, c, s


def _f_cosh(x):
    s, c = x.sinh_cosh()
    return c, s, c


def _f_tanh(x):
    t = x.tanh()
    u = 1 - t * t
    return t, u, -2 * t * u


def _f_coth(x):
    _nonzero(x)
    k = x.coth()
    u = 1 - k * k
    return k, u, -2 * k * u


def _f_asinh(x):
    w = 1 + x * x
    r = w.sqrt()
    return x.asinh(), 1 / r, -x / (w * r)


def _f_acosh(x):
    _positive(x - 1)
    w = x * x - 1
    r = w.sqrt()
    return x.acosh(), 1 / r, -x / (w * r)


def _f_atanh(x):
    w = 1 - x * x
    _positive(w)
    return x.atanh(), 1 / w, 2 * x / (w * w)


def _f_exp(x):
    e = x.exp()
    return e, e, e


def _f_log(x):
    _positive(x)
    i = 1 / x
    return x.log(), i, -i * i


def _f_sqrt(x):
    _positive(x)
    s = x.sqrt()
    return s, 1 / (2 * s), -1 / (4 * s * s * s)


def _f_abs(x):
    _nonzero(x)
    return abs(x), _flint().arb(1 if x > 0 else -1), _zero()


def _f_sign(x):
    _nonzero(x)
    return _flint().arb(1 if x > 0 else -1), _zero(), _zero()


def _f_lambertw(x):
    e = _flint().arb(1).exp()
    _positive(x + 1 / e)
    w = x.lambertw()
    d1 = (-w).exp() / (1 + w)
    return w, d1, -d1 * d1 * (w + 2) / (1 + w)


_MATH = {
    "sin": _f_sin, "cos": _f_cos, "tan": _f_tan, "cot": _f_cot, "sec": _f_sec, "csc": _f_csc,
    "asin": _f_asin, "acos": _f_acos, "atan": _f_atan, "sinh": _f_sinh, "cosh": _f_cosh, "tanh": _f_tanh,
    "coth": _f_coth, "asinh": _f_asinh, "acosh": _f_acosh, "atanh": _f_atanh, "exp": _f_exp, "log": _f_log,
    "sqrt": _f_sqrt, "Abs": _f_abs, "sign": _f_sign, "LambertW": _f_lambertw,
}


def _jcall(name: str, a: _J) -> _J:
    x = a.v
    if not a.d and not a.h and name == "sqrt" and x.is_zero():
        return _J(_zero())
    f0, f1, f2 = _MATH[name](x)
    if not f0.is_finite():
        raise _Undefined(f"{name} is not finite here")
    return _jchain(a, f0, f1, f2)


# -- the differential-form layer (line elements) ------------------------------------------


def _lift(a) -> _Q:
    return a if isinstance(a, _Q) else _Q({(): a})


def _add(a, b, sign=1):
    if not isinstance(a, _Q) and not isinstance(b, _Q):
        return _jadd(a, b, sign)
    a, b = _lift(a), _lift(b)
    out = _Q(a)
    for k, y in b.items():
        if k in out:
            out[k] = _jadd(out[k], y, sign)
        else:
            out[k] = y if sign > 0 else _jneg(y)
    return out


def _neg(a):
    if isinstance(a, _Q):
        return _Q({k: _jneg(v) for k, v in a.items()})
    return _jneg(a)


def _mul(a, b):
    qa, qb = isinstance(a, _Q), isinstance(b, _Q)
    if not qa and not qb:
        return _jmul(a, b)
    if not qa:
        return _Q({k: _jmul(a, v) for k, v in b.items()})
    if not qb:
        return _Q({k: _jmul(v, b) for k, v in a.items()})
    out = _Q()
    for k1, v1 in a.items():
        for k2, v2 in b.items():
            k = tuple(sorted(k1 + k2))
            if len(k) > 2:
                raise _NotQuadratic("a product of more than two differentials")
            t = _jmul(v1, v2)
            out[k] = _jadd(out[k], t) if k in out else t
    return out


def _div(a, b):
    if isinstance(b, _Q):
        raise _NotQuadratic("division by a differential")
    inv = _jinv(b)
    return _mul(a, inv)


def _const_value(node) -> Fraction | None:
    """The exact value of a numeric constant subtree (integers, / and unary minus), else None."""
    if isinstance(node, ast.Constant) and type(node.value) is int:
        return Fraction(node.value)
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        v = _const_value(node.operand)
        return None if v is None else (-v if isinstance(node.op, ast.USub) else v)
    if isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Div, ast.Mult, ast.Add, ast.Sub)):
        x, y = _const_value(node.left), _const_value(node.right)
        if x is None or y is None:
            return None
        if isinstance(node.op, ast.Div):
            return None if y == 0 else x / y
        return x * y if isinstance(node.op, ast.Mult) else x + y if isinstance(node.op, ast.Add) else x - y
    return None


def _flatten(node, family):
    """The left-deep chain walk of the parser (operands, operator classes)."""
    operands, ops = _chain(node, family)
    return operands, [type(op) for op in ops]


class _Evaluator:
    """Evaluates a checked syntax tree to a jet (or, with differentials, to a quadratic form of jets)."""

    def __init__(self, env: Mapping[str, Any], functions: Mapping[str, tuple[int, ...]],
                 table: Callable[[str, tuple[int, ...]], Any], order: int,
                 arg_names: Mapping[str, tuple[str, ...]] | None = None):
        self.env = env
        self.functions = functions  # name -> coordinate indices of its arguments
        self.arg_names = arg_names or {}  # name -> coordinate names of its arguments
        self.table = table  # (function, multi-index) -> value of that derivative at the point
        self.order = order

    def ev(self, node):
        t = type(node)
        if t is ast.BinOp:
            op = node.op
            if isinstance(op, _ADDITIVE):
                operands, ops = _flatten(node, _ADDITIVE)
                acc = self.ev(operands[0])
                for o, x in zip(ops, operands[1:], strict=True):
                    acc = _add(acc, self.ev(x), 1 if o is ast.Add else -1)
                return acc
            if isinstance(op, _MULTIPLICATIVE):
                operands, ops = _flatten(node, _MULTIPLICATIVE)
                acc = self.ev(operands[0])
                for o, x in zip(ops, operands[1:], strict=True):
                    acc = _mul(acc, self.ev(x)) if o is ast.Mult else _div(acc, self.ev(x))
                return acc
            return self.power(node)
        if t is ast.UnaryOp:
            v = self.ev(node.operand)
            return _neg(v) if isinstance(node.op, ast.USub) else v
        if t is ast.Constant:
            return _J(_flint().arb(int(node.value)))
        if t is ast.Name:
            name = node.id
            if name in self.env:
                return self.env[name]
            if name == "pi":
                return _J(_flint().arb.pi())
            if name in self.functions:
                return self.function(name, (0,) * len(self.functions[name]))
            raise KeyError(name)  # pragma: no cover - checked trees only name declared symbols
        if t is ast.Call:
            fname = node.func.id
            if fname in _MATH:
                arg = self.ev(node.args[0])
                if isinstance(arg, _Q):
                    raise _NotQuadratic(f"{fname}() of a differential")
                return _jcall(fname, arg)
            if fname in self.functions:
                return self.function(fname, (0,) * len(self.functions[fname]))
            if fname == "diff":
                return self.derivative(node)
        raise _Undefined(f"unsupported node {t.__name__}")  # pragma: no cover

    def power(self, node):
        base = self.ev(node.left)
        q = _const_value(node.right)
        if isinstance(base, _Q):
            if q is None or q.denominator != 1 or not 0 <= q <= 2:
                raise _NotQuadratic("a differential raised to a power other than 0, 1 or 2")
            k = int(q)
            return _J(_flint().arb(1)) if k == 0 else base if k == 1 else _mul(base, base)
        if q is not None:
            if q.denominator == 1:
                return _jpow_int(base, int(q))
            f = _flint()
            return _jpow_real(base, f.arb(f.fmpq(q.numerator, q.denominator)))
        w = self.ev(node.right)
        if isinstance(w, _Q):
            raise _NotQuadratic("a differential in an exponent")
        return _jpow(base, w)

    def function(self, name: str, alpha: tuple[int, ...]) -> _J:
        args = self.functions[name]
        v = self.table(name, alpha)
        if self.order == 0:
            return _J(v)
        d, h = {}, {}
        for p, ci in enumerate(args):
            a1 = list(alpha)
            a1[p] += 1
            d[ci] = self.table(name, tuple(a1))
            for q in range(p, len(args)):
                a2 = list(a1)
                a2[q] += 1
                h[_key(ci, args[q])] = self.table(name, tuple(a2))
        return _J(v, d, h)

    def derivative(self, node) -> _J:
        counts: dict[str, int] = {}
        while isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "diff":
            var = node.args[1].id
            order = node.args[2].value if len(node.args) == 3 else 1
            counts[var] = counts.get(var, 0) + order
            node = node.args[0]
        fname = node.func.id if isinstance(node, ast.Call) else node.id
        alpha = tuple(counts.get(a, 0) for a in self.arg_names[fname])
        return self.function(fname, alpha)
