"""The one chart builder: a validated metric document's chart as sympy objects.

:func:`build_chart` gives the :class:`~gravicat.format.chartspec.ChartSpec` every verifier and
command works on (definitions substituted); :func:`layered_chart` gives the same chart with its
``define`` entries kept as symbols (what exporters print and differentiate by the chain rule).
Both read the chart's names through :func:`chart_scope` and its metric through
:func:`chart_metric` (a line element or a matrix, with the same checks and messages), so the two
forms cannot drift apart. Other rooms build charts only through these functions.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from gravicat.errors import InputError
from gravicat.format.expr import (
    Names,
    check_expression,
    check_expression_size,
    check_relation,
    names_in,
)

if TYPE_CHECKING:
    from gravicat.format.metricfile import MetricDocument


@dataclass
class ChartScope:
    """The names of one chart: parameters and coordinates as symbols, declared functions applied
    to their coordinates, and the whitelist :class:`~gravicat.format.expr.Names` that parse them."""

    chart: str
    raw: dict  # the chart's canonical data
    source: str
    base: str  # "charts.<name>", the field prefix of messages
    params: dict  # name -> Symbol (with the declared assumptions)
    coords: dict  # name -> real Symbol
    env: dict  # name -> sympy object (parameters and coordinates; builders add definitions)
    fdecl: dict  # function name -> its argument coordinates
    functions: dict  # function name -> applied sympy function
    names: Names


def require_spacetime(doc: MetricDocument, what: str = "") -> None:
    """A one-line InputError (field ``kind``) when ``doc`` is initial data, for the commands that need a
    spacetime metric (``what`` names the command: ``"classify"``)."""
    if doc.data.get("kind") == "initial-data":  # no spacetime metric to read (format/initialdata.py)
        needs = f"{what} needs" if what else "this needs"
        raise InputError(doc.source, "kind", f"{doc.id} is initial data (a 3-geometry with extrinsic curvature), "
                                             f"not a spacetime ({needs} a spacetime metric): use 'gravicat split', "
                                             "'gravicat check' and the initial-data exporters")


def chart_scope(doc: MetricDocument, chart: str | None = None) -> ChartScope:
    """The names of ``chart`` (default: the first); NotFound for a chart the document lacks."""
    import sympy

    from gravicat.format.metricfile import FUNCTION_DECL

    data = doc.data
    require_spacetime(doc)
    chart = chart or next(iter(data["charts"]))
    if chart not in data["charts"]:
        from gravicat.errors import NotFound

        raise NotFound(f"{doc.id}: no chart '{chart}' (charts: {', '.join(data['charts'])})")
    c = data["charts"][chart]
    params = parameter_symbols(doc)
    coords = {name: sympy.Symbol(name, real=True) for name in c["coordinates"]}
    env: dict[str, Any] = {**params, **coords}
    fdecl: dict[str, tuple[str, ...]] = {}
    functions: dict[str, Any] = {}
    for decl in c["functions"]:
        m = FUNCTION_DECL.match(decl)
        fdecl[m.group(1)] = tuple(a.strip() for a in m.group(2).split(","))
        functions[m.group(1)] = sympy.Function(m.group(1), real=True)(*(coords[a] for a in fdecl[m.group(1)]))
    names = Names(symbols=frozenset(env), functions=fdecl, coordinates=frozenset(coords))
    return ChartScope(chart, c, doc.source, f"charts.{chart}", params, coords, env, fdecl, functions, names)


def chart_metric(sc: ChartScope, build: Callable[..., Any]):
    """The metric matrix of a chart: from its line element (a quadratic form in ``d<coordinate>``)
    or its component matrix (which must be symmetric). ``build(text, field, extra_names)`` parses
    one expression in the builder's current names (``sc.env`` is extended by the differentials
    while the line element is parsed)."""
    import sympy

    c, source, base, n = sc.raw, sc.source, sc.base, len(sc.coords)
    if "line-element" in c:
        dsyms = [sympy.Symbol(f"d{name}") for name in sc.coords]
        sc.env.update({str(d): d for d in dsyms})
        try:
            form = build(c["line-element"], f"{base}.line-element", [str(d) for d in dsyms])
        finally:
            for d in dsyms:
                del sc.env[str(d)]
        return _quadratic_form(form, dsyms, source, f"{base}.line-element")
    g = sympy.Matrix(n, n, lambda i, j: build(c["metric"][i][j], f"{base}.metric[{i}][{j}]", ()))
    for i in range(n):
        for j in range(i + 1, n):
            if g[i, j] != g[j, i] and sympy.cancel(g[i, j] - g[j, i]) != 0:
                raise InputError(source, f"{base}.metric[{i}][{j}]",
                                 f"the matrix is not symmetric: '{c['metric'][i][j]}' differs from "
                                 f"metric[{j}][{i}] = '{c['metric'][j][i]}'")
    return g



def _assumptions(assume: list[str]) -> dict[str, bool]:
    flags = {a: True for a in assume}
    flags.setdefault("real", True)
    return flags


def parameter_symbols(doc: MetricDocument) -> dict[str, Any]:
    import sympy

    return {name: sympy.Symbol(name, **_assumptions(p["assume"])) for name, p in doc.data["parameters"].items()}


def build_chart(doc: MetricDocument, chart: str | None = None,
                resolve: Callable[[str], Any] | None = None):
    """The sympy form of one chart (default: the first). Raises InputError for a bad line element."""
    if doc.data.get("kind") == "initial-data":  # the spatial metric of an initial-data chart
        from gravicat.format.initialdata import build_initial_chart

        return build_initial_chart(doc, chart, resolve)
    import sympy

    from gravicat.format.chartspec import ChartSpec, Fluid, Invariant, Limit, NullDust
    from gravicat.format.declarations import DECLARATION_KEYS, build_declarations
    from gravicat.format.expr import relation_to_sympy, to_sympy
    from gravicat.format.metricfile import _note_function_use, _refuse_function_in_domain

    data = doc.data
    sc = chart_scope(doc, chart)
    chart, c, source, base = sc.chart, sc.raw, sc.source, sc.base
    params, coords, env, fdecl, functions, names = sc.params, sc.coords, sc.env, sc.fdecl, sc.functions, sc.names
    through: dict[str, str] = {}

    def build(text: str, field: str, extra_names=()):
        tree = check_expression(text, names.with_symbols(extra_names), source=source, field=field)
        value = to_sympy(tree, env, functions)
        if value.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
            raise InputError(source, field, f"'{text}' is not finite ({value})")
        return value

    for dname, text in c["define"].items():
        field = f"{base}.define.{dname}"
        tree, bits = check_expression_size(text, names, source=source, field=field)
        _note_function_use(through, dname, names_in(tree), fdecl)
        env[dname] = to_sympy(tree, env, functions)
        if env[dname].has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
            raise InputError(source, field, f"'{text}' is not finite ({env[dname]})")
        names = names.with_symbols([dname], {dname: bits} if bits is not None else None)
    coord_list = list(coords.values())
    g = chart_metric(sc, build)

    def relations(texts, fields, nm, no_functions=False):
        out = []
        for text, field in zip(texts, fields, strict=True):
            rels = check_relation(text, nm, source=source, field=field)
            if no_functions:  # a stored document is not validated again: keep the domain rule here too
                _refuse_function_in_domain(fail, field, text, rels, fdecl, through)
            out.extend(relation_to_sympy(rel, env, functions) for rel in rels)
        return tuple(out)

    def fail(field, problem):
        raise InputError(source, field, problem)

    domain = relations(c["domain"], [f"{base}.domain[{i}]" for i in range(len(c["domain"]))], names, True)
    pnames = Names(symbols=frozenset(params))
    ranged = [(k, p["range"]) for k, p in data["parameters"].items() if "range" in p]
    param_ranges = relations([r for _, r in ranged], [f"parameters.{k}.range" for k, _ in ranged], pnames)
    defaults = {params[k]: build(p["default"], f"parameters.{k}.default")
                for k, p in data["parameters"].items() if "default" in p}

    def by_coord(table, field):
        return tuple(build(table[name], f"{field}.{name}") if name in table else sympy.Integer(0)
                     for name in coords)

    fluid = None
    if "fluid" in c:
        f = c["fluid"]
        fluid = Fluid(build(f["density"], f"{base}.fluid.density"),
                      build(f.get("pressure", "0"), f"{base}.fluid.pressure"),
                      by_coord(f["velocity"], f"{base}.fluid.velocity"))
    null_dust = None
    if "null-dust" in c:
        nd = c["null-dust"]
        null_dust = NullDust(build(nd["density"], f"{base}.null-dust.density"),
                             by_coord(nd["vector"], f"{base}.null-dust.vector"))
    limits = []
    for lname, lim in data["limits"].items():
        if lim["chart"] != chart:
            continue
        limits.append(Limit(
            name=lname,
            set={params[k]: build(t, f"limits.{lname}.set.{k}") for k, t in lim["set"].items()},
            coordinates={coords[k]: build(t, f"limits.{lname}.coordinates.{k}")
                         for k, t in lim["coordinates"].items()},
            reduces_to=lim["reduces-to"],
        ))
    extra: dict[str, Any] = {"source": source}
    if any(k in c for k in DECLARATION_KEYS):  # petrov-type, killing, ... (format/declarations.py)
        extra["declarations"] = build_declarations(c, build, source, base)
    if resolve is not None:
        extra["resolve"] = resolve
    return ChartSpec(
        entry=doc.id,
        chart=chart,
        field_equations=data["field-equations"],
        coords=tuple(coord_list),
        params=tuple(params.values()),
        metric=sympy.ImmutableMatrix(g),
        functions=tuple(functions.values()),
        domain=domain,
        param_ranges=param_ranges,
        defaults=defaults,
        cosmological_constant=(build(c["cosmological-constant"], f"{base}.cosmological-constant")
                               if "cosmological-constant" in c else None),
        potential=by_coord(c["potential"], f"{base}.potential") if "potential" in c else None,
        fluid=fluid,
        null_dust=null_dust,
        observers={o: by_coord(t, f"{base}.observers.{o}") for o, t in c["observers"].items()},
        transforms={o: {k: build(t, f"{base}.transforms.{o}.{k}") for k, t in m.items()}
                    for o, m in c["transforms"].items()},
        invariants={k: Invariant(build(i["value"], f"{base}.invariants.{k}.value"), i["source"])
                    for k, i in c["invariants"].items()},
        limits=tuple(limits),
        flat_when=tuple({params[k]: build(t, f"flat-when[{i}].{k}") for k, t in subs.items()}
                        for i, subs in enumerate(data["flat-when"])),
        tags=tuple(data["tags"]),
        extra=extra,
    )



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
        from gravicat.format.expr import to_sympy

        return [(to_sympy(r.left, self.env, self.functions), r.op, to_sympy(r.right, self.env, self.functions))
                for r in check_relation(text, self.names, source=source, field=field)]

    def expand(self, expr):
        """``expr`` with every definition replaced by its value (in coordinates and parameters)."""
        for d, e in reversed(self.defines):
            if d in expr.free_symbols:
                expr = expr.xreplace({d: e})
        return expr


def layered_chart(doc: MetricDocument, chart: str | None = None) -> Layered:
    """One chart with its definitions kept as symbols (the document is already validated): the
    names of :func:`chart_scope`, the metric of :func:`chart_metric`."""
    import sympy

    from gravicat.format.expr import to_sympy

    sc = chart_scope(doc, chart)
    names = sc.names

    def build(text, field, extra_names=()):
        return to_sympy(check_expression(text, names.with_symbols(extra_names), source=sc.source, field=field),
                        sc.env, sc.functions)

    defines = []
    for dname, text in sc.raw["define"].items():
        value = build(text, f"{sc.base}.define.{dname}")
        sym = sympy.Symbol(dname, real=True)
        defines.append((sym, value))
        sc.env[dname] = sym
        names = names.with_symbols([dname])
    g = chart_metric(sc, build)
    return Layered(tuple(sc.coords.values()), tuple(sc.params.values()), defines, sympy.ImmutableMatrix(g),
                   sc.functions, sc.env, names)


def _quadratic_form(form, dsyms, source: str, field: str):
    """The symmetric matrix of a quadratic form in the differentials ``dsyms``.

    First :func:`_split_quadratic` reads the coefficients off the expression tree in one pass
    (no differentiation, no expansion of the coefficients). When the tree is not visibly a sum
    of degree-two terms (a differential under a function or a root, a lower-degree term that
    may cancel...), g_ij = (1/2) d^2 form / d(dx^i) d(dx^j) decides, with the same checks and
    messages: the Hessian may not contain a differential, and the value and gradient at zero
    differentials must vanish.
    """
    import sympy

    split = _split_quadratic(form, dsyms)
    if split is not None:
        return split

    n = len(dsyms)
    zero = dict.fromkeys(dsyms, 0)
    dset = set(dsyms)
    grad = [sympy.diff(form, d) for d in dsyms]
    g = sympy.zeros(n, n)
    for i in range(n):
        for j in range(i, n):
            h = sympy.diff(grad[i], dsyms[j])
            if h.free_symbols & dset:
                bad = sorted(str(d) for d in h.free_symbols & dset)
                raise InputError(source, field, f"not quadratic in the differentials (the coefficient of "
                                                f"{dsyms[i]}*{dsyms[j]} still depends on {', '.join(bad)})")
            g[i, j] = g[j, i] = h / 2
    lower = [form.subs(zero)] + [gi.subs(zero) for gi in grad]
    for term in lower:
        if term != 0 and sympy.cancel(term) != 0:
            raise InputError(source, field, "not a quadratic form: it has terms without two differentials "
                                            f"({term})")
    return g


def _split_quadratic(form, dsyms):
    """The metric of ``form`` read off its tree, or None when the tree does not show a quadratic form.

    One bottom-up pass over the (shared) expression tree: each node becomes
    ``{monomial: [term, ...]}`` with a monomial a sorted tuple of differential indices;
    a subtree without differentials stays the very same sympy object, so the coefficients
    are the expressions of the file, not an expansion of them. Gives up (None) on anything
    but sums, products and squares around the differentials, on a degree above two, on a tree
    too deep to walk, and when a term of degree below two appears (it may still cancel): the
    Hessian path then decides and words the error.
    """
    import sympy

    index = {d: k for k, d in enumerate(dsyms)}
    memo: dict[Any, Any] = {}
    giveup = object()

    def product(parts):
        out: dict[tuple[int, ...], list] = {(): [()]}
        for part in parts:
            nxt: dict[tuple[int, ...], list] = {}
            for k1, terms1 in out.items():
                for k2, terms2 in part.items():
                    key = tuple(sorted(k1 + k2))
                    if len(key) > 2:
                        return None
                    bucket = nxt.setdefault(key, [])
                    for t1 in terms1:
                        for t2 in terms2:
                            bucket.append(t1 + t2)
            out = nxt
        return out

    def walk(e):
        hit = memo.get(e)
        if hit is not None:
            return hit
        if e in index:
            res: Any = {(index[e],): [()]}
        elif not e.args:
            res = {(): [(e,)]}
        else:
            parts = []
            res = None
            for a in e.args:
                p = walk(a)
                if p is giveup:
                    res = giveup
                    break
                parts.append(p)
            if res is None:
                if all(len(p) == 1 and () in p for p in parts):
                    res = {(): [(e,)]}  # no differential below: keep the node itself
                elif e.is_Add:
                    res = {}
                    for p in parts:
                        for k, terms in p.items():
                            res.setdefault(k, []).extend(terms)
                elif e.is_Mul:
                    res = product(parts)
                elif e.is_Pow and e.exp == 2:  # a square (any other power of a differential: give up)
                    res = product([parts[0], parts[0]])
                else:
                    res = None
                if res is None:
                    res = giveup
        memo[e] = res
        return res

    try:
        parts = walk(form)
    except RecursionError:
        return None
    if parts is giveup or any(len(k) != 2 for k in parts):
        return None
    n = len(dsyms)
    g = sympy.zeros(n, n)
    half = sympy.Rational(1, 2)
    for (i, j), terms in parts.items():
        coeff = sympy.Add(*(sympy.Mul(*t) for t in terms))
        if i == j:
            g[i, i] = coeff
        else:
            g[i, j] = g[j, i] = coeff * half
    return g
