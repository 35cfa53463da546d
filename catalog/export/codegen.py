"""What every code exporter shares: options, provenance, and the prepared expressions.

The exporter plugins (``latex``, ``python``, ``c``) only print; this module
does the rest, so every target says the same thing about where a file came
from and refuses the same things:

* :func:`~gravicat.format.assign.parse_assignments` (re-exported here) reads ``NAME=EXPR,NAME=EXPR``
  option text (``--params M=1,a=0.9``, ``--from r=10,theta=pi/2``) through the whitelist parser;
* :func:`fixed_parameters` turns the ``params`` of an export context into exact
  values, checked against the declared assumptions and ranges;
* :class:`Provenance` is the header of every generated file (entry, chart,
  revision, verification status, date) and :meth:`Provenance.require_verified`
  refuses an unverified or failed revision unless the context allows it;
* :func:`prepare` builds the chart with the fixed parameters substituted, and
  :func:`numeric_parts` gives what numeric code needs: the metric, its first
  derivatives (symbolic, by differentiation only), and a closed-form inverse
  when the metric splits into blocks of size one or two (else the generated
  code inverts numerically), with :func:`cse` to share subexpressions.

Export context (the dict every exporter receives; the CLI fills it):

``revision``          content hash of the exported revision (required)
``checks``            stored result dicts of that revision (may be empty)
``status``            optional overall status; default: the worst of ``checks``,
                      ``"unverified"`` when there are none
``chart``             chart name (default: the first chart)
``params``            None or ``"symbolic"`` (keep every parameter), an option string
                      ``"M=1,a=9/10"``, or a mapping name -> value (number or expression text)
``allow_unverified``  bool: export a failed or unverified revision (the header says so)
``date``              ISO date for the header (default: today, UTC)
``source``            where the document came from (file path or ``catalogue``), optional
``christoffel``       bool (latex only): also list the nonzero Christoffel symbols
``budget``            seconds for that symbolic computation (latex only, default 60)

Imports stay light at module level: sympy is imported inside the functions.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from gravicat.errors import CatalogError, CheckFailed, InputError

# The NAME=VALUE parser lives in the format room (one parser for every command); these names stay
# importable from here for older callers.
from gravicat.format.assign import parse_assignments, real_number, split_assignments  # noqa: F401

#: statuses under which a revision may be exported without ``allow_unverified``
ACCEPTED = ("pass", "skipped", "inconclusive")
DEFAULT_BUDGET = 60.0


def conventions(n: int) -> str:
    """The conventions line of a header for an ``n``-dimensional chart: Lorentzian, mostly plus
    (one minus sign and n - 1 plus signs, what the ``signature`` verifier checks), G = c = 1."""
    return f"signature ({','.join(['-'] + ['+'] * (n - 1))}), G = c = 1"


# --------------------------------------------------------------------------- parameters


def _relations(doc, pname: str, symbols: Mapping[str, Any]):
    from gravicat.format.expr import Names, check_relation, relation_to_sympy

    text = doc.data["parameters"][pname].get("range")
    if not text:
        return text, []
    rels = check_relation(text, Names(symbols=frozenset(symbols)), source=doc.source,
                          field=f"parameters.{pname}.range")
    return text, [relation_to_sympy(r, symbols) for r in rels]


_ASSUME = {
    "positive": (lambda v: v > 0, "positive"),
    "nonnegative": (lambda v: v >= 0, "nonnegative"),
    "negative": (lambda v: v < 0, "negative"),
    "nonzero": (lambda v: v != 0, "nonzero"),
    "integer": (lambda v: v.is_integer, "an integer"),
}


def fixed_parameters(doc, spec, params, option: str = "--params") -> dict[Any, Any]:
    """The parameter values to substitute: symbol -> exact number (empty for symbolic export).

    ``params`` is None, ``"symbolic"``, option text ``"M=1,a=9/10"`` or a mapping name -> value.
    Each value must satisfy the parameter's assumptions and every range whose parameters are all
    given; otherwise an InputError names the option and the parameter.
    """
    import sympy

    symbols = {str(p): p for p in spec.params}
    if params is None or (isinstance(params, str) and params.strip().lower() in ("", "symbolic")):
        return {}
    if isinstance(params, str):
        values = parse_assignments(params, option, symbols, {}, kind="parameter", owner=doc.id)
    elif isinstance(params, Mapping):
        values = {}
        for name, value in params.items():
            if name not in symbols:
                raise InputError(option, name, f"not a parameter of {doc.id} "
                                               f"(parameters: {', '.join(symbols) or 'none'})")
            if isinstance(value, str):
                values.update(parse_assignments(f"{name}={value}", option, symbols, values, kind="parameter",
                                                owner=doc.id))
            else:
                num = sympy.Rational(str(value)) if isinstance(value, float) else sympy.sympify(value)
                values[name] = real_number(num, option, name, str(value))
    else:
        raise InputError(option, None, f"cannot read parameters from {type(params).__name__}")
    check_parameter_values(doc, spec, values, option)
    return {symbols[k]: v for k, v in values.items()}


def check_parameter_values(doc, spec, values: Mapping[str, Any], option: str) -> None:
    """Assumptions and ranges of the given values (a range with an unknown parameter is skipped)."""
    symbols = {str(p): p for p in spec.params}
    for name, value in values.items():
        for assume in doc.data["parameters"][name].get("assume", []):
            if assume in _ASSUME:
                test, words = _ASSUME[assume]
                if not bool(test(value)):
                    raise InputError(option, name, f"{name} = {value} but the parameter is declared {words}")
    subs = {symbols[k]: v for k, v in values.items()}
    for pname in symbols:
        text, rels = _relations(doc, pname, symbols)
        for rel in rels:
            if not rel.free_symbols <= set(subs):
                continue
            if not bool(rel.subs(subs)):
                shown = ", ".join(f"{k} = {v}" for k, v in values.items() if symbols[k] in rel.free_symbols)
                culprit = pname if pname in values else next(k for k in values if symbols[k] in rel.free_symbols)
                raise InputError(option, culprit, f"{shown} is outside the range {text} of {pname}")


def numeric_parameters(doc, spec, params, option: str = "--params") -> dict[Any, Any]:
    """Every parameter as a number: the given values, else the file's defaults (for the probe)."""
    fixed = fixed_parameters(doc, spec, params, option)
    out = {}
    for p in spec.params:
        if p in fixed:
            out[p] = fixed[p]
        elif p in spec.defaults:
            out[p] = spec.defaults[p]
        else:
            raise InputError(option, str(p), f"give a value for {p} (the file declares no default)")
    check_parameter_values(doc, spec, {str(k): v for k, v in out.items()}, option)
    return out


# --------------------------------------------------------------------------- provenance


def _worst(statuses) -> str:
    from gravicat.checks import worst

    statuses = list(statuses)
    return worst(statuses).value if statuses else "unverified"


@dataclass
class Provenance:
    """Where a generated file comes from; :meth:`lines` is its header (comment syntax added by the target)."""

    entry: str
    title: str
    chart: str
    revision: str
    status: str  # pass | skipped | inconclusive | fail | error | unverified (whole revision)
    chart_status: str  # the same, over this chart's checks only
    counts: dict[str, int]
    problems: list[str]  # "chart/check: status" for every check that did not pass or skip
    date: str
    generator: str
    allowed_unverified: bool = False
    source: str | None = None
    extra: list[str] = field(default_factory=list)

    @property
    def verified(self) -> bool:
        return self.status in ACCEPTED

    @property
    def status_text(self) -> str:
        if self.status == "unverified":
            return "unverified (no checks stored for this revision)"
        n = sum(self.counts.values())
        counts = ", ".join(f"{v} {k}" for k, v in sorted(self.counts.items()))
        return f"{self.status} ({n} stored checks: {counts}; this chart: {self.chart_status})"

    def require_verified(self) -> None:
        """Refuse a failed or unverified revision unless the context allowed it."""
        if self.verified or self.allowed_unverified:
            return
        where = f"{self.entry}@{self.revision[:12]}"
        if self.status == "unverified":
            raise InputError(where, None, "no checks have been run on this revision; run 'gravicat verify "
                                          f"{self.entry}' first, or pass --allow-unverified to export anyway")
        shown = ", ".join(self.problems[:3]) + (", ..." if len(self.problems) > 3 else "")
        raise CheckFailed(f"{where}: this revision {'failed' if self.status == 'fail' else 'has errors in'} its "
                          f"checks ({shown}); pass --allow-unverified to export anyway")

    def lines(self) -> list[str]:
        out = [
            f"gravicat export of {self.title} ({self.entry}), chart {self.chart}",
            f"revision:  {self.revision}",
            f"status:    {self.status_text}",
            f"date:      {self.date}",
            f"generator: {self.generator}",
        ]
        if self.source:
            out.append(f"source:    {self.source}")
        out.extend(self.extra)
        if not self.verified:
            what = ("was never verified" if self.status == "unverified"
                    else f"did not pass its checks ({', '.join(self.problems[:5])})")
            out.append(f"WARNING: exported with --allow-unverified: this revision {what}; do not rely on it.")
        return out


def provenance(document, context: Mapping[str, Any], exporter, chart: str) -> Provenance:
    """The header data of an export (raises nothing; call :meth:`Provenance.require_verified`)."""
    from gravicat import __version__

    if "revision" not in context:
        raise CatalogError("export context without 'revision' (a bug in the caller)")
    checks = list(context.get("checks") or [])
    status = context.get("status") or _worst(c["status"] for c in checks)
    chart_checks = [c["status"] for c in checks if c.get("chart") in (None, chart)]
    counts: dict[str, int] = {}
    for c in checks:
        counts[c["status"]] = counts.get(c["status"], 0) + 1
    problems = [f"{c.get('chart', '?')}/{c['check']}: {c['status']}" for c in checks
                if c["status"] not in ("pass", "skipped")]
    date = context.get("date") or _dt.datetime.now(_dt.UTC).date().isoformat()
    return Provenance(
        entry=document.id, title=document.title, chart=chart, revision=str(context["revision"]),
        status=status, chart_status=_worst(chart_checks) if checks else "unverified", counts=counts,
        problems=problems, date=str(date), generator=f"gravicat {__version__}, exporter {exporter.name} "
                                                      f"{exporter.version}",
        allowed_unverified=bool(context.get("allow_unverified")), source=context.get("source"),
    )


# --------------------------------------------------------------------------- prepared chart


@dataclass
class Layered:
    """A chart with its ``define`` entries kept as symbols (for display and the chain rule).

    ``defines`` lists (symbol, expression) in file order; an expression may use coordinates,
    parameters, functions and earlier definitions. ``metric`` is written in the same symbols.
    """

    coords: tuple
    params: tuple
    defines: list
    metric: Any
    functions: dict
    env: dict  # name -> sympy object (parameters, coordinates, definition symbols)
    names: Any  # gravicat.format.expr.Names for parsing more expressions of this chart

    def substituted(self, values: Mapping[Any, Any]) -> Layered:
        if not values:
            return self
        return Layered(self.coords, self.params, [(d, e.xreplace(values)) for d, e in self.defines],
                       self.metric.xreplace(values), self.functions, self.env, self.names)

    def relations(self, text: str, source: str, field: str) -> list[tuple[Any, str, Any]]:
        """A (possibly chained) inequality as ``[(left, op, right), ...]`` in this chart's symbols."""
        from gravicat.format.expr import check_relation, to_sympy

        return [(to_sympy(r.left, self.env, self.functions), r.op, to_sympy(r.right, self.env, self.functions))
                for r in check_relation(text, self.names, source=source, field=field)]

    def expand(self, expr):
        """``expr`` with every definition replaced by its value (in coordinates and parameters)."""
        for d, e in reversed(self.defines):
            if d in expr.free_symbols:
                expr = expr.xreplace({d: e})
        return expr


def layered_chart(doc, chart: str) -> Layered:
    """Parse one chart with its definitions kept as symbols (the document is already validated)."""
    import sympy

    from gravicat.format.expr import Names, check_expression, to_sympy
    from gravicat.format.metricfile import FUNCTION_DECL, parameter_symbols

    c = doc.data["charts"][chart]
    base = f"charts.{chart}"
    params = parameter_symbols(doc)
    coords = {name: sympy.Symbol(name, real=True) for name in c["coordinates"]}
    env: dict[str, Any] = {**params, **coords}
    fdecl, functions = {}, {}
    for decl in c["functions"]:
        m = FUNCTION_DECL.match(decl)
        fdecl[m.group(1)] = tuple(a.strip() for a in m.group(2).split(","))
        functions[m.group(1)] = sympy.Function(m.group(1), real=True)(*(coords[a] for a in fdecl[m.group(1)]))
    names = Names(symbols=frozenset(env), functions=fdecl, coordinates=frozenset(coords))

    def build(text, field, nm):
        return to_sympy(check_expression(text, nm, source=doc.source, field=field), env, functions)

    defines = []
    for dname, text in c["define"].items():
        value = build(text, f"{base}.define.{dname}", names)
        sym = sympy.Symbol(dname, real=True)
        defines.append((sym, value))
        env[dname] = sym
        names = names.with_symbols([dname])
    n = len(coords)
    if "line-element" in c:
        dsyms = [sympy.Symbol(f"d{name}") for name in coords]
        env.update({str(d): d for d in dsyms})
        form = build(c["line-element"], f"{base}.line-element", names.with_symbols([str(d) for d in dsyms]))
        grad = [sympy.diff(form, d) for d in dsyms]
        g = sympy.Matrix(n, n, lambda i, j: sympy.diff(grad[i], dsyms[j]) / 2)
        for d in dsyms:
            del env[str(d)]
    else:
        g = sympy.Matrix(n, n, lambda i, j: build(c["metric"][i][j], f"{base}.metric[{i}][{j}]", names))
    return Layered(tuple(coords.values()), tuple(params.values()), defines, sympy.ImmutableMatrix(g), functions,
                   env, names)


@dataclass
class Prepared:
    """One chart ready for printing: fixed parameters substituted."""

    doc: Any
    spec: Any  # the ChartSpec as built (nothing substituted)
    layered: Layered  # definitions kept as symbols, fixed parameters substituted
    chart: str
    coords: tuple  # sympy Symbols
    free: tuple  # parameters left symbolic, in file order
    fixed: dict  # parameter symbol -> exact value
    metric: Any  # ImmutableMatrix, definitions expanded, fixed values substituted
    domain: tuple  # relations with the fixed values substituted (trivially true ones dropped)
    domain_text: tuple[str, ...]  # the domain strings of the file (for display)
    provenance: Provenance

    @property
    def n(self) -> int:
        return len(self.coords)

    def parameter_lines(self) -> list[str]:
        """One header line per parameter: symbolic with its range and default, or its fixed value."""
        out = []
        for name, p in self.doc.data["parameters"].items():
            sym = next(s for s in self.spec.params if str(s) == name)
            if sym in self.fixed:
                out.append(f"  {name} = {self.fixed[sym]} (fixed at export)")
            else:
                bits = [p["range"]] if p.get("range") else []
                if "default" in p:
                    bits.append(f"default {p['default']}")
                out.append(f"  {name}: runtime parameter" + (f" ({'; '.join(bits)})" if bits else ""))
        return out

    def header_lines(self) -> list[str]:
        lines = self.provenance.lines()
        lines.append(f"coordinates: {', '.join(str(c) for c in self.coords)}")
        lines.append("parameters:" + ("" if self.doc.data["parameters"] else " none"))
        lines.extend(self.parameter_lines())
        lines.append(f"domain:    {'; '.join(self.domain_text) or 'the whole chart'}")
        lines.append(f"conventions: {conventions(self.n)}")
        return lines


def chart_name(document, context: Mapping[str, Any]) -> str:
    from gravicat.errors import NotFound

    chart = context.get("chart") or document.chart_names[0]
    if chart not in document.chart_names:
        raise NotFound(f"{document.id}: no chart '{chart}' (charts: {', '.join(document.chart_names)})")
    return chart


def prepare(document, context: Mapping[str, Any], exporter, *, numeric: bool) -> Prepared:
    """Build the chart, check the status, substitute the fixed parameters.

    ``numeric`` targets refuse charts with arbitrary functions (their values are not known).
    """
    import sympy

    from gravicat.format.metricfile import build_chart

    chart = chart_name(document, context)
    prov = provenance(document, context, exporter, chart)
    prov.require_verified()
    spec = build_chart(document, chart)
    if numeric and spec.functions:
        names = ", ".join(str(f) for f in spec.functions)
        raise InputError(document.source, f"charts.{chart}.functions",
                         f"the metric depends on the arbitrary function(s) {names}, whose values numeric code "
                         f"cannot know; export to latex or json instead")
    fixed = fixed_parameters(document, spec, context.get("params"))
    free = tuple(p for p in spec.params if p not in fixed)
    metric = spec.metric.xreplace(fixed) if fixed else spec.metric
    domain = []
    for rel in spec.domain:
        rel = rel.xreplace(fixed) if fixed else rel
        if rel is sympy.true:
            continue
        if rel is sympy.false:
            raise InputError("--params", None, f"with these values the domain of chart {chart} is empty")
        domain.append(rel)
    return Prepared(doc=document, spec=spec, layered=layered_chart(document, chart).substituted(fixed), chart=chart,
                    coords=tuple(spec.coords), free=free, fixed=fixed, metric=sympy.ImmutableMatrix(metric),
                    domain=tuple(domain), domain_text=tuple(document.data["charts"][chart]["domain"]),
                    provenance=prov)


# --------------------------------------------------------------------------- numeric parts


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


# --------------------------------------------------------------------------- Christoffel symbols (symbolic)


def christoffel_symbols(spec, budget: float = DEFAULT_BUDGET) -> dict:
    """Nonzero Gamma^a_bc (b <= c) as factored sympy expressions, computed in a child process.

    Uses the shared exact engine (:class:`gravicat.engine.geometry.Geometry`). A chart whose symbols do
    not reduce within ``budget`` seconds gives a one-line CatalogError (nothing is printed half).
    """
    import multiprocessing

    def work(conn):
        try:
            from gravicat.engine.geometry import Geometry

            geo = Geometry(spec)
            gam = geo.christoffel
            out = {}
            for a in range(geo.n):
                for b in range(geo.n):
                    for c in range(b, geo.n):
                        v = gam[a][b][c]
                        if not geo.is_zero(v):
                            out[(a, b, c)] = geo.to_sympy(v)
            conn.send(("ok", out))
        except Exception as exc:  # reported to the parent as one line
            conn.send(("error", f"{type(exc).__name__}: {exc}"))
        finally:
            conn.close()

    try:
        ctx = multiprocessing.get_context("fork")
    except ValueError:  # pragma: no cover - platforms without fork: computed here, no time limit
        ctx = None
    if ctx is None:  # pragma: no cover
        parent, child = multiprocessing.Pipe(duplex=False)
        work(child)
        kind, payload = parent.recv()
        if kind != "ok":
            raise CatalogError(f"{spec.entry}:{spec.chart}: cannot compute the Christoffel symbols ({payload})")
        return payload
    parent, child = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=work, args=(child,), daemon=True)
    proc.start()
    child.close()
    try:
        ready = parent.poll(budget)
        if not ready:
            raise CatalogError(f"{spec.entry}:{spec.chart}: the Christoffel symbols did not reduce within "
                               f"{budget:g} s; export without the Christoffel symbols (or give a larger budget)")
        kind, payload = parent.recv()
    except EOFError:
        raise CatalogError(f"{spec.entry}:{spec.chart}: the Christoffel computation stopped unexpectedly") from None
    finally:
        if proc.is_alive():
            proc.kill()
        proc.join()
        parent.close()
    if kind != "ok":
        raise CatalogError(f"{spec.entry}:{spec.chart}: cannot compute the Christoffel symbols ({payload})")
    return payload
