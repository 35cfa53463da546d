"""Repair suggestions: find the copying slip that makes a metric file fail its checks.

The commonest reason a newly typed metric fails is a slip in one place: a sign, a power, a
factor of 2 (or a dropped /3 of a cosmological constant, a 4 or a 6), a swapped symbol, ``sin``
for ``cos``. :func:`find_repairs` looks for it:

1. **Baseline.** The chart is checked with the verifiers ``structure``, ``signature``,
   ``field-equations`` and ``limits`` (the same plugins ``gravicat check`` runs). Only a
   failing field-equation, signature or limit check is repaired; otherwise there is nothing
   to repair.
2. **Candidates.** Every expression the failing claim is built from (each ``define``
   sub-expression that reaches it, the line element or each metric component, and the
   matter fields: potential, fluid, null dust, cosmological constant) is parsed by the
   whitelist parser (:mod:`gravicat.format.expr`), and its syntax tree is edited in one place; the
   edit kinds are :data:`KINDS`. An edited tree is printed back to text, parsed and checked
   again (nothing is ever evaluated as code), and edits are de-duplicated by the resulting
   expression.
3. **Screening.** Every candidate is evaluated at the same few points of the chart's domain
   (drawn once by :class:`gravicat.engine.geometry.Geometry` from the failing chart, so they are
   the points ``check`` samples, plus the counterexample point of each failing check): the
   metric, its first and second derivatives and the matter fields are computed as
   second-order jets in ball arithmetic (python-flint ``arb``, 256 bits: every value is an
   interval certain to contain the exact one), and the claim's residual follows from the
   curvature formulas. A candidate is discarded as soon as one residual component is
   certainly non-zero at one point; it must hold at every point, for the failing checks and
   for the signature / field-equation / limit checks that passed before. Candidates are
   screened in parallel (``jobs`` forked processes).
4. **Proof.** Each survivor is written into a copy of the document, validated with
   :func:`gravicat.format.metricfile.validate`, and checked again by the registered verifiers
   (exact sampled stage, then the symbolic proof), in a child process with a hard time
   limit. A survivor that still fails, or that breaks a check which did not fail before, is
   dropped.

A repaired chart that is flat (the Riemann tensor vanishes at every sample point) while a declared
invariant still fails contradicts the entry's own claim of curvature: it is kept as a *doubtful*
suggestion, ranked after every other one and never the one ``--write`` applies unasked (when all
suggestions are doubtful the status is ``no-repair-found``). Otherwise suggestions are ranked by edit
size (one edit before two), then by how many other checks that
failed before still fail (a repair that also mends a failing transform or observer comes
first), then by proof status and by how common the kind of slip is. A suggestion is a
hypothesis to be checked against the source paper: several different metrics may satisfy the
same claim (a vacuum metric with the sign of the mass flipped is still a vacuum metric), which
is why the checks that passed before must keep passing.

Room: ``repair`` may import ``physics``, ``export``, ``engine``, ``format`` and the core
contract; never the store, api or cli rooms.
"""

from __future__ import annotations

import ast
import copy
import math
import multiprocessing
import os
import random
import re
import tempfile
import time
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from functools import cached_property
from pathlib import Path
from typing import Any

from gravicat.checks import CheckResult, Method, Status
from gravicat.errors import CatalogError, InputError
from gravicat.format.expr import (
    _ADDITIVE,
    _MULTIPLICATIVE,
    Names,
    _chain,
    canonical,
    check_expression,
    check_expression_size,
    names_in,
)
from gravicat.format.metricfile import FUNCTION_DECL, MetricDocument, canonical_json, validate

__all__ = [
    "KINDS",
    "REPAIR_VERIFIERS",
    "HYPOTHESIS_NOTE",
    "EditInfo",
    "Suggestion",
    "ChartRepair",
    "RepairReport",
    "Written",
    "find_repairs",
    "suggestion_rank",
    "corruptions",
    "edited_document",
    "enumerate_edits",
    "write_suggestion",
]

#: Edit kinds, in the order of how common the slip is (used to rank suggestions of equal size).
KINDS = ("sign", "factor-2", "small-factor", "exponent", "trig", "swap", "drop-term", "parameter-power")
#: The factors and divisors of ``small-factor`` (a dropped or stray /3 of a cosmological constant, a 4 or 6 of a
#: charge or a mass term); 2 is ``factor-2``. Offered where ``factor-2`` is, except on a bare number.
SMALL_FACTORS = (3, 4, 6)
#: Verifiers run for the baseline and for the proof of a repaired chart.
REPAIR_VERIFIERS = ("structure", "signature", "field-equations", "limits")
HYPOTHESIS_NOTE = ("Each suggestion is a hypothesis: several metrics can satisfy the same claim, so check the "
                   "repaired expression against the source paper before relying on it.")

DEFAULT_POINTS = 3
DEFAULT_BUDGET = 60.0
PROOF_BUDGET = 20.0
OTHERS_LIMIT = 5.0  # seconds for the other verifiers on the failing chart (closed forms of a wrong metric are slow)
MAX_PROOFS = 24  # survivors proved per chart (best ranked first)
PAIR_POOL = 60  # single edits pairs are drawn from, best residual reduction first
_PREC = 256
_ASYM_PREC = 1024
_ASYM_EXP = 120  # the asymptotic screen evaluates g_tt at r = 2**120
RADIAL = ("r", "rho", "R")  # as the limits verifier: the radial coordinate and the mass parameter
MASS = ("M", "m")
_IMPLICIT = (Fraction(2), Fraction(-1), Fraction(1, 2))  # exponents offered for a factor written without one
_TRIG = {"sin": "cos", "cos": "sin", "sinh": "cosh", "cosh": "sinh", "tan": "cot", "cot": "tan",
         "tanh": "coth", "coth": "tanh"}


# =========================================================================== reports


@dataclass
class EditInfo:
    """One edit of a suggestion: the field, the kind, what changed, and the whole expression before and after."""

    field: str
    kind: str
    detail: str
    original: str
    suggested: str

    def to_json(self) -> dict[str, str]:
        return {"field": self.field, "kind": self.kind, "detail": self.detail, "original": self.original,
                "suggested": self.suggested}


@dataclass
class Suggestion:
    """A repaired chart that passed the screen and the verifiers."""

    chart: str
    edits: list[EditInfo]
    status: str  # "pass", or "inconclusive" when a repaired or previously passing check is only sampled now
    checks: list[CheckResult]
    document: MetricDocument  # the repaired document (canonical form)
    still_failing: list[str] = field(default_factory=list)  # non-repairable checks that failed before and still do
    doubt: str = ""  # why this is probably not the slip (ranked after every other suggestion, never applied unasked)

    @property
    def size(self) -> int:
        return len(self.edits)

    def to_json(self, rank: int) -> dict[str, Any]:
        return {"rank": rank, "size": self.size, "status": self.status, "revision": self.document.hash,
                "still_failing": self.still_failing, "doubt": self.doubt,
                "edits": [e.to_json() for e in self.edits], "checks": [c.to_json() for c in self.checks]}


@dataclass
class ChartRepair:
    """The search on one chart."""

    chart: str
    baseline: list[CheckResult]
    failing: list[str] = field(default_factory=list)  # repairable checks that failed
    candidates: int = 0  # distinct single edits
    pairs: int = 0  # pairs of edits screened
    screened: int = 0  # candidates (singles and pairs) screened
    passed_screen: int = 0  # distinct metrics that passed the screen
    proved: int = 0  # survivors run through the verifiers
    suggestions: list[Suggestion] = field(default_factory=list)
    exhausted: bool = False  # the budget ran out before every candidate was screened
    note: str = ""
    seconds: float = 0.0
    points: int = 0

    def to_json(self, first_rank: int = 1) -> dict[str, Any]:
        return {"chart": self.chart, "failing": self.failing,
                "baseline": [r.to_json() for r in self.baseline],
                "candidates": self.candidates, "pairs": self.pairs, "screened": self.screened,
                "points": self.points, "passed_screen": self.passed_screen, "proved": self.proved,
                "budget_exhausted": self.exhausted, "note": self.note, "seconds": round(self.seconds, 3),
                "suggestions": [s.to_json(first_rank + i) for i, s in enumerate(self.suggestions)]}


@dataclass
class RepairReport:
    metric: str
    charts: list[ChartRepair]
    seconds: float = 0.0

    @property
    def status(self) -> str:
        """``nothing-to-repair``, ``repairs-found`` or ``no-repair-found`` (also when every suggestion is doubtful)."""
        if not any(c.failing for c in self.charts):
            return "nothing-to-repair"
        if any(not s.doubt for c in self.charts for s in c.suggestions):
            return "repairs-found"
        return "no-repair-found"

    @property
    def suggestions(self) -> list[Suggestion]:
        return [s for c in self.charts for s in c.suggestions]

    def to_json(self) -> dict[str, Any]:
        charts, rank = [], 1
        for c in self.charts:
            charts.append(c.to_json(rank))
            rank += len(c.suggestions)
        return {"metric": self.metric, "status": self.status, "note": HYPOTHESIS_NOTE,
                "seconds": round(self.seconds, 3), "charts": charts}


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


# =========================================================================== the chart model


@dataclass
class _Target:
    key: tuple
    field: str  # dotted path in the document, for messages and JSON
    tree: ast.expr
    text: str  # canonical text
    names: Names  # what an edited expression may refer to
    differentials: bool  # the line element
    symbol_classes: dict[str, str]  # symbol -> "coordinate" | "parameter" | "definition" | "differential"


class _Model:
    """One chart of a document as parsed trees: the targets a repair may edit and what they feed."""

    def __init__(self, doc: MetricDocument, chart: str):
        data = doc.data
        c = data["charts"][chart]
        self.doc = doc
        self.chart = chart
        self.claim = data["field-equations"]
        self.coords = list(c["coordinates"])
        self.n = len(self.coords)
        self.params = list(data["parameters"])
        self.functions: dict[str, tuple[str, ...]] = {}
        for decl in c["functions"]:
            m = FUNCTION_DECL.match(decl)
            self.functions[m.group(1)] = tuple(a.strip() for a in m.group(2).split(","))
        self.function_idx = {f: tuple(self.coords.index(a) for a in args) for f, args in self.functions.items()}
        source, base = doc.source, f"charts.{chart}"
        param_names = Names(symbols=frozenset(self.params))
        names = Names(symbols=frozenset(self.params) | frozenset(self.coords), functions=self.functions,
                      coordinates=frozenset(self.coords))
        classes = {p: "parameter" for p in self.params} | {x: "coordinate" for x in self.coords}
        self.targets: dict[tuple, _Target] = {}
        self.define_names: list[str] = []
        for dname, text in c["define"].items():
            fld = f"{base}.define.{dname}"
            tree, bits = check_expression_size(text, names, source=source, field=fld)
            self.targets[("define", dname)] = _Target(("define", dname), fld, tree, text, names, False, dict(classes))
            self.define_names.append(dname)
            names = names.with_symbols([dname], {dname: bits} if bits is not None else None)
            classes[dname] = "definition"
        self.line = "line-element" in c
        if self.line:
            diffs = [f"d{x}" for x in self.coords]
            dcls = dict(classes) | {d: "differential" for d in diffs}
            fld = f"{base}.line-element"
            nm = names.with_symbols(diffs)
            self.targets[("line-element",)] = _Target(("line-element",), fld, check_expression(
                c["line-element"], nm, source=source, field=fld), c["line-element"], nm, True, dcls)
        else:
            # the upper triangle is edited; an edit of g_ij is written to g_ji too when both read the same
            rows = c["metric"]
            for i in range(self.n):
                for j in range(i, self.n):
                    fld = f"{base}.metric[{i}][{j}]"
                    key = ("metric", i, j)
                    self.targets[key] = _Target(key, fld, check_expression(rows[i][j], names, source=source,
                                                                           field=fld), rows[i][j], names, False,
                                                dict(classes))
        self.matter_keys: list[tuple] = []

        def add(key, text, fld, nm=names):
            self.targets[key] = _Target(key, fld, check_expression(text, nm, source=source, field=fld), text, nm,
                                        False, dict(classes) if nm is names else
                                        {p: "parameter" for p in self.params})
            self.matter_keys.append(key)

        self.has_cc = "cosmological-constant" in c
        if self.has_cc:
            add(("cosmological-constant",), c["cosmological-constant"], f"{base}.cosmological-constant",
                param_names)
        self.has_potential = "potential" in c
        for x, text in c.get("potential", {}).items():
            add(("potential", x), text, f"{base}.potential.{x}")
        self.has_fluid = "fluid" in c
        if self.has_fluid:
            f = c["fluid"]
            add(("fluid", "density"), f["density"], f"{base}.fluid.density")
            if "pressure" in f:
                add(("fluid", "pressure"), f["pressure"], f"{base}.fluid.pressure")
            for x, text in f["velocity"].items():
                add(("fluid", "velocity", x), text, f"{base}.fluid.velocity.{x}")
        self.has_null_dust = "null-dust" in c
        if self.has_null_dust:
            nd = c["null-dust"]
            add(("null-dust", "density"), nd["density"], f"{base}.null-dust.density")
            for x, text in nd["vector"].items():
                add(("null-dust", "vector", x), text, f"{base}.null-dust.vector.{x}")
        self.metric_keys = [k for k in self.targets if k[0] in ("line-element", "metric")]
        # which targets each definition feeds (transitively)
        uses = {k: names_in(t.tree) & set(self.define_names) for k, t in self.targets.items()}
        self.affects: dict[str, set[tuple]] = {d: set() for d in self.define_names}
        for d in reversed(self.define_names):
            for k, u in uses.items():
                if d in u:
                    self.affects[d].add(k)
                    if k[0] == "define":
                        self.affects[d] |= self.affects[k[1]]
        live = set(self.metric_keys) | set(self.matter_keys)
        self.live_defines = {d for d in self.define_names if self.affects[d] & live}
        self.define_deps = {d: uses[("define", d)] for d in self.define_names}

    @property
    def editable(self) -> list[_Target]:
        """Targets a repair may edit: definitions that reach the metric or matter, the metric, the matter."""
        out = [self.targets[("define", d)] for d in self.define_names if d in self.live_defines]
        out += [self.targets[k] for k in self.metric_keys]
        out += [self.targets[k] for k in self.matter_keys]
        return out

    def dirty(self, over: Iterable[tuple]) -> set[tuple]:
        out = set()
        for k in over:
            out.add(k)
            if k[0] == "define":
                out |= self.affects[k[1]]
        return out

    # -- evaluation ----------------------------------------------------------------------
    def evaluate(self, point: _PointEnv, over: Mapping[tuple, ast.expr], base: dict | None, order: int) -> dict:
        """Values of every target (metric as the n x n matrix under the key "g") at ``point``."""
        env = dict(point.env(order))
        table = point.table
        ev = _Evaluator(env, self.function_idx, table, order, self.functions)
        want = set(self.live_defines)
        if over:  # an edit may name a definition the chart's claim did not use (an observer's, say)
            stack = [n for tree in over.values() for n in names_in(tree) if n in self.define_deps]
            while stack:
                d = stack.pop()
                if d not in want:
                    want.add(d)
                    stack.extend(self.define_deps[d])
        needed = [k for k in self.targets if k[0] != "define" or k[1] in want]
        if base is None:
            todo = needed
            vals: dict = {}
        else:
            dirty = self.dirty(over) | {("define", d) for d in want - self.live_defines}
            todo = [k for k in needed if k in dirty]
            vals = dict(base)
            for d in self.live_defines:
                env[d] = base[("define", d)]
        for k in todo:
            tree = over.get(k, self.targets[k].tree)
            if self.line and k == ("line-element",):
                for i, x in enumerate(self.coords):
                    env[f"d{x}"] = _Q({(i,): _J(_flint().arb(1))})
                v = ev.ev(tree)
                for x in self.coords:
                    del env[f"d{x}"]
            else:
                v = ev.ev(tree)
            if k[0] == "define":
                env[k[1]] = v
            vals[k] = v
        if base is None or any(k in self.metric_keys for k in todo):
            vals["g"] = self._matrix(vals)
        return vals

    def _matrix(self, vals) -> list[list[_J]]:
        n = self.n
        zero = _J(_zero())
        if self.line:
            form = vals[("line-element",)]
            if not isinstance(form, _Q):
                raise _NotQuadratic("the line element has no differentials")
            g = [[zero] * n for _ in range(n)]
            half = _flint().arb(1) / 2
            for k, v in form.items():
                if len(k) != 2:
                    raise _NotQuadratic("terms without two differentials")
                i, j = k
                if i == j:
                    g[i][i] = v
                else:
                    g[i][j] = g[j][i] = _jscale(v, half)
            return g
        g = [[zero] * n for _ in range(n)]
        for i in range(n):
            for j in range(i, n):
                g[i][j] = g[j][i] = vals[("metric", i, j)]
        return g


class _PointEnv:
    """One sample point: coordinate and parameter values (arb), arbitrary-function values drawn on demand."""

    def __init__(self, model: _Model, values: Mapping[str, Any], index: int, seed: int):
        self.model = model
        self.values = dict(values)
        self.index = index
        self.seed = seed
        self._table: dict = {}
        self._env: dict = {}

    def env(self, order: int) -> dict:
        if order not in self._env:
            out = {}
            for p in self.model.params:
                out[p] = _J(self.values[p])
            for i, x in enumerate(self.model.coords):
                out[x] = _J(self.values[x], {i: _flint().arb(1)}) if order else _J(self.values[x])
            self._env[order] = out
        return self._env[order]

    def table(self, fname: str, alpha: tuple[int, ...]):
        key = (fname, alpha)
        v = self._table.get(key)
        if v is None:
            rng = random.Random(f"{self.seed}:{self.index}:{fname}:{alpha}")
            if sum(alpha) == 0:
                q = Fraction(rng.randint(5, 60), rng.choice((4, 7, 9, 11)))
            else:
                q = Fraction(rng.randint(-60, 60), rng.choice((4, 7, 9, 11)))
            f = _flint()
            v = f.arb(f.fmpq(q.numerator, q.denominator))
            self._table[key] = v
        return v

    def varied(self, values: Mapping[str, Any]) -> _PointEnv:
        """The same point with some coordinate or parameter values replaced (function values kept)."""
        p = _PointEnv(self.model, {**self.values, **values}, self.index, self.seed)
        p._table = self._table
        return p


# =========================================================================== curvature at a point


class _Curv:
    """Inverse metric, Christoffel symbols and curvature at a point, from the jets of g."""

    def __init__(self, gj: list[list[_J]]):
        n = len(gj)
        self.n = n
        self.gj = gj
        self.g = [[gj[a][b].v for b in range(n)] for a in range(n)]
        z = _zero()
        self.z = z
        self.dg = [[[gj[a][b].d.get(c, z) for b in range(n)] for a in range(n)] for c in range(n)]
        self._low: dict = {}
        self._dgam: dict = {}

    def ddg(self, c, d, a, b):
        return self.gj[a][b].h.get(_key(c, d), self.z)

    @cached_property
    def ginv(self):
        f = _flint()
        n = self.n
        m = f.arb_mat(n, n, [x for row in self.g for x in row])
        det = m.det()
        if det.contains(0):
            raise _Undefined("the metric is degenerate here")
        try:
            inv = m.inv()
        except (ZeroDivisionError, ValueError):
            raise _Undefined("the metric is degenerate here") from None
        return [[inv[a, b] for b in range(n)] for a in range(n)]

    @cached_property
    def gamma(self):
        n, dg, gi = self.n, self.dg, self.ginv
        first = [[[None] * n for _ in range(n)] for _ in range(n)]
        for e in range(n):
            for b in range(n):
                for c in range(b, n):
                    v = dg[b][e][c] + dg[c][e][b] - dg[e][b][c]
                    first[e][b][c] = first[e][c][b] = v / 2
        out = [[[None] * n for _ in range(n)] for _ in range(n)]
        for a in range(n):
            for b in range(n):
                for c in range(b, n):
                    v = self.z
                    for e in range(n):
                        x = first[e][b][c]
                        if not x.is_zero() and not gi[a][e].is_zero():
                            v = v + gi[a][e] * x
                    out[a][b][c] = out[a][c][b] = v
        return out

    def low(self, d, b, c):
        if b > c:
            b, c = c, b
        key = (d, b, c)
        v = self._low.get(key)
        if v is None:
            n, dg, G = self.n, self.dg, self.gamma
            v = []
            for e in range(n):
                x = (self.ddg(d, b, e, c) + self.ddg(d, c, e, b) - self.ddg(d, e, b, c)) / 2
                for f in range(n):
                    y = dg[d][e][f]
                    if not y.is_zero():
                        w = G[f][b][c]
                        if not w.is_zero():
                            x = x - y * w
                v.append(x)
            self._low[key] = v
        return v

    def dgamma(self, d, a, b, c):
        """d_d Gamma^a_bc."""
        if b > c:
            b, c = c, b
        key = (d, a, b, c)
        v = self._dgam.get(key)
        if v is None:
            gi = self.ginv
            low = self.low(d, b, c)
            v = self.z
            for e in range(self.n):
                if not gi[a][e].is_zero() and not low[e].is_zero():
                    v = v + gi[a][e] * low[e]
            self._dgam[key] = v
        return v

    @cached_property
    def ricci(self):
        n, G = self.n, self.gamma
        tr = [sum((G[a][a][e] for a in range(n)), self.z) for e in range(n)]
        out = [[None] * n for _ in range(n)]
        for b in range(n):
            for d in range(b, n):
                v = self.z
                for a in range(n):
                    v = v + self.dgamma(a, a, b, d) - self.dgamma(d, a, a, b)
                for e in range(n):
                    if not tr[e].is_zero() and not G[e][b][d].is_zero():
                        v = v + tr[e] * G[e][b][d]
                    for a in range(n):
                        x, y = G[a][d][e], G[e][a][b]
                        if not x.is_zero() and not y.is_zero():
                            v = v - x * y
                out[b][d] = out[d][b] = v
        return out

    @cached_property
    def ricci_scalar(self):
        n, gi, R = self.n, self.ginv, self.ricci
        return sum((gi[a][b] * R[a][b] for a in range(n) for b in range(n) if not gi[a][b].is_zero()), self.z)

    @cached_property
    def einstein(self):
        n, R, S = self.n, self.ricci, self.ricci_scalar
        return [[R[a][b] - self.g[a][b] * S / 2 for b in range(n)] for a in range(n)]

    def riemann(self):
        """R^a_bcd (c < d) as a flat list."""
        n, G = self.n, self.gamma
        out = []
        for a in range(n):
            for b in range(n):
                for c in range(n):
                    for d in range(c + 1, n):
                        v = self.dgamma(c, a, d, b) - self.dgamma(d, a, c, b)
                        for e in range(n):
                            v = v + G[a][c][e] * G[e][d][b] - G[a][d][e] * G[e][c][b]
                        out.append(v)
        return out


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

    def residual(self, vals, curv: _Curv) -> list:
        m, claim, n = self.model, self.claim, curv.n
        z = curv.z
        lam = vals.get(("cosmological-constant",))
        if claim == "vacuum" and lam is None:
            R = curv.ricci
            return [R[a][b] for a in range(n) for b in range(a, n)]
        g = curv.g
        rhs = [[z] * n for _ in range(n)]
        out = []
        if claim == "electrovacuum":
            A = [vals.get(("potential", x)) or _J(z) for x in m.coords]
            F = [[A[b].d.get(a, z) - A[a].d.get(b, z) for b in range(n)] for a in range(n)]
            gi = curv.ginv
            Fmix = [[sum((F[a][c] * gi[c][b] for c in range(n)), z) for b in range(n)] for a in range(n)]
            F2 = sum((Fmix[a][b] * Fmix[b][a] for a in range(n) for b in range(n)), z)
            for a in range(n):
                for b in range(a, n):
                    v = sum((F[a][c] * Fmix[b][c] for c in range(n)), z)
                    rhs[a][b] = (v + g[a][b] * F2 / 4) * 2
            G = curv.gamma
            for b in range(n):
                tot = z
                for a in range(n):
                    for c in range(n):
                        if gi[a][c].is_zero():
                            continue
                        d = A[b].h.get(_key(c, a), z) - A[a].h.get(_key(c, b), z)
                        for e in range(n):
                            d = d - G[e][c][a] * F[e][b] - G[e][c][b] * F[a][e]
                        tot = tot + gi[a][c] * d
                out.append(tot)
        elif claim in ("perfect-fluid", "dust"):
            u = [(vals.get(("fluid", "velocity", x)) or _J(z)).v for x in m.coords]
            ul = [sum((g[a][b] * u[b] for b in range(n)), z) for a in range(n)]
            eight_pi = 8 * _flint().arb.pi()
            rho8 = vals[("fluid", "density")].v * eight_pi
            p8 = vals[("fluid", "pressure")].v * eight_pi if claim == "perfect-fluid" and (
                ("fluid", "pressure") in vals) else z
            for a in range(n):
                for b in range(a, n):
                    rhs[a][b] = (rho8 + p8) * ul[a] * ul[b] + p8 * g[a][b]
            out.append(sum((ul[a] * u[a] for a in range(n)), z) + 1)
        elif claim == "null-dust":
            k = [(vals.get(("null-dust", "vector", x)) or _J(z)).v for x in m.coords]
            kl = [sum((g[a][b] * k[b] for b in range(n)), z) for a in range(n)]
            rho8 = vals[("null-dust", "density")].v * 8 * _flint().arb.pi()
            for a in range(n):
                for b in range(a, n):
                    rhs[a][b] = rho8 * kl[a] * kl[b]
            out.append(sum((kl[a] * k[a] for a in range(n)), z))
        E = curv.einstein
        L = lam.v if lam is not None else None
        for a in range(n):
            for b in range(a, n):
                v = E[a][b] - rhs[a][b]
                if L is not None:
                    v = v + L * g[a][b]
                out.append(v)
        return out

    def measure(self, screen, vals, point, cand):
        curv = screen.curvature(vals, point, cand)
        return _sq(self.residual(vals, curv))


class _Signature(_Claim):
    name = "signature"

    def measure(self, screen, vals, point, cand):
        f = _flint()
        g = [[x.v for x in row] for row in vals["g"]]
        n = len(g)
        poly = f.arb_mat(n, n, [x for row in g for x in row]).charpoly()
        coeffs = [poly[i] for i in range(n + 1)]
        if coeffs[0].contains(0):
            raise _Undefined("the metric may be degenerate here")
        # the characteristic polynomial of a symmetric matrix has real roots only, so Descartes' rule of
        # signs counts its positive and negative roots exactly; a coefficient that may be zero is skipped
        # (for a real-rooted polynomial its neighbours then have opposite signs: Newton's inequalities)
        kept = [(i, c > 0) for i, c in enumerate(coeffs) if not c.contains(0)]
        pos = sum(1 for (_, a), (_, b) in zip(kept, kept[1:], strict=False) if a != b)
        alt = [s if i % 2 == 0 else not s for i, s in kept]
        neg = sum(1 for a, b in zip(alt, alt[1:], strict=False) if a != b)
        return float(abs(neg - 1) + abs(pos - (n - 1)))


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
        ours = vals["g"]
        n = self.model.n
        return _sq([ours[a][b].v - theirs[a][b].v for a in range(n) for b in range(a, n)])


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
        return _sq(_Curv(vals["g"]).riemann())


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
        c0 = gtt + 1
        if not abs(c0) < tol:
            return 1.0 + min(abs(float(c0.mid())), 1e300)
        if self.mass is None:
            return 0.0
        c1 = c0 * big - 2 * point.values[self.mass]
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
                self._base_curv[key] = _Curv(vals["g"])
            return self._base_curv[key]
        return _Curv(vals["g"])

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


# =========================================================================== edits


def _name(ident: str) -> ast.Name:
    return ast.Name(id=ident, ctx=ast.Load())


def _num(q: Fraction) -> ast.expr:
    if q < 0:
        return ast.UnaryOp(op=ast.USub(), operand=_num(-q))
    if q.denominator == 1:
        return ast.Constant(value=int(q))
    return ast.BinOp(left=ast.Constant(value=q.numerator), op=ast.Div(), right=ast.Constant(value=q.denominator))


def _rebuild(operands: list, ops: list) -> ast.expr:
    node = operands[0]
    for op, x in zip(ops, operands[1:], strict=True):
        node = ast.BinOp(left=node, op=op(), right=x)
    return node


def _negate(node: ast.expr) -> ast.expr:
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        return node.operand
    if isinstance(node, ast.BinOp) and isinstance(node.op, _MULTIPLICATIVE):
        operands, ops = _flatten(node, _MULTIPLICATIVE)
        first = operands[0]
        if isinstance(first, ast.UnaryOp) and isinstance(first.op, ast.USub):
            operands[0] = first.operand
        else:
            operands[0] = ast.UnaryOp(op=ast.USub(), operand=first)
        return _rebuild(operands, ops)
    return ast.UnaryOp(op=ast.USub(), operand=node)


def _times(node: ast.expr, factor: Fraction) -> ast.expr:
    """``node`` multiplied by ``factor`` (an integer k or 1/k), folded into a trailing integer divisor or a
    leading integer coefficient when the result stays an integer (``x/3`` times 3 is ``x``, ``2*x`` times 3
    is ``6*x``), else written as ``k*node`` or ``node/k``."""
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        return ast.UnaryOp(op=ast.USub(), operand=_times(node.operand, factor))
    c = _const_value(node)
    if c is not None:
        return _num(c * factor)
    if isinstance(node, ast.BinOp) and isinstance(node.op, _MULTIPLICATIVE):
        operands, ops = _flatten(node, _MULTIPLICATIVE)
        first, last = operands[0], operands[-1]
        lead = Fraction(first.value) * factor if isinstance(first, ast.Constant) and type(first.value) is int else None
        if lead is not None and lead.denominator == 1:
            if lead == 1 and ops[0] is ast.Mult:
                return _rebuild(operands[1:], ops[1:])
            operands[0] = _num(lead)
            return _rebuild(operands, ops)
        if ops[-1] is ast.Div and isinstance(last, ast.Constant) and type(last.value) is int and last.value:
            new = Fraction(last.value) / factor
            if new.denominator == 1:
                if new == 1:
                    return _rebuild(operands[:-1], ops[:-1])
                operands[-1] = ast.Constant(value=int(new))
                return _rebuild(operands, ops)
        if lead is not None:
            operands[0] = _num(lead)
            return _rebuild(operands, ops)
    if factor.denominator == 1:
        return ast.BinOp(left=ast.Constant(value=int(factor)), op=ast.Mult(), right=node)
    return ast.BinOp(left=node, op=ast.Div(), right=ast.Constant(value=factor.denominator))


def _rename(node: ast.expr, mapping: dict[str, str]) -> ast.expr:
    """A copy of ``node`` with the symbols of ``mapping`` renamed (function names are never in it)."""
    node = copy.deepcopy(node)
    for sub in ast.walk(node):
        if isinstance(sub, ast.Name) and sub.id in mapping:
            sub.id = mapping[sub.id]
    return node


def _short(text: str, width: int = 60) -> str:
    return text if len(text) <= width else text[: width - 3] + "..."


def _replace_at(node, path: tuple, fn):
    """A copy of ``node`` with the subtree at ``path`` replaced by ``fn(subtree)``; only the nodes
    along the path are copied (edits never mutate a node, so the rest is shared)."""
    if not path:
        return fn(node)
    step = path[0]
    new = copy.copy(node)
    if isinstance(step, str):
        setattr(new, step, _replace_at(getattr(node, step), path[1:], fn))
    else:
        items = list(getattr(node, step[0]))
        items[step[1]] = _replace_at(items[step[1]], path[1:], fn)
        setattr(new, step[0], items)
    return new


def _apply(tree: ast.expr, edits: Iterable[_Edit]) -> ast.expr:
    """Apply edits, deepest first, so that an edit of an enclosing node keeps the edits inside it."""
    root = tree
    for e in sorted(edits, key=lambda e: -len(e.path)):
        root = _replace_at(root, e.path, e.fn)
    return root


def _numeric_exponent_candidates(q: Fraction) -> list[Fraction]:
    out = []
    for v in (q + 1, q - 1, -q, q / 2, q * 2):
        if v != q and v != 0 and v not in out:
            out.append(v)
    return out


def _function_names(target: _Target) -> set[str]:
    return set(target.names.functions)


def enumerate_edits(target: _Target, kinds: Iterable[str] = KINDS) -> list[_Edit]:
    """Every single edit of ``target``'s tree of the given kinds (not yet de-duplicated)."""
    kinds = set(kinds)
    key = target.key
    classes = target.symbol_classes
    funcs = _function_names(target)
    by_class: dict[str, list[str]] = {}
    for s, c in classes.items():
        by_class.setdefault(c, []).append(s)
    out: list[_Edit] = []

    def add(path, kind, detail, fn):
        if kind in kinds:
            out.append(_Edit(key, tuple(path), kind, detail, fn))

    def factor_edits(node, path, text, where=""):
        add(path, "factor-2", f"multiply '{text}' by 2{where}", lambda n: _times(n, Fraction(2)))
        add(path, "factor-2", f"divide '{text}' by 2{where}", lambda n: _times(n, Fraction(1, 2)))
        # a dropped or stray 3, 4 or 6 goes with a parameter (Lambda/3, Q**2/4) or a function of the chart, so
        # terms of coordinates and numbers only are left alone: fewer candidates, fewer look-alike metrics
        if "small-factor" in kinds and _with_parameters(node):
            for k in SMALL_FACTORS:
                add(path, "small-factor", f"multiply '{text}' by {k}{where}", lambda n, k=k: _times(n, Fraction(k)))
                add(path, "small-factor", f"divide '{text}' by {k}{where}",
                    lambda n, k=k: _times(n, Fraction(1, k)))

    def term_edits(node, path):
        text = _short(canonical(node))
        add(path, "sign", f"flip the sign of '{text}'", _negate)
        factor_edits(node, path, text)
        exchange_edits(node, path)

    def exchange_edits(node, path):
        if "swap" not in kinds:
            return
        present = sorted(s for s in names_in(node) if classes.get(s) in ("coordinate", "parameter", "definition"))
        text = _short(canonical(node))
        for i, x in enumerate(present):
            for y in present[i + 1:]:
                add(path, "swap", f"exchange {x} and {y} in '{text}'",
                    lambda n, x=x, y=y: _rename(n, {x: y, y: x}))

    diffs = {s for s, c in classes.items() if c == "differential"}

    def _with_parameters(node) -> bool:
        return any(classes.get(x) in ("parameter", "definition") or x in funcs for x in names_in(node))

    def visit(node, path, term: bool, base: bool = False):
        if isinstance(node, ast.BinOp) and isinstance(node.op, _ADDITIVE):
            operands, ops = _flatten(node, _ADDITIVE)
            m = len(operands)
            exchange_edits(node, path)
            where = f" in '{_short(canonical(node), 40)}'" if node is not target.tree else ""
            for k, t in enumerate(operands):
                tpath = list(path) + ["left"] * (m - 1 - k) + (["right"] if k else [])
                bpath = list(path) + ["left"] * (m - 1 - k)  # the BinOp whose right operand is term k
                text = _short(canonical(t))
                if k == 0:
                    add(tpath, "sign", f"flip the sign of '{text}'{where}", _negate)
                    b1 = list(path) + ["left"] * (m - 2)
                    add(b1, "drop-term", f"drop the term '{text}'{where}",
                        lambda n: n.right if isinstance(n.op, ast.Add) else _negate(n.right))
                else:
                    add(bpath, "sign", f"flip the sign of '{text}'{where}",
                        lambda n: ast.BinOp(left=n.left, op=ast.Sub() if isinstance(n.op, ast.Add) else ast.Add(),
                                            right=n.right))
                    add(bpath, "drop-term", f"drop the term '{text}'{where}", lambda n: n.left)
                factor_edits(t, tpath, text, where)
                if isinstance(t, ast.BinOp) and isinstance(t.op, _ADDITIVE) and not names_in(t) & diffs:
                    implicit_power(t, tpath)  # a parenthesised sum inside a sum: a lost power
                exchange_edits(t, tpath)
                visit(t, tpath, False)
            return
        if term:
            term_edits(node, path)
        if isinstance(node, ast.BinOp) and isinstance(node.op, _MULTIPLICATIVE):
            operands, ops = _flatten(node, _MULTIPLICATIVE)
            m = len(operands)
            for k, t in enumerate(operands):
                tpath = list(path) + ["left"] * (m - 1 - k) + (["right"] if k else [])
                if isinstance(t, ast.BinOp) and not isinstance(t.op, ast.Pow) and not names_in(t) & diffs:
                    implicit_power(t, tpath)  # a parenthesised sum or product as a factor: a lost power
                visit(t, tpath, False)
            return
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Pow):
            base, expo = node.left, node.right
            q = _const_value(expo)
            is_diff = isinstance(base, ast.Name) and classes.get(base.id) == "differential"
            if q is not None and not is_diff:
                text = canonical(node)
                for v in _numeric_exponent_candidates(q):
                    new = ast.BinOp(left=base, op=ast.Pow(), right=_num(v)) if v != 1 else base
                    add(path, "exponent", f"'{_short(text)}' -> '{_short(canonical(new))}'",
                        lambda n, v=v: ast.BinOp(left=n.left, op=ast.Pow(), right=_num(v)) if v != 1 else n.left)
            if not is_diff:
                if isinstance(base, ast.Name) and classes.get(base.id) == "parameter" and q == 2:
                    add(path, "parameter-power", f"'{base.id}**2' -> '{base.id}' (one occurrence)", lambda n: n.left)
                if isinstance(base, ast.Name):
                    name_edits(base, list(path) + ["left"], in_power=True)
                else:
                    visit(base, list(path) + ["left"], False, base=True)
                if q is None:
                    visit(expo, list(path) + ["right"], True)
            return
        if isinstance(node, ast.UnaryOp):
            visit(node.operand, list(path) + ["operand"], False)
            return
        if isinstance(node, ast.Call):
            fname = node.func.id
            arg = node.args[0] if node.args else None
            if fname == "sqrt" and isinstance(arg, ast.Name) and classes.get(arg.id) == "parameter":
                add(path, "parameter-power", f"'sqrt({arg.id})' -> '{arg.id}' (one occurrence)", lambda n: n.args[0])
            if fname in _MATH and not base:
                implicit_power(node, path)
            if fname in _TRIG:
                new = _TRIG[fname]
                add(path, "trig", f"{fname} -> {new} in '{_short(canonical(node))}'",
                    lambda n, new=new: ast.Call(func=_name(new), args=n.args, keywords=[]))
            if fname in _MATH:
                apath = list(path) + [("args", 0)]
                if _with_parameters(arg) and _const_value(arg) is None:  # exp(2*H*t), sqrt(Lambda/3): a lost factor
                    factor_edits(arg, apath, _short(canonical(arg)), f" in '{_short(canonical(node), 40)}'")
                visit(node.args[0], apath, False)
            return
        if isinstance(node, ast.Name):
            name_edits(node, path, in_power=False)

    def name_edits(node, path, in_power: bool):
        ident = node.id
        if ident in funcs or ident == "pi":
            return
        cls = classes.get(ident)
        if cls is None:
            return
        for other in by_class.get(cls, ()):
            if other != ident:
                add(path, "swap", f"'{ident}' -> '{other}' (one occurrence)", lambda n, o=other: _name(o))
        if cls == "parameter" and not in_power:
            add(path, "parameter-power", f"'{ident}' -> '{ident}**2' (one occurrence)",
                lambda n: ast.BinOp(left=n, op=ast.Pow(), right=ast.Constant(value=2)))
            add(path, "parameter-power", f"'{ident}' -> 'sqrt({ident})' (one occurrence)",
                lambda n: ast.Call(func=_name("sqrt"), args=[n], keywords=[]))
        if not in_power and cls in ("coordinate", "definition", "parameter"):
            implicit_power(node, path, (Fraction(-1),) if cls == "parameter" else _IMPLICIT)

    def implicit_power(node, path, exponents=None):
        """Raise a factor written without an exponent (exponent 1) to 2, -1 or 1/2."""
        text = _short(canonical(node))
        for v in exponents or _IMPLICIT:
            new = canonical(ast.BinOp(left=node, op=ast.Pow(), right=_num(v)))
            add(path, "exponent", f"'{text}' -> '{_short(new)}'",
                lambda n, v=v: ast.BinOp(left=n, op=ast.Pow(), right=_num(v)))

    visit(target.tree, [], True)
    return out


def _make_candidate(model: _Model, edits: tuple[_Edit, ...]) -> _Cand | None:
    """Apply the edits and print the result; None when unchanged or when two edits hit the same node.

    The edited tree is built only from node types of the whitelist; it is screened as built,
    and a survivor's text is parsed and checked again by :func:`check_candidate` (and the whole
    document by :func:`gravicat.format.metricfile.validate`) before anything else uses it.
    """
    by_key: dict[tuple, list[_Edit]] = {}
    for e in edits:
        by_key.setdefault(e.key, []).append(e)
    trees, texts = {}, {}
    for key, group in by_key.items():
        paths = [e.path for e in group]
        if len(set(paths)) != len(paths):
            return None
        target = model.targets[key]
        try:
            edited = _apply(target.tree, group)
            text = canonical(edited)
        except (RecursionError, ValueError, TypeError, AttributeError):
            return None
        if text == target.text:
            return None
        trees[key], texts[key] = edited, text
    return _Cand(edits, trees, texts)


def _check_candidate(model: _Model, cand: _Cand) -> _Cand | None:
    """The candidate re-parsed through the whitelist parser (canonical texts), or None if refused."""
    trees, texts = {}, {}
    for key, text in cand.texts.items():
        target = model.targets[key]
        try:
            tree = check_expression(text, target.names, source=model.doc.source, field=target.field)
        except CatalogError:
            return None
        trees[key], texts[key] = tree, canonical(tree)
        if texts[key] == target.text:
            return None
    return _Cand(cand.edits, trees, texts)


def _chains(tree: ast.expr, path=()) -> Iterable[tuple[tuple, ast.expr]]:
    """(path, node) of every additive chain top in ``tree``."""
    if isinstance(tree, ast.BinOp) and isinstance(tree.op, _ADDITIVE):
        yield path, tree
        operands, _ = _flatten(tree, _ADDITIVE)
        m = len(operands)
        for k, t in enumerate(operands):
            yield from _chains(t, path + ("left",) * (m - 1 - k) + (("right",) if k else ()))
        return
    for name in ("left", "right", "operand"):
        child = getattr(tree, name, None)
        if isinstance(child, ast.AST):
            yield from _chains(child, path + (name,))
    if isinstance(tree, ast.Call) and tree.func.id in _MATH:
        yield from _chains(tree.args[0], path + (("args", 0),))


def corruptions(doc: MetricDocument, chart: str, kind: str) -> list[tuple[str, str]]:
    """Every distinct slip of ``kind`` in one expression of ``chart``: ``[(field, corrupted text)]``.

    For testing the repair on purpose-made slips (tests and benchmarks). Each slip is undone by an
    edit of the same kind: a sign, a factor of 2, an exponent, sin/cos, a symbol and a parameter
    power are edited as the repair would edit them (the inverse is of the same kind); for
    ``drop-term``, which repairs a stray term, the slip inserts a stray term: an additive term of
    one of the chart's expressions (with its sign) appended to a sum. The texts are checked by
    the whitelist parser; the document may still refuse them (a line element that is not
    quadratic), which :func:`edited_document` reports.
    """
    if kind not in KINDS:
        raise InputError("kind", None, f"unknown edit kind '{kind}' (kinds: {', '.join(KINDS)})")
    model = _Model(doc, chart)
    out: list[tuple[str, str]] = []
    seen: set = set()

    def keep(target, cand):
        cand = _check_candidate(model, cand) if cand is not None else None
        if cand is not None and (target.field, cand.texts[target.key]) not in seen:
            seen.add((target.field, cand.texts[target.key]))
            out.append((target.field, cand.texts[target.key]))

    if kind != "drop-term":
        for target in model.editable:
            for e in enumerate_edits(target, (kind,)):
                keep(target, _make_candidate(model, (e,)))
        return out
    terms, known = [], set()
    for target in model.editable:
        for _path, node in _chains(target.tree):
            operands, ops = _flatten(node, _ADDITIVE)
            for k, t in enumerate(operands):
                neg = k > 0 and ops[k - 1] is ast.Sub
                if (neg, canonical(t)) not in known:
                    known.add((neg, canonical(t)))
                    terms.append((neg, t))
    for target in model.editable:
        for path, _node in _chains(target.tree):
            for neg, t in terms:
                edit = _Edit(target.key, path, kind, "stray term",
                             lambda n, t=t, neg=neg: ast.BinOp(left=n, op=ast.Sub() if neg else ast.Add(), right=t))
                keep(target, _make_candidate(model, (edit,)))
    return out


def edited_document(doc: MetricDocument, chart: str, texts: Mapping[str, str]) -> MetricDocument:
    """A copy of ``doc`` with the given fields (dotted paths of one chart) replaced, validated again."""
    data = copy.deepcopy(doc.data)
    c = data["charts"][chart]
    base = f"charts.{chart}."
    for fld, text in texts.items():
        rest = fld[len(base):]
        m = re.match(r"^metric\[(\d+)\]\[(\d+)\]$", rest)
        if m:
            i, j = int(m.group(1)), int(m.group(2))
            if c["metric"][j][i] == c["metric"][i][j]:
                c["metric"][j][i] = text
            c["metric"][i][j] = text
            continue
        parts = rest.split(".")
        node = c
        for p in parts[:-1]:
            node = node[p]
        node[parts[-1]] = text
    return validate(data, doc.source)


# =========================================================================== parallel map over forked workers

_STATE: dict[str, Any] = {}


def _pool_map(fn, items: list, jobs: int) -> list:
    if jobs <= 1 or len(items) <= 1:
        return [fn(x) for x in items]
    from concurrent.futures import ProcessPoolExecutor

    try:
        ctx = multiprocessing.get_context("fork")
    except ValueError:  # pragma: no cover - platforms without fork
        return [fn(x) for x in items]
    with ProcessPoolExecutor(max_workers=min(jobs, len(items)), mp_context=ctx) as pool:
        return list(pool.map(fn, items))


def _screen_chunk(indices: list[int]) -> list[tuple[int, bool, float, tuple | None] | None]:
    screen: _Screen = _STATE["screen"]
    cands: list[_Cand] = _STATE["cands"]
    deadline: float = _STATE["deadline"]
    out = []
    for i in indices:
        if time.monotonic() > deadline:
            out.append(None)
            continue
        v = screen.judge(cands[i])
        out.append((i, v.ok, v.score, v.fingerprint))
    return out


def _screen_all(screen: _Screen, cands: list[_Cand], jobs: int, deadline: float):
    _STATE.update(screen=screen, cands=cands, deadline=deadline)
    if not cands:
        return []
    if jobs <= 1:
        return _screen_chunk(list(range(len(cands))))
    size = max(4, len(cands) // (jobs * 6) + 1)
    # interleave so that every chunk gets a mix of cheap and expensive candidates
    chunks = [list(range(k, len(cands), (len(cands) + size - 1) // size)) for k in
              range((len(cands) + size - 1) // size)]
    results = _pool_map(_screen_chunk, chunks, jobs)
    flat: list = [None] * len(cands)
    for chunk, res in zip(chunks, results, strict=True):
        for i, r in zip(chunk, res, strict=True):
            flat[i] = r
    return flat


# =========================================================================== verification (baseline and proof)


def _check_chart(doc: MetricDocument, chart: str, verifiers: list, docs: Mapping[str, MetricDocument],
                 budget: float, seed: int, want_geometry: bool, limited: Iterable = ()):
    """Run ``verifiers`` on the chart, then ``limited`` ones under a hard time limit of ``budget`` seconds."""
    from gravicat.engine.geometry import Geometry
    from gravicat.engine.runner import make_resolver, run_verifier
    from gravicat.format.metricfile import build_chart

    spec = build_chart(doc, chart, make_resolver({**docs, doc.id: doc}))
    geometry = Geometry(spec, budget=budget, seed=seed)
    results = []
    for v in verifiers:
        results.extend(run_verifier(v, geometry))
    results.extend(_run_limited(list(limited), geometry, budget))
    return results, (geometry if want_geometry else None)


def _run_limited(verifiers: list, geometry, seconds: float) -> list[CheckResult]:
    """Run verifiers in a forked child with a hard time limit for all of them together.

    The repair's own checks (:data:`REPAIR_VERIFIERS`) honour the proof budget; the others
    (observers, invariants, transforms, third-party verifiers) may compute closed forms of a
    mistyped metric for minutes, so a verifier not finished in time is reported ``inconclusive``
    (it did not pass, and a repair is judged as if it had not run before).
    """
    if not verifiers:
        return []
    from gravicat.engine.fork import run_forked
    from gravicat.engine.runner import result_from_json, run_verifier

    def task(emit):
        for v in verifiers:
            emit([r.to_json() | {"data": r.data} for r in run_verifier(v, geometry)])

    outcome = run_forked(task, wall_seconds=seconds)
    out: list[CheckResult] = [result_from_json(d) for batch in outcome.items for d in batch]
    done = len(outcome.items)
    for v in verifiers[done:]:
        out.append(CheckResult(check=v.name, status=Status.INCONCLUSIVE, method=Method.NONE,
                               detail=f"not finished within {seconds:g} s (the time limit repair gives each "
                                      "verifier outside structure, signature, field-equations and limits)",
                               verifier=v.name, version=v.version))
    return out


def _call_limited(fn: Callable[[], Any], seconds: float):
    """``fn()`` in a forked child killed after ``seconds``: (True, value) or (False, reason)."""
    from gravicat.engine.fork import run_forked

    out = run_forked(lambda emit: fn(), wall_seconds=seconds)
    if out.finished:
        return True, out.value
    if out.error is not None:
        return False, out.error
    if out.limit is not None:
        return False, f"not finished within {seconds:g} s"
    return False, "the proof process ended without a result"


def _proof_task(i: int) -> dict:
    """Check one survivor, in a child process with a hard time limit (a wrong metric can be slow)."""
    limit = _STATE["proof_budget"] * (len(_STATE["verifiers"]) + 2) + 10
    ok, out = _call_limited(lambda: _proof_body(i), limit)
    return out if ok else {"i": i, "error": out}


def _proof_body(i: int) -> dict:
    job = _STATE["proofs"][i]
    try:
        doc = edited_document(job["doc"], job["chart"], job["texts"])
        others = [v for v in _STATE["others"] if v.name in job["others"]]
        results, _ = _check_chart(doc, job["chart"], _STATE["verifiers"], _STATE["docs"],
                                  _STATE["proof_budget"], _STATE["seed"], False, others)
    except CatalogError as exc:
        return {"i": i, "error": str(exc)}
    return {"i": i, "data": doc.data, "results": [r.to_json() | {"data": r.data} for r in results]}


def _baseline_task(chart: str) -> dict:
    keep = _STATE.get("in_process", False)
    results, geometry = _check_chart(_STATE["doc"], chart, _STATE["verifiers"], _STATE["docs"],
                                     _STATE["proof_budget"], _STATE["seed"], keep)
    if keep:
        _STATE.setdefault("geometries", {})[chart] = geometry
    return {"chart": chart, "results": [r.to_json() | {"data": r.data} for r in results]}


def _result_from_json(d: dict) -> CheckResult:
    from gravicat.engine.runner import result_from_json

    return result_from_json(d)


# =========================================================================== the search


def _repairable(check: str) -> bool:
    return check in ("field-equations", "signature") or check.startswith("limits:")


def _sample_points(model: _Model, geometry, k: int, seed: int) -> list[_PointEnv]:
    import mpmath

    f = _flint()
    pts = list(geometry.sample_points()[:k]) if geometry is not None else []
    tries = 0
    while geometry is not None and len(pts) < k and tries < 3 * k:
        tries += 1
        pd = geometry.draw_point(need_inverse=False)
        if pd is None:
            break
        pts.append(pd)
    out = []
    for i, pd in enumerate(pts):
        values = {}
        for sym, num in pd.sample.numeric.items():
            x = mpmath.mpf(num)
            man, exp = x.man_exp  # |x| = man * 2**exp exactly (the sign is not in man_exp)
            values[str(sym)] = f.arb(-int(man) if x < 0 else int(man)) * f.arb(2) ** int(exp)
        if all(x in values for x in model.coords) and all(p in values for p in model.params):
            out.append(_PointEnv(model, values, i, seed))
    return out


def _counterexample_points(model: _Model, failed: list[CheckResult], start: int, seed: int) -> list[_PointEnv]:
    """The points where the failing checks found their counterexamples, as extra screening points.

    They are the most telling points (a signature that degenerates at theta = pi/2 is only seen
    there). A point is used when it gives every coordinate and parameter a constant value.
    """
    out: list[_PointEnv] = []
    seen: set = set()
    constants = Names()
    for r in failed:
        point = (r.counterexample or {}).get("point") or {}
        if not all(x in point for x in (*model.coords, *model.params)):
            continue
        key = tuple(sorted((k, str(point[k])) for k in (*model.coords, *model.params)))
        if key in seen:
            continue
        seen.add(key)
        try:
            with _Prec(_PREC):
                ev = _Evaluator({}, {}, lambda *_: None, 0)
                values = {k: ev.ev(check_expression(str(point[k]), constants, source="counterexample", field=k)).v
                          for k in (*model.coords, *model.params)}
        except (CatalogError, _Undefined, ZeroDivisionError, ValueError):
            continue
        out.append(_PointEnv(model, values, start + len(out), seed))
    return out


def _claims(model: _Model, baseline: list[CheckResult], docs: Mapping[str, MetricDocument]) -> tuple[list, list]:
    """(claims to screen, names of the baseline checks that could not be screened)."""
    status = {r.check: r.status.value for r in baseline}
    failing, passing = [], []
    unscreened = []

    def put(claim, st):
        (failing if st == "fail" else passing).append(claim)

    st = status.get("field-equations")
    if st in ("pass", "fail") and model.claim != "none":
        put(_FieldEquations(model), st)
    st = status.get("signature")
    if st in ("pass", "fail"):
        put(_Signature(), st)
    data = model.doc.data
    for lname, lim in data["limits"].items():
        if lim["chart"] != model.chart:
            continue
        st = status.get(f"limits:{lname}")
        if st not in ("pass", "fail"):
            continue
        entry, _, tchart = lim["reduces-to"].partition(":")
        tdoc = model.doc if entry == model.doc.id else docs.get(entry)
        claim = None
        if tdoc is not None and tchart in tdoc.data["charts"]:
            target = _Model(tdoc, tchart)
            pnames = Names(symbols=frozenset(model.params))
            cnames = Names(symbols=frozenset(model.params) | frozenset(model.coords))
            if target.n == model.n and set(target.params) <= set(model.params) and not target.functions:
                claim = _Limit(lname, model,
                               {p: check_expression(t, pnames, source="", field="") for p, t in lim["set"].items()},
                               {x: check_expression(t, cnames, source="", field="")
                                for x, t in lim["coordinates"].items()}, target)
        if claim is None:
            unscreened.append(f"limits:{lname}")
            if st == "fail":
                continue
        else:
            put(claim, st)
    flat_checks = [r.check for r in baseline if r.check.startswith("limits:flat-when[")]
    pnames = Names(symbols=frozenset(model.params))
    for i, (name, subs) in enumerate(zip(flat_checks, data["flat-when"], strict=False)):
        st = status.get(name)
        if st in ("pass", "fail"):
            put(_Flat(name, i, {p: check_expression(t, pnames, source="", field="") for p, t in subs.items()}), st)
    st = status.get("limits:asymptotically-flat")
    if st in ("pass", "fail"):
        radial = next((x for x in RADIAL if x in model.coords), None)
        mass = next((p for p in MASS if p in model.params), None)
        if radial is not None:
            put(_Asymptotic(radial, mass), st)
    order = {"_FieldEquations": 0, "_Signature": 1, "_Limit": 2, "_Flat": 3, "_Asymptotic": 4}
    passing.sort(key=lambda c: (c.__class__ is not _Signature, order[type(c).__name__]))
    return failing + passing, unscreened


def _edit_rank(cand: _Cand) -> tuple:
    return (len(cand.edits), sum(KINDS.index(e.kind) for e in cand.edits))


def find_repairs(
    doc: MetricDocument,
    verifiers: Mapping[str, Any] | Iterable[Any],
    *,
    docs: Mapping[str, MetricDocument] | None = None,
    charts: Iterable[str] | None = None,
    max_edits: int = 1,
    budget: float = DEFAULT_BUDGET,
    proof_budget: float = PROOF_BUDGET,
    jobs: int = 1,
    seed: int = 0,
    points: int = DEFAULT_POINTS,
    kinds: Iterable[str] = KINDS,
) -> RepairReport:
    """Look for single (or, with ``max_edits=2``, pairs of) edits that repair the failing checks of ``doc``.

    ``verifiers``: the registered verifiers (name -> verifier). Those named in
    :data:`REPAIR_VERIFIERS` decide which checks fail and prove the survivors; the others
    (observers, invariants, transforms...) run on a failing chart and on each survivor under a
    hard time limit of ``proof_budget`` seconds, so that a repair never breaks a check that passed.
    ``docs``: other documents by id, for limits that name another entry (the bundled catalogue).
    ``budget``: seconds of wall time for screening the candidates of each chart;
    ``proof_budget``: seconds per symbolic proof (as ``check --budget``). ``jobs``: forked worker
    processes for the baseline, the screening and the proofs. Not thread-safe (module state is
    shared with the forked workers).
    """
    start = time.monotonic()
    if max_edits not in (1, 2):
        raise InputError("--max-edits", None, f"{max_edits} is not 1 or 2")
    kinds = tuple(kinds)
    for k in kinds:
        if k not in KINDS:
            raise InputError("kinds", None, f"unknown edit kind '{k}' (kinds: {', '.join(KINDS)})")
    pool = list(verifiers.values() if isinstance(verifiers, Mapping) else verifiers)
    chosen = [v for v in pool if v.name in REPAIR_VERIFIERS]
    others = [v for v in pool if v.name not in REPAIR_VERIFIERS]
    if not chosen:
        raise InputError("plugins", None, "none of the verifiers repair needs is loaded "
                         f"({', '.join(REPAIR_VERIFIERS)}): is gravicat installed (pip install -e .)?")
    docs = dict(docs or {})
    names = list(charts) if charts else doc.chart_names
    for c in names:
        if c not in doc.chart_names:
            raise InputError(doc.source, f"charts.{c}", f"no such chart (charts: {', '.join(doc.chart_names)})")
    from gravicat.engine.runner import make_resolver
    from gravicat.format.metricfile import build_chart

    in_process = jobs <= 1 or len(names) <= 1
    if not in_process:
        resolve = make_resolver({**docs, doc.id: doc})
        for c in names:
            build_chart(doc, c, resolve)  # bad input (a line element that is not a quadratic form...) stops here
    _STATE.clear()
    _STATE.update(doc=doc, verifiers=chosen, all_verifiers=pool, others=others, docs=docs, proof_budget=proof_budget,
                  seed=seed, in_process=in_process)
    # 1. baseline
    outs = _pool_map(_baseline_task, names, 1 if in_process else jobs)
    report = RepairReport(metric=doc.id, charts=[])
    for out in outs:
        report.charts.append(ChartRepair(chart=out["chart"],
                                         baseline=[_result_from_json(r) for r in out["results"]]))
    for cr in report.charts:
        cr.failing = [r.check for r in cr.baseline if r.status == Status.FAIL and _repairable(r.check)]
        if cr.failing:
            t0 = time.monotonic()
            _repair_chart(doc, cr, chosen, docs, max_edits, budget, proof_budget, jobs, seed, points, kinds)
            cr.seconds = time.monotonic() - t0
    report.seconds = time.monotonic() - start
    return report


def _repair_chart(doc, cr: ChartRepair, verifiers, docs, max_edits, budget, proof_budget, jobs, seed, points,
                  kinds) -> None:
    # a claim without its matter table ("electrovacuum needs a potential") is not a slip in an expression
    structural = [r for r in cr.baseline if r.check == "field-equations" and r.check in cr.failing
                  and r.method == Method.NONE]
    if structural:
        cr.note = (f"{structural[0].check} fails for a structural reason ({structural[0].detail}); "
                   "that is not a copying slip an edit of one expression can repair")
        return
    model = _Model(doc, cr.chart)
    claims, unscreened = _claims(model, cr.baseline, docs)
    if not any(c.name in cr.failing for c in claims):
        cr.note = f"the failing check(s) {', '.join(cr.failing)} cannot be screened by evaluation at points"
        return
    geometry = _STATE.get("geometries", {}).get(cr.chart)
    if geometry is None:
        _, geometry = _check_chart(doc, cr.chart, [], docs, proof_budget, seed, True)
    # the other verifiers (observers, invariants, transforms, third-party ones) complete the picture of
    # what passed before: a repair may not break any of them
    cr.baseline.extend(_run_limited(list(_STATE.get("others", ())), geometry, min(proof_budget, OTHERS_LIMIT)))
    pts = _sample_points(model, geometry, points, seed)
    pts += _counterexample_points(model, [r for r in cr.baseline if r.check in cr.failing], len(pts), seed)
    cr.points = len(pts)
    if not pts:
        cr.note = "no valid sample point could be drawn from the chart's domain"
        return
    screen = _Screen(model, pts, claims, set(cr.failing))
    screen.prepare()
    original_fp = None
    try:
        with _Prec(_PREC):
            original_fp = screen.fingerprint(None)
    except (_Undefined, _NotQuadratic, ZeroDivisionError):
        pass
    # 2. single edits
    deadline = time.monotonic() + budget  # the screening budget of this chart
    singles: list[_Cand] = []
    seen: set = set()
    for target in model.editable:
        for e in enumerate_edits(target, kinds):
            cand = _make_candidate(model, (e,))
            if cand is None:
                continue
            key = (target.key, cand.texts[target.key])
            if key in seen:
                continue
            seen.add(key)
            singles.append(cand)
    singles.sort(key=_edit_rank)
    cr.candidates = len(singles)
    results = _screen_all(screen, singles, jobs, deadline)
    cr.screened = sum(1 for r in results if r is not None)
    cr.exhausted = cr.screened < len(singles)
    survivors: list[_Cand] = []
    prints: dict = {}
    if original_fp is not None:
        prints[original_fp] = None
    for cand, r in zip(singles, results, strict=True):
        if r is not None and r[1] and r[3] not in prints:
            prints[r[3]] = cand
            survivors.append(cand)
    # 3. pairs, from the single edits that reduce the residual most
    if max_edits == 2 and not cr.exhausted and time.monotonic() < deadline:
        scored = sorted((r[2], i) for i, r in enumerate(results) if r is not None and not r[1] and math.isfinite(r[2]))
        top = [singles[i] for _, i in scored[:PAIR_POOL]]
        pairs: list[_Cand] = []
        pair_seen: set = set()
        for m in range(1, len(top)):
            for i in range(m):
                a, b = top[i].edits[0], top[m].edits[0]
                if a.key == b.key and a.path == b.path:
                    continue
                cand = _make_candidate(model, (a, b))
                if cand is None:
                    continue
                key = tuple(sorted(cand.texts.items()))
                if key in pair_seen or len(cand.trees) == 1 and (next(iter(cand.trees)), next(iter(
                        cand.texts.values()))) in seen:
                    continue
                pair_seen.add(key)
                pairs.append(cand)
        presults = _screen_all(screen, pairs, jobs, deadline)
        cr.pairs = sum(1 for r in presults if r is not None)
        cr.screened += cr.pairs
        cr.exhausted = cr.pairs < len(pairs)
        for cand, r in zip(pairs, presults, strict=True):
            if r is not None and r[1] and r[3] not in prints:
                prints[r[3]] = cand
                survivors.append(cand)
    cr.passed_screen = len(survivors)
    if unscreened:
        cr.note = f"not screened (checked in the proof only): {', '.join(unscreened)}"
    # 4. proof of the survivors, best ranked first (each re-parsed by the whitelist parser first)
    survivors = [c for c in (_check_candidate(model, s) for s in sorted(survivors, key=_edit_rank)) if c is not None]
    todo = survivors[:MAX_PROOFS]
    if len(survivors) > MAX_PROOFS:
        cr.note = (cr.note + "; " if cr.note else "") + (f"{len(survivors) - MAX_PROOFS} further screened "
                                                         f"candidates were not proved (limit {MAX_PROOFS})")
    # the other verifiers run again only where they decided something before (pass or fail)
    decided = {r.verifier for r in cr.baseline if r.status in (Status.PASS, Status.FAIL)}
    rerun = [v.name for v in _STATE.get("others", ()) if v.name in decided]
    skipped = [v.name for v in _STATE.get("others", ()) if v.name not in decided and any(
        r.verifier == v.name and r.status == Status.INCONCLUSIVE for r in cr.baseline)]
    if skipped and todo:
        cr.note = (cr.note + "; " if cr.note else "") + (f"not run again on the repaired chart "
                                                         f"(inconclusive before): {', '.join(skipped)}")
    jobs_data = []
    for cand in todo:
        jobs_data.append({"doc": doc, "chart": cr.chart, "others": rerun,
                          "texts": {model.targets[k].field: t for k, t in cand.texts.items()}})
    _STATE.update(proofs=jobs_data)
    outs = _pool_map(_proof_task, list(range(len(todo))), jobs)
    cr.proved = len(outs)
    failed_before = {r.check for r in cr.baseline if r.status in (Status.FAIL, Status.ERROR)}
    for cand, out in zip(todo, outs, strict=True):
        if "error" in out:
            continue
        results = [_result_from_json(r) for r in out["results"]]
        after = {r.check: r.status for r in results}
        if any(c not in after for c in cr.failing):
            continue  # a failing check must have run again (and, below, no longer fail)
        bad = {c for c, s in after.items() if s in (Status.FAIL, Status.ERROR)}
        if bad & set(cr.failing) or bad - failed_before:
            continue  # still failing, or breaks a check that did not fail before
        # the proof status: of the checks that failed (and are repaired) or passed before
        before = {r.check: r.status for r in cr.baseline}
        judged = [s for c, s in after.items() if c in cr.failing or before.get(c) == Status.PASS]
        worst = "inconclusive" if Status.INCONCLUSIVE in judged else "pass"
        repaired = MetricDocument(out["data"], doc.source)
        edits = []
        for e in cand.edits:
            t = model.targets[e.key]
            edits.append(EditInfo(field=t.field, kind=e.kind, detail=e.detail, original=t.text,
                                  suggested=cand.texts[e.key]))
        doubt = ""
        invariants = sorted(c for c in bad if c.startswith("invariants:"))
        if invariants and _flat_at_points(screen, cand):
            doubt = (f"the repaired chart is flat (Riemann = 0 at every sample point) while the declared "
                     f"{', '.join(invariants)} still fails: probably not the slip")
        cr.suggestions.append(Suggestion(chart=cr.chart, edits=edits, status=worst, checks=results,
                                         document=repaired, still_failing=sorted(bad), doubt=doubt))
    cr.suggestions.sort(key=suggestion_rank)
    doubtful = sum(1 for s in cr.suggestions if s.doubt)
    if doubtful:
        cr.note = (cr.note + "; " if cr.note else "") + (
            f"{doubtful} doubtful suggestion(s) make the chart flat while a declared invariant still fails")


def suggestion_rank(s: Suggestion) -> tuple:
    """Sort key of the suggestions of a chart: doubtful ones last; fewer edits; then the repairs that also
    mend other checks that failed (a transform, an observer, a published invariant); then proved before
    sampled; then how common the slip is (the order of :data:`KINDS`)."""
    return (bool(s.doubt), s.size, len(s.still_failing), s.status != "pass", sum(KINDS.index(e.kind) for e in s.edits))


def _flat_at_points(screen: _Screen, cand: _Cand) -> bool:
    """Is the candidate's Riemann tensor zero (every ball contains 0) at every screening point it is defined at?"""
    seen = 0
    with _Prec(_PREC):
        for p in screen.points:
            try:
                vals = screen.model.evaluate(p, cand.trees, screen.base("base", p, 2), 2)
                riemann = _Curv(vals["g"]).riemann()
            except (_Undefined, _NotQuadratic, ZeroDivisionError, ValueError):
                continue
            if not all(x.contains(0) for x in riemann):
                return False
            seen += 1
    return seen > 0


# =========================================================================== writing a repair back


@dataclass
class Written:
    """Where a repair was written: ``mode`` is ``toml-in-place`` or ``json-beside``."""

    path: Path
    mode: str
    note: str = ""


def _compact(text: str) -> str:
    """The canonical text in the usual hand-written style (no spaces around * / **)."""
    return text.replace(" ** ", "**").replace(" * ", "*").replace(" / ", "/")


def _chart_region(text: str, chart: str) -> tuple[int, int] | None:
    """Character range of the chart's tables in a TOML file: [charts.NAME] and its sub-tables."""
    headers = [(m.start(), m.group(1).strip()) for m in re.finditer(r"(?m)^[ \t]*\[+([^\]\n]+)\]+[ \t]*(?:#.*)?$",
                                                                   text)]
    start = end = None
    own = (f"charts.{chart}", f'charts."{chart}"')
    for pos, name in headers:
        mine = any(name == o or name.startswith(o + ".") for o in own)
        if mine and start is None:
            start = pos
        elif start is not None and not mine:
            end = pos
            break
    if start is None:
        return None
    return start, len(text) if end is None else end


def _raw_field(raw: dict, chart: str, fld: str):
    base = f"charts.{chart}."
    rest = fld[len(base):]
    node = raw.get("charts", {}).get(chart, {})
    m = re.match(r"^metric\[(\d+)\]\[(\d+)\]$", rest)
    if m:
        try:
            return [node["metric"][int(m.group(1))][int(m.group(2))],
                    node["metric"][int(m.group(2))][int(m.group(1))]]
        except (KeyError, IndexError, TypeError):
            return None
    for p in rest.split("."):
        if not isinstance(node, dict) or p not in node:
            return None
        node = node[p]
    return [node]


def _is_diagonal(fld: str) -> bool:
    m = re.search(r"metric\[(\d+)\]\[(\d+)\]$", fld)
    return bool(m) and m.group(1) == m.group(2)


def _toml_in_place(path: Path, text: str, suggestion: Suggestion) -> str | None:
    """The file text with each edited expression string replaced where it appears verbatim, else None."""
    import tomllib

    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        return None
    region = _chart_region(text, suggestion.chart)
    if region is None:
        return None
    lo, hi = region
    part = text[lo:hi]
    for e in suggestion.edits:
        values = _raw_field(raw, suggestion.chart, e.field)
        if not values or not all(isinstance(v, str) for v in values) or len(set(values)) != 1:
            return None
        old = values[0]
        if any(ch in old for ch in "\"'\\\n"):
            return None
        new = _compact(e.suggested)
        expected = 1 if len(values) == 1 or _is_diagonal(e.field) else 2
        hits = sum(len(re.findall(re.escape(q + old + q), part)) for q in ('"', "'"))
        if hits != expected:
            return None
        for q in ('"', "'"):
            part = part.replace(q + old + q, q + new + q)
    return text[:lo] + part + text[hi:]


def _atomic_write(path: Path, content: str) -> None:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=str(path.parent))
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(content)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_suggestion(path: Path, suggestion: Suggestion) -> Written:
    """Write a repair: in place in a TOML file when every edited string appears there verbatim
    (the rest of the file, comments included, is kept), else the canonical JSON beside it
    (``NAME.repaired.json``). The written file is read back and must give the repaired revision hash."""
    from gravicat.format.metricfile import load_file

    path = Path(path)
    target_hash = suggestion.document.hash
    if path.suffix.lower() == ".toml":
        try:
            original = path.read_text(encoding="utf-8")
        except OSError as exc:
            raise InputError(str(path), None, f"cannot read file ({exc.strerror or exc})") from None
        new_text = _toml_in_place(path, original, suggestion)
        if new_text is not None:
            _atomic_write(path, new_text)
            try:
                ok = load_file(path).hash == target_hash
            except CatalogError:
                ok = False
            if ok:
                return Written(path, "toml-in-place")
            _atomic_write(path, original)  # the edit did not land as intended: put the file back
    beside = path.with_name(f"{path.stem}.repaired.json")
    _atomic_write(beside, canonical_json(suggestion.document.data, indent=2) + "\n")
    note = (f"{path.name} was left unchanged: the edited expression does not appear verbatim there; "
            f"the repaired canonical form is in {beside.name}")
    return Written(beside, "json-beside", note)
