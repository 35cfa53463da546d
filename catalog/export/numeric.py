"""What numeric targets print (see :mod:`gravicat.export.codegen`): the metric, its first
derivatives (chain rule through the definitions), a closed-form inverse of small blocks, shared
subexpressions, identifiers and line wrapping."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from gravicat.export.codegen import Prepared


@dataclass
class NumericParts:
    """Symbolic pieces of the numeric targets (zeros omitted).

    ``steps`` are ordered assignments (symbol, expression): the chart's definitions and their
    first derivatives (chain rule; the symbol of d(definition k)/d(coordinate c) is
    ``_d{k}_{c}``). ``metric`` ((a, b), a <= b) and ``derivatives`` ((c, a, b): d_c g_ab) are
    written in coordinates, parameters and those symbols; ``inverse`` ((a, b), a <= b) is
    written in coordinates and parameters only, or is None when the generated code inverts
    numerically. Use :meth:`program` to get straight-line code for any of them.
    """

    steps: list
    metric: dict
    derivatives: dict
    inverse: dict | None
    blocks: list[list[int]]
    _programs: dict = field(default_factory=dict, repr=False)  # program() results, shared by the targets

    @property
    def inverse_method(self) -> str:
        return "closed-form" if self.inverse is not None else "numeric"

    def program(self, outputs: Mapping[Any, Any], prefix: str = "_c"):
        """``(assignments, reduced)``: straight-line code for ``outputs`` (key -> expression).

        Common subexpressions of the outputs and of the steps are shared (sympy's cse); only
        the assignments the outputs need are kept, in an order where each follows what it uses.
        """
        import sympy

        memo = (tuple(outputs.items()), prefix)
        if memo in self._programs:
            return self._programs[memo]
        keys = list(outputs)
        exprs = [e for _, e in self.steps] + [outputs[k] for k in keys]
        temps, reduced = sympy.cse(exprs, symbols=sympy.numbered_symbols(prefix, real=True))
        steps = [(sym, reduced[i]) for i, (sym, _) in enumerate(self.steps)]
        final = dict(zip(keys, reduced[len(self.steps):], strict=True))
        assignments = list(temps) + steps
        defined = {sym for sym, _ in assignments}
        deps = {sym: expr.free_symbols & defined for sym, expr in assignments}
        needed, stack = set(), [s for e in final.values() for s in e.free_symbols & defined]
        while stack:
            sym = stack.pop()
            if sym not in needed:
                needed.add(sym)
                stack.extend(deps[sym])
        pending = [(sym, expr) for sym, expr in assignments if sym in needed]
        ordered, placed = [], set()
        while pending:
            for i, (sym, expr) in enumerate(pending):
                if deps[sym] <= placed:
                    ordered.append((sym, expr))
                    placed.add(sym)
                    del pending[i]
                    break
            else:  # pragma: no cover - the steps are acyclic by construction
                raise RuntimeError("cyclic definitions in generated code")
        self._programs[memo] = (ordered, final)
        return ordered, final


def regularise(expr):
    """Rewrite removable singularities and distributions that only arise in derivatives.

    ``LambertW(z)`` becomes ``z*exp(-LambertW(z))`` (the defining identity), so the factor
    ``1/z`` that differentiation puts beside it cancels and the result stays finite at z = 0
    (the horizon of a chart written with W). ``DiracDelta`` terms (derivatives of ``sign``)
    are dropped: the code is valid away from the points where ``Abs``/``sign`` switch.
    ``1 - tanh(u)**2`` (sympy's derivative of tanh) becomes ``cosh(u)**-2`` and ``1 - coth(u)**2``
    becomes ``-sinh(u)**-2``, which keep their relative accuracy where tanh(u) is close to 1.
    """
    import sympy

    def squared(term, func):
        base, exp = term.as_base_exp()
        return isinstance(base, func) and exp == 2

    def hyperbolic(e):
        if not e.is_Add or sympy.Integer(1) not in e.args:
            return e
        for term in e.args:
            coeff, rest = term.as_coeff_Mul()
            if coeff == -1 and (squared(rest, sympy.tanh) or squared(rest, sympy.coth)):
                u = rest.as_base_exp()[0].args[0]
                new = sympy.cosh(u) ** -2 if isinstance(rest.as_base_exp()[0], sympy.tanh) else -sympy.sinh(u) ** -2
                return e - 1 - term + new
        return e

    if expr.has(sympy.tanh, sympy.coth):
        expr = expr.replace(lambda e: e.is_Add, hyperbolic)

    if expr.has(sympy.DiracDelta):
        expr = expr.replace(lambda e: isinstance(e, sympy.DiracDelta), lambda e: sympy.Integer(0))
    if expr.has(sympy.LambertW):
        marker = sympy.Function("_gravicat_w")
        expr = expr.replace(lambda e: isinstance(e, sympy.LambertW) and len(e.args) == 1,
                            lambda e: e.args[0] * sympy.exp(-marker(e.args[0])))
        expr = expr.replace(lambda e: getattr(e, "func", None) == marker, lambda e: sympy.LambertW(e.args[0]))
    return expr


def _blocks(metric) -> list[list[int]]:
    n = metric.shape[0]
    parent = list(range(n))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i in range(n):
        for j in range(i + 1, n):
            if metric[i, j] != 0:
                parent[find(i)] = find(j)
    groups: dict[int, list[int]] = {}
    for i in range(n):
        groups.setdefault(find(i), []).append(i)
    return sorted(groups.values())


def _even_sines_to_cosines(expr):
    """sin(u)**(2k) -> (1 - cos(u)**2)**k, so that cancel/factor see the Pythagorean identity."""
    import sympy

    return expr.replace(
        lambda e: e.is_Pow and isinstance(e.base, sympy.sin) and e.exp.is_Integer and e.exp % 2 == 0,
        lambda e: (1 - sympy.cos(e.base.args[0]) ** 2) ** (e.exp // 2))


def _sines_back(expr):
    """(cos(u) - 1)**k * (cos(u) + 1)**k -> (-sin(u)**2)**k in a factored product."""
    import sympy

    if not expr.is_Mul:
        return expr
    powers = expr.as_powers_dict()
    for base in list(powers):
        if base.is_Add and len(base.args) == 2 and sympy.Integer(-1) in base.args:
            trig = next(a for a in base.args if a != -1)
            if isinstance(trig, sympy.cos) and (trig + 1) in powers and powers[trig + 1] == powers[base]:
                k = powers.pop(base)
                powers.pop(trig + 1)
                powers[-sympy.sin(trig.args[0]) ** 2] = powers.get(-sympy.sin(trig.args[0]) ** 2, 0) + k
    return sympy.Mul(*(b**e for b, e in powers.items()))


def _closed_form_inverse(metric, blocks, max_ops: int = 400) -> dict | None:
    """g^ab for metrics made of 1x1 and 2x2 blocks; None if a block is larger or too big.

    A 2x2 block is inverted with its determinant cancelled and factored (after sin**2 ->
    1 - cos**2), so that near a horizon the small factor (Delta in Boyer-Lindquist charts) is
    computed directly instead of as a difference of large products.
    """
    import sympy

    out = {}
    for block in blocks:
        if len(block) == 1:
            i = block[0]
            out[(i, i)] = 1 / metric[i, i]
        elif len(block) == 2:
            i, j = block
            a, b, c = metric[i, i], metric[i, j], metric[j, j]
            if sympy.count_ops(a) + sympy.count_ops(b) + sympy.count_ops(c) > max_ops:
                return None
            det = _sines_back(sympy.factor(sympy.cancel(_even_sines_to_cosines(a * c - b * b))))
            if det == 0:
                return None
            out[(i, i)] = c / det
            out[(i, j)] = -b / det
            out[(j, j)] = a / det
        else:
            return None
    return out


def numeric_parts(prep: Prepared) -> NumericParts:
    """The metric, its first derivatives (chain rule through the definitions) and, when the
    metric is made of 1x1 and 2x2 blocks, a closed-form inverse. Cached per chart and values."""
    key = (prep.doc.hash, prep.chart, tuple(sorted((str(k), str(v)) for k, v in prep.fixed.items())))
    if key not in _PARTS_CACHE:
        if len(_PARTS_CACHE) > 32:
            _PARTS_CACHE.clear()
        _PARTS_CACHE[key] = _numeric_parts(prep)
    return _PARTS_CACHE[key]


_PARTS_CACHE: dict = {}


def _numeric_parts(prep: Prepared) -> NumericParts:
    import sympy

    lay, n = prep.layered, prep.n
    steps = []
    dsym = {}  # (define symbol, coordinate index) -> symbol of its derivative
    for k, (d, expr) in enumerate(lay.defines):
        steps.append((d, regularise(expr)))
        for c, x in enumerate(lay.coords):
            v = sympy.diff(expr, x)
            for (d2, c2), s2 in dsym.items():
                if c2 == c and d2 in expr.free_symbols:
                    v += sympy.diff(expr, d2) * s2
            v = regularise(v)
            if v != 0:
                sym = sympy.Symbol(f"_d{k}_{c}", real=True)
                dsym[(d, c)] = sym
                steps.append((sym, v))
    g = lay.metric
    metric = {(a, b): regularise(g[a, b]) for a in range(n) for b in range(a, n) if g[a, b] != 0}
    derivatives = {}
    for c, x in enumerate(lay.coords):
        for a, b in metric:
            v = sympy.diff(g[a, b], x)
            for (d2, c2), s2 in dsym.items():
                if c2 == c and d2 in g[a, b].free_symbols:
                    v += sympy.diff(g[a, b], d2) * s2
            v = regularise(v)
            if v != 0:
                derivatives[(c, a, b)] = v
    blocks = _blocks(prep.metric)
    inverse = _closed_form_inverse(prep.metric, blocks)
    if inverse is not None:
        inverse = {k: regularise(v) for k, v in inverse.items() if v != 0}
    return NumericParts(steps=steps, metric=metric, derivatives=derivatives, inverse=inverse, blocks=blocks)


def cse(named: Mapping[Any, Any], prefix: str = "_c"):
    """Common subexpressions of ``named`` (key -> expr): ``(temps, reduced)``.

    ``temps`` is a list of (Symbol, expr) in evaluation order, ``reduced`` a dict key -> expr.
    """
    import sympy

    keys = list(named)
    temps, reduced = sympy.cse([named[k] for k in keys], symbols=sympy.numbered_symbols(prefix, real=True))
    return temps, dict(zip(keys, reduced, strict=True))


def used_symbols(temps, reduced: Mapping[Any, Any], candidates) -> list:
    """The ``candidates`` (coordinates, parameters) that a cse block refers to, in their order."""
    free = set()
    for _, e in temps:
        free |= e.free_symbols
    for e in reduced.values():
        free |= e.free_symbols
    return [c for c in candidates if c in free]


def identifiers(names, reserved) -> dict[str, str]:
    """A safe identifier for every name: a name in ``reserved`` gets a ``_v`` suffix (kept unique)."""
    taken = set(names) | set(reserved)
    out = {}
    for name in names:
        new = name
        while new in reserved or (new != name and new in taken):
            new += "_v"
        taken.add(new)
        out[name] = new
    return out


def wrap(text: str, width: int, indent: str) -> list[str]:
    """Break a long printed expression at spaces (between tokens) into lines of at most ``width``."""
    if len(text) <= width:
        return [text]
    words = text.split(" ")
    lines, cur = [], ""
    for w in words:
        if cur and len(cur) + 1 + len(w) > width:
            lines.append(cur)
            cur = indent + w
        else:
            cur = f"{cur} {w}" if cur else w
    lines.append(cur)
    return lines


def relation_margin(rel):
    """``(margin, strict)``: margin > 0 (>= 0 if not strict) inside the relation."""
    op = rel.rel_op
    if op in (">", ">="):
        return rel.lhs - rel.rhs, op == ">"
    return rel.rhs - rel.lhs, op == "<"
