"""The chart model of repair: the parsed targets an edit may change, and one sample point."""

from __future__ import annotations

import ast
import random
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

from gravicat.format.expr import (
    Names,
    check_expression,
    check_expression_size,
    names_in,
)
from gravicat.format.metricfile import FUNCTION_DECL, MetricDocument
from gravicat.repair.jets import _J, _Q, _Evaluator, _flint, _jscale, _NotQuadratic, _Prec, _zero
from gravicat.repair.reports import _PREC

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


def point_from_sample(model: _Model, sample, index: int, seed: int) -> _PointEnv | None:
    """The repair point at a sample point of the engine (:class:`gravicat.engine.sampling.Sample`):
    the exact rational values (and angles ``2 q atan(u)``) as 256-bit balls, and the same values of the
    arbitrary functions and their derivatives, so that repair screens at the very points ``check``
    evaluates. None when the sample does not give every coordinate and parameter a value."""
    import mpmath

    f = _flint()
    values: dict[str, Any] = {}
    with _Prec(_PREC):
        for sym, q in sample.values.items():
            q = Fraction(q)
            values[str(sym)] = f.arb(f.fmpq(q.numerator, q.denominator))
        for sym, (u, q) in sample.angles.items():
            u = Fraction(u)
            values[str(sym)] = 2 * int(q) * f.arb(f.fmpq(u.numerator, u.denominator)).atan()
        for sym, num in sample.numeric.items():
            if str(sym) not in values:  # not drawn as a rational or an angle: the binary value itself
                x = mpmath.mpf(num)
                man, exp = x.man_exp  # |x| = man * 2**exp exactly (the sign is not in man_exp)
                values[str(sym)] = f.arb(-int(man) if x < 0 else int(man)) * f.arb(2) ** int(exp)
    if not all(x in values for x in model.coords) or not all(p in values for p in model.params):
        return None
    point = _PointEnv(model, values, index, seed)
    with _Prec(_PREC):
        for (fn, alpha), q in sample.funcs.items():
            q = Fraction(q)
            point._table[(str(fn), tuple(alpha))] = f.arb(f.fmpq(q.numerator, q.denominator))
    return point
