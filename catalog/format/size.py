"""Size estimates of a chart at parse time: how big its components become once every definition is
substituted, so that a small file that would expand into gigabytes is refused before any work.

Three measures, each with a stated limit (docs/limits.md; every bundled entry passes them with a wide
margin, a test prints the largest of each):

* ``coordinates``: the number of coordinates of a chart (:data:`MAX_COORDINATES`);
* ``degree``: an upper estimate of the total degree of each component as a rational function of
  every name it uses (coordinates, parameters, differentials, declared functions), definitions
  substituted (:data:`MAX_DEGREE`). A sum has the larger degree of its terms, a product or quotient
  the sum, ``u**n`` ``|numerator of n|`` times the degree of ``u``, a function of ``u`` the degree of
  ``u`` (its derivatives carry ``u``'s). So ``a2 = a1**1000`` and ``a3 = a2**1000`` give ``a3`` a
  degree of a million times that of ``a1``;
* ``terms``: an estimate of the number of terms of each component once expanded (:data:`MAX_TERMS`):
  a sum adds, a product multiplies, ``u**n`` gives the number of monomials of an ``n``-th power of a
  sum of ``terms(u)`` terms, never more than the monomials of its degree in the names it uses.

The estimates work on the checked syntax tree only (no sympy, no expansion): a few microseconds
per node, with floating-point numbers that saturate instead of growing.
"""

from __future__ import annotations

import ast
import math
from collections.abc import Mapping
from dataclasses import dataclass

from gravicat.errors import InputError

MAX_COORDINATES = 11
MAX_DEGREE = 400
MAX_TERMS = 100_000

_HUGE = 1e300


@dataclass(frozen=True)
class Size:
    """Estimated total degree, number of expanded terms, and the names a component depends on."""

    degree: float = 0.0
    terms: float = 1.0
    names: frozenset[str] = frozenset()
    inner_degree: float = 0.0  # the largest degree / term count of an argument of a function inside
    inner_terms: float = 1.0

    @property
    def worst_degree(self) -> float:
        return max(self.degree, self.inner_degree)

    @property
    def worst_terms(self) -> float:
        return max(self.terms, self.inner_terms)

    def within(self, degree: float, terms: float, names: frozenset[str], *others: Size) -> Size:
        return Size(degree, terms, names, max((o.inner_degree for o in others), default=0.0),
                    max((o.inner_terms for o in others), default=1.0))


def _cap(x: float) -> float:
    return _HUGE if not math.isfinite(x) or x > _HUGE else x


def _monomials(degree: float, variables: int) -> float:
    """The number of monomials of total degree at most ``degree`` in ``variables`` names."""
    if variables == 0 or degree <= 0:
        return 1.0
    d = min(degree, _HUGE)
    if d > 1e12:
        return _HUGE
    return _exp(math.lgamma(d + variables + 1) - math.lgamma(d + 1) - math.lgamma(variables + 1))


def _power_terms(terms: float, n: int) -> float:
    """Monomials of ``(t_1 + ... + t_k)**n``: ``C(n + k - 1, k - 1)``."""
    if n <= 1 or terms <= 1:
        return terms if n >= 1 else 1.0
    k = min(terms, _HUGE)
    if k > 1e12:
        return _HUGE
    return _exp(math.lgamma(n + k) - math.lgamma(n + 1) - math.lgamma(k))


def _exp(log: float) -> float:
    return _HUGE if log > 690 else _cap(math.exp(log))


def _exponent(node: ast.expr) -> float | None:
    """The numerator of a plain number exponent (``2``, ``-3``, ``1/2``, ``-(3/2)``), None otherwise."""
    sign = 1
    while isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        sign = -sign if isinstance(node.op, ast.USub) else sign
        node = node.operand
    if isinstance(node, ast.Constant) and isinstance(node.value, int) and not isinstance(node.value, bool):
        return float(abs(node.value))
    if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Div):
        top = _exponent(node.left)
        return top
    return None


def measure(tree: ast.AST, known: Mapping[str, Size]) -> Size:
    """The :class:`Size` of a checked expression tree; ``known`` gives the sizes of definitions
    (any other name has degree 1 and one term; ``pi`` and numbers have degree 0)."""

    def walk(node: ast.AST) -> Size:
        if isinstance(node, ast.Constant):
            return Size()
        if isinstance(node, ast.Name):
            if node.id == "pi":
                return Size()
            if node.id in known:
                return known[node.id]
            return Size(1.0, 1.0, frozenset({node.id}))
        if isinstance(node, ast.UnaryOp):
            return walk(node.operand)
        if isinstance(node, ast.BinOp):
            if isinstance(node.op, ast.Pow):
                base = walk(node.left)
                n = _exponent(node.right)
                if n is None:  # a symbolic exponent: a function of both
                    exp_ = walk(node.right)
                    return base.within(_cap(base.degree + exp_.degree), _cap(base.terms * exp_.terms),
                                       base.names | exp_.names, base, exp_)
                degree = _cap(base.degree * max(1.0, min(n, _HUGE)))
                terms = min(_power_terms(base.terms, int(min(n, 1e9))), _monomials(degree, len(base.names)))
                return base.within(degree, max(1.0, terms), base.names, base)
            left, right = walk(node.left), walk(node.right)
            names = left.names | right.names
            if isinstance(node.op, (ast.Add, ast.Sub)):
                terms = min(_cap(left.terms + right.terms), _monomials(max(left.degree, right.degree), len(names)))
                return left.within(max(left.degree, right.degree), max(1.0, terms), names, left, right)
            degree = _cap(left.degree + right.degree)
            terms = min(_cap(left.terms * right.terms), _monomials(degree, len(names)))
            return left.within(degree, max(1.0, terms), names, left, right)
        if isinstance(node, ast.Call):
            # a function of u is one new generator (degree 1, one term) of the exact field; u itself
            # (which its derivatives carry) is kept as the inner size
            fname = getattr(node.func, "id", "?")
            parts = [walk(a) for a in node.args if not isinstance(a, ast.Constant)]
            names = frozenset({fname}).union(*(p.names for p in parts))
            inner_degree = max((p.worst_degree for p in parts), default=0.0)
            inner_terms = max((p.worst_terms for p in parts), default=1.0)
            return Size(1.0, 1.0, names, inner_degree, inner_terms)
        return Size()

    return walk(tree)


def _parse(text: str) -> ast.expr:
    return ast.parse(text, mode="eval").body


def _shown(x: float) -> str:
    if x >= 1e6:
        exponent = math.floor(math.log10(x))
        return f"about 10**{exponent}" if x < _HUGE else "beyond 10**300"
    return f"{x:g}"


def chart_sizes(chart: Mapping) -> dict[str, Size]:
    """Field name (relative to the chart) -> :class:`Size`, for every expression of a validated
    (canonical) chart: definitions, line element or metric components, and the expressions of its
    fluid, null dust, observers, transforms, potential and invariants."""
    known: dict[str, Size] = {}
    out: dict[str, Size] = {}
    for name, text in chart.get("define", {}).items():
        known[name] = out[f"define.{name}"] = measure(_parse(text), known)

    def add(field: str, text: str) -> None:
        out[field] = measure(_parse(text), known)

    if "line-element" in chart:
        add("line-element", chart["line-element"])
    for i, row in enumerate(chart.get("metric", [])):
        for j, text in enumerate(row):
            add(f"metric[{i}][{j}]", text)
    for key in ("potential",):
        for c, text in chart.get(key, {}).items():
            add(f"{key}.{c}", text)
    for key in ("fluid", "null-dust"):
        for part, value in chart.get(key, {}).items():
            if isinstance(value, dict):
                for c, text in value.items():
                    add(f"{key}.{part}.{c}", text)
            else:
                add(f"{key}.{part}", value)
    for group in ("observers", "transforms"):
        for other, mapping in chart.get(group, {}).items():
            for c, text in mapping.items():
                add(f"{group}.{other}.{c}", text)
    for iname, inv in chart.get("invariants", {}).items():
        add(f"invariants.{iname}.value", inv["value"])
    return out


def check_chart_size(source: str, base: str, chart: Mapping) -> None:
    """Refuse a chart whose estimated size exceeds a limit, naming the field (``base`` is
    ``charts.NAME``). Raises :class:`gravicat.errors.InputError`."""
    n = len(chart["coordinates"])
    if n > MAX_COORDINATES:
        raise InputError(source, f"{base}.coordinates",
                         f"{n} coordinates exceed the limit {MAX_COORDINATES} (see docs/limits.md)")
    for field, size in chart_sizes(chart).items():
        if size.worst_degree > MAX_DEGREE:
            raise InputError(source, f"{base}.{field}",
                             f"degree {_shown(size.worst_degree)} after definitions exceeds the limit {MAX_DEGREE} "
                             "(see docs/limits.md)")
        if size.worst_terms > MAX_TERMS:
            raise InputError(source, f"{base}.{field}",
                             f"{_shown(size.worst_terms)} terms once expanded exceed the limit {MAX_TERMS} "
                             "(see docs/limits.md)")
