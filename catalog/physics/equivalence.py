"""Comparing two charts: the facts side by side, and a verdict on equivalence that is proved or withheld.

:func:`compare` takes two :class:`Subject` (a validated document and one of its
charts) and returns a :class:`Comparison`: per side the coordinates, signature,
field-equation claim and stored status, parameters and ranges, the obvious
symmetries (coordinates no metric component depends on) and the curvature
invariants (Ricci scalar, Kretschmann scalar R_abcd R^abcd, Weyl square
C_abcd C^abcd) in closed form; then a verdict with its evidence.

Verdicts (``Comparison.verdict``):

``identical``
    B's metric is A's after renaming coordinates (and unmatched parameters):
    every component agrees exactly.
``equivalent``
    proved locally isometric: the pull-back of one metric through a coordinate
    map (``--map``, a transform declared in the entry, or a map found by
    matching a curvature scalar) equals the other metric exactly; or both
    charts have constant curvature with the same value, dimension and
    signature (S. Weinberg, Gravitation and Cosmology (1972), chapter 13:
    a maximally symmetric metric is fixed locally by these; recalled from
    memory).
``not-equivalent``
    proved different: a scalar invariant is constant on one side and not on
    the other, or both constant with different values; two invariants are
    functionally dependent on one side and independent on the other (the
    rank of their Jacobian is invariant); a relation between two invariants
    that holds on one side fails on the other (checked exactly at a point, or
    symbolically); or the signatures or dimensions differ.
``undecided``
    none of the above: "not shown equivalent", with what was tested.

Parameters are identified by ``match`` (``"Q=e"``: B's Q equals A's e, or
A's Q equals B's e when only A has a Q), then by equal names; the others stay
free. A parameter-dependent proof of non-equivalence is used only when at most
one side has free parameters, and then holds for generic values of them.
A coordinate map (``--map``) may name the parameters of either chart by their own names; a
parameter identified by ``match`` stands for what it was identified with.
Every "identically zero" claim goes through :func:`gravicat.engine.geometry.prove_zero`
(exact sampled stage, then exact proof), so "proved" means proved.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

from gravicat.errors import InputError
from gravicat.format.metricfile import MetricDocument

VERDICTS = ("identical", "equivalent", "not-equivalent", "undecided")
INVARIANTS = {"ricci-scalar": "ricci_scalar", "kretschmann": "kretschmann", "weyl-square": "weyl_square"}
GRADIENT = "kretschmann-gradient"  # g^ab d_a P d_b P of the first non-constant invariant P
CONSTANT_CURVATURE_SOURCE = ("S. Weinberg, Gravitation and Cosmology, Wiley (1972), chapter 13 (uniqueness of "
                             "maximally symmetric spaces; recalled from memory)")


@dataclass
class Subject:
    """One side: a validated document, the chart compared and where it came from."""

    doc: MetricDocument
    chart: str
    label: str  # the argument as given (file, ID, ID:CHART)
    revision: str | None = None  # content hash (catalogue entries)
    number: int | None = None  # revision number (catalogue entries)
    status: str = "not stored"  # stored check status of this chart, "unverified", or "not stored" (a file)


@dataclass
class Evidence:
    """One test. ``result``: proved, disproved, consistent, failed, inconclusive or skipped."""

    kind: str
    result: str
    detail: str
    data: dict[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        return {"kind": self.kind, "result": self.result, "detail": self.detail, **self.data}


@dataclass
class Comparison:
    verdict: str
    summary: str
    evidence: list[Evidence]
    sides: list[dict[str, Any]]
    match: dict[str, str]
    coordinate_map: dict[str, Any] | None

    def to_json(self) -> dict[str, Any]:
        return {"verdict": self.verdict, "summary": self.summary, "evidence": [e.to_json() for e in self.evidence],
                "a": self.sides[0], "b": self.sides[1], "match": self.match, "map": self.coordinate_map}


# --------------------------------------------------------------------------- helpers


def _split_item(item: str, option: str) -> tuple[str, str]:
    name, eq, text = item.partition("=")
    name = name.strip()
    if not eq or not name or not text.strip():
        raise InputError(option, None, f"'{item}' is not NAME=EXPRESSION (e.g. {option} "
                                       f"{'Q=e' if option == '--match' else 'r=R*(1+M/(2*R))**2'})")
    return name, text.strip()


def _parse(text: str, env: dict[str, Any], coordinates: Sequence[str], option: str, name: str):
    """Whitelist-parse an expression of the command line with the names of ``env`` declared."""
    from gravicat.format.expr import Names, check_expression, to_sympy

    names = Names(symbols=frozenset(env), coordinates=frozenset(coordinates))
    tree = check_expression(text, names, source=option, field=name)
    return to_sympy(tree, env, {})


def _short(text: str, limit: int = 300) -> str:
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _sstr(expr) -> str:
    import sympy as sp

    return sp.sstr(expr)


def _depends(expr, coords) -> bool:
    """Does ``expr`` depend on a coordinate (directly or through an arbitrary function)?"""
    import sympy as sp

    cs = set(coords)
    if expr.free_symbols & cs:
        return True
    return any(a.free_symbols & cs for a in expr.atoms(sp.core.function.AppliedUndef))


def _limited(fn, seconds: float):
    """Run ``fn()`` in a forked child with a hard time limit: (value, None) or (None, reason)."""
    from gravicat.engine.fork import run_forked

    out = run_forked(lambda emit: fn(), wall_seconds=seconds)
    if out.finished:
        return out.value, None
    if out.error is not None:
        return None, out.error
    if out.limit is not None:
        return None, f"no result within {seconds:g} s"
    return None, "the child process ended without a result"


# --------------------------------------------------------------------------- one side


class _Side:
    """A chart prepared for comparison (parameters already unified with the other side)."""

    def __init__(self, key: str, subject: Subject, spec0):
        self.key = key  # "A" or "B"
        self.subject = subject
        self.spec0 = spec0
        self.spec = spec0
        self.geo = None
        self.inv: dict[str, Any] = {}
        self.inv_note = ""
        self.signature: tuple[int, int, int] | None = None
        self.signature_exact = False
        self.signature_note = ""
        self.identified: dict[str, Any] = {}  # this side's own parameter names -> their value after _unify

    @property
    def coords(self):
        return self.spec.coords

    @property
    def n(self) -> int:
        return len(self.spec.coords)

    @property
    def relations(self):
        return tuple(self.spec.param_ranges) + tuple(self.spec.domain)

    @property
    def name(self) -> str:
        return f"{self.key} ({self.subject.doc.id}:{self.subject.chart})"

    def geometry(self, budget: float):
        if self.geo is None:
            from gravicat.engine.geometry import Geometry

            self.geo = Geometry(self.spec, budget=budget)
        return self.geo

    def zero(self, exprs: dict, budget: float, what: str):
        """prove_zero over this side's coordinates, parameters, ranges and domain."""
        from gravicat.engine.geometry import prove_zero

        return prove_zero(exprs, self.spec.coords, self.spec.params, self.relations, budget=budget, what=what)


def _relations_after(rels, sub, option_items: str, who: str):
    import sympy as sp

    out = []
    for rel in rels:
        new = rel.subs(sub) if sub else rel
        if new is sp.true or new == sp.true:
            continue
        if new is sp.false or new == sp.false:
            raise InputError("--match", None, f"{option_items} puts {who} outside its range '{rel}'")
        out.append(new)
    return tuple(out)


def _unify(a: _Side, b: _Side, match: Sequence[str]):
    """Identify parameters: (display of the match, free params of A, free params of B, names kept apart).

    A parameter of B with the name of one of A's is identified with it unless their signs or
    B's range make that impossible; then B's is renamed NAME_B and both stay free.
    """
    import sympy as sp

    pa = {str(p): p for p in a.spec0.params}
    pb = {str(p): p for p in b.spec0.params}
    sub_a: dict[Any, Any] = {}
    sub_b: dict[Any, Any] = {}
    shown: dict[str, str] = {}
    for item in match:
        name, text = _split_item(item, "--match")
        if name in pb:
            if pb[name] in sub_b:
                raise InputError("--match", name, "given twice")
            sub_b[pb[name]] = _parse(text, pa, (), "--match", name)
            shown[f"B.{name}"] = _sstr(sub_b[pb[name]])
        elif name in pa:
            if pa[name] in sub_a:
                raise InputError("--match", name, "given twice")
            sub_a[pa[name]] = _parse(text, pb, (), "--match", name)
            shown[f"A.{name}"] = _sstr(sub_a[pa[name]])
        else:
            raise InputError("--match", name, f"not a parameter of A ({', '.join(pa) or 'none'}) "
                                              f"or B ({', '.join(pb) or 'none'})")
    identified: set[str] = set()
    conflicts: list[str] = []
    for name, sym in pb.items():
        if sym in sub_b or name not in pa or pa[name] in sub_a:
            continue
        if _compatible(sym, pa[name], b.spec0.param_ranges):
            identified.add(name)
            if pa[name] != sym:
                sub_b[sym] = pa[name]
        else:  # same name, incompatible ranges or signs (e.g. Lambda > 0 and Lambda < 0): two parameters
            conflicts.append(name)
            sub_b[sym] = sp.Symbol(f"{name}_B", **sym.assumptions0)
    used_b = set().union(*(sp.sympify(v).free_symbols for v in sub_a.values())) if sub_a else set()
    own_b = [p for p in b.spec0.params if str(p) not in identified and (p not in sub_b or str(p) in conflicts)]
    free_a = [p for p in a.spec0.params if p not in sub_a and str(p) not in identified]
    free_b = [sub_b.get(p, p) for p in own_b if p not in used_b]
    unified = [p for p in a.spec0.params if p not in sub_a] + [sub_b.get(p, p) for p in own_b]
    items = ", ".join(match)
    ranges_a = _relations_after(a.spec0.param_ranges, sub_a, items, "a parameter of A")
    ranges_b = _relations_after(b.spec0.param_ranges, sub_b, items, "a parameter of B")
    ranges = tuple(dict.fromkeys(ranges_a + ranges_b))
    for side, sub in ((a, sub_a), (b, sub_b)):
        spec = side.spec0
        side.identified = {str(p): sub.get(p, p) for p in spec.params}
        side.spec = replace(
            spec,
            metric=sp.ImmutableMatrix(spec.metric.xreplace(sub)) if sub else spec.metric,
            params=tuple(unified),
            param_ranges=ranges,
            domain=_relations_after(spec.domain, sub, items, f"the domain of {side.key}"),
            defaults={},
            transforms={o: {k: sp.sympify(e).xreplace(sub) for k, e in m.items()} for o, m in spec.transforms.items()},
            potential=None, fluid=None, null_dust=None, observers={}, limits=(), invariants={}, flat_when=(),
            extra={},
        )
    return shown, free_a, free_b, conflicts


def _compatible(sym_b, sym_a, ranges_b) -> bool:
    """Can B's parameter be A's parameter of the same name? (signs and B's ranges agree)."""
    import sympy as sp

    for flag in ("positive", "negative", "nonnegative", "nonpositive", "zero", "nonzero", "integer"):
        fb, fa = getattr(sym_b, f"is_{flag}"), getattr(sym_a, f"is_{flag}")
        if (fb is True and fa is False) or (fa is True and fb is False):
            return False
    return all(not (rel.subs({sym_b: sym_a}) is sp.false or rel.subs({sym_b: sym_a}) == sp.false)
               for rel in ranges_b)


def _signature(side: _Side, budget: float) -> None:
    from gravicat.engine.geometry import inertia

    seen = set()
    exact = True
    try:
        points = side.geometry(budget).sample_points()[:4]
    except Exception:  # noqa: BLE001 - a chart the sampler cannot handle: try the simple points below
        points = []
    if not points:
        _signature_at_simple_points(side)
        return
    for pd in points:
        try:
            sig, ex = inertia(pd.g)
        except (ValueError, TypeError, ZeroDivisionError):
            continue
        seen.add(sig)
        exact &= ex
    if len(seen) == 1:
        side.signature = next(iter(seen))
        side.signature_exact = exact
        side.signature_note = f"at {len(points)} sample points" + ("" if exact else " (floating point)")
    elif seen:
        side.signature_note = "differs between sample points: " + ", ".join(_sig_text(s) for s in sorted(seen))
    else:
        side.signature_note = "no valid sample point in the domain"


def _signature_at_simple_points(side: _Side, tries: int = 400) -> None:
    """Signature at a few simple rational points of the domain, exact where sympy decides every sign.

    Used when the engine draws no sample point. The characteristic polynomial is computed
    exactly; Descartes' rule on its coefficients counts the eigenvalue signs.
    """
    import random

    import sympy as sp

    rng = random.Random(0)
    grid = [sp.Rational(n, d) for n, d in ((1, 3), (1, 2), (1, 1), (3, 2), (2, 1), (3, 1), (5, 1), (7, 1),
                                            (10, 1), (-1, 2), (-1, 1), (-3, 1))]
    defaults = {str(k): v for k, v in side.spec0.defaults.items()}
    params = {p: defaults.get(str(p)) for p in side.spec.params}
    found = []
    lam = sp.Symbol("lambda")
    for _ in range(tries):
        point = {p: (v if v is not None else rng.choice(grid)) for p, v in params.items()}
        point.update({c: rng.choice(grid) for c in side.coords})
        if not all(bool(rel.xreplace(point) == sp.true) for rel in side.relations):
            continue
        g = side.spec.metric.xreplace(point)
        if any(e.has(sp.zoo, sp.nan, sp.oo) or e.free_symbols for e in g):
            continue
        coeffs = sp.Matrix(g).charpoly(lam).all_coeffs()[::-1]  # ascending
        signs = []
        for c in coeffs:
            c = sp.nsimplify(c) if c.is_Float else c
            signs.append(0 if c == 0 else 1 if c.is_positive else -1 if c.is_negative else None)
        if None in signs or all(x == 0 for x in signs):
            continue

        def changes(ss):
            nz = [x for x in ss if x != 0]
            return sum(1 for i in range(1, len(nz)) if nz[i] != nz[i - 1])

        zero = next(i for i, x in enumerate(signs) if x != 0)
        found.append((changes([x if i % 2 == 0 else -x for i, x in enumerate(signs)]), zero, changes(signs)))
        if len(found) == 3:
            break
    if found and len(set(found)) == 1:
        side.signature, side.signature_exact = found[0], True
        side.signature_note = f"at {len(found)} simple points of the domain (exact)"
    elif found:
        side.signature_note = "differs between points: " + ", ".join(_sig_text(x) for x in sorted(set(found)))
    else:
        side.signature_note = "no valid point found in the domain"


def _sig_text(sig) -> str:
    if sig is None:
        return "?"
    neg, zero, pos = sig
    return "(" + ",".join(["-"] * neg + ["0"] * zero + ["+"] * pos) + ")"


def _invariants(side: _Side, budget: float) -> None:
    geo = side.geometry(budget)
    values, err = geo.prove_values(lambda X: {k: getattr(X, a) for k, a in INVARIANTS.items()}, budget)
    if err:
        side.inv = dict.fromkeys(INVARIANTS)
        side.inv_note = ("not computed within the budget" if err == "budget" else f"not computed ({err})") + \
                        f" ({geo.path} path)"
        return
    side.inv = {k: geo.to_sympy(v) for k, v in values.items()}


def _gradient(side: _Side, pivot: str, budget: float):
    """g^ab d_a P d_b P for the invariant P named ``pivot`` (a scalar invariant too)."""
    geo = side.geometry(budget)
    expr = side.inv[pivot]
    n = side.n

    def fn(X):
        d = [X.dval(expr, i) for i in range(n)]
        tot = X.zero
        for a in range(n):
            for b in range(n):
                if not X.vanishes(X.ginv[a][b]) and not X.vanishes(d[a]) and not X.vanishes(d[b]):
                    tot = tot + X.ginv[a][b] * d[a] * d[b]
        return {"N": tot}

    values, err = geo.prove_values(fn, budget)
    if err:
        return None
    return geo.to_sympy(values["N"])


def _symmetries(spec) -> list[str]:
    return [str(c) for c in spec.coords if not any(_depends(e, (c,)) for e in spec.metric)]


# --------------------------------------------------------------------------- identical up to renaming


def _renaming(a: _Side, b: _Side, free_a, free_b, budget: float) -> Evidence | None:
    import sympy as sp

    n = a.n
    if n != b.n:
        return None
    ga, gb = a.spec.metric, b.spec.metric

    def deps(side, g):  # which coordinates (by index) each component depends on
        return [[frozenset(k for k, c in enumerate(side.coords) if _depends(sp.sympify(g[i, j]), (c,)))
                 for j in range(n)] for i in range(n)]

    za = [[ga[i, j] == 0 for j in range(n)] for i in range(n)]
    zb = [[gb[i, j] == 0 for j in range(n)] for i in range(n)]
    da, db = deps(a, ga), deps(b, gb)
    pmaps: list[dict] = [{}]
    if free_a and len(free_a) == len(free_b) and len(free_a) <= 3:
        pmaps = [dict(zip(free_a, perm, strict=True)) for perm in itertools.permutations(free_b)]
        pmaps = [m for m in pmaps if all(_compatible(pb_, pa_, b.spec.param_ranges) for pa_, pb_ in m.items())]
    names_b = [str(c) for c in b.coords]

    def score(perm):  # try same-name and same-position matches first
        return -sum(str(a.coords[i]) == names_b[perm[i]] for i in range(n)) - sum(perm[i] == i for i in range(n))

    def plausible(p):
        return all(za[i][j] == zb[p[i]][p[j]] and frozenset(p[k] for k in da[i][j]) == db[p[i]][p[j]]
                   for i in range(n) for j in range(n))

    perms = sorted((p for p in itertools.permutations(range(n)) if plausible(p)), key=score)
    first_unsure = None
    for pmap in pmaps:
        for number, perm in enumerate(perms):
            sub = {a.coords[i]: b.coords[perm[i]] for i in range(n)}
            sub.update(pmap)
            diffs = {}
            for i in range(n):
                for j in range(i, n):
                    d = sp.sympify(ga[i, j]).xreplace(sub) - gb[perm[i], perm[j]]
                    if d != 0 and sp.cancel(d) != 0:
                        diffs[f"g[{b.coords[perm[i]]},{b.coords[perm[j]]}]"] = d
                        if number or first_unsure is not None or len(diffs) > 3:
                            break
                else:
                    continue
                break
            if not diffs:
                return _renaming_evidence(a, b, sub, "every component agrees exactly (cancel)")
            if first_unsure is None and number == 0 and len(diffs) <= 3:
                first_unsure = (sub, diffs)
    if first_unsure is not None:
        sub, diffs = first_unsure
        outcome = b.zero(diffs, budget, "the renamed components of A and those of B")
        if outcome.status == "pass":
            return _renaming_evidence(a, b, sub, f"every component agrees ({outcome.detail})")
    return None


def _renaming_evidence(a, b, sub, how) -> Evidence:
    renamed = {str(k): str(v) for k, v in sub.items() if str(k) != str(v)}
    text = ", ".join(f"{k} -> {v}" for k, v in renamed.items())
    detail = (f"B is A with the symbols renamed ({text}); {how}" if renamed
              else f"the same metric in the same coordinates; {how}")
    return Evidence("renaming", "proved", detail, {"renaming": renamed})


# --------------------------------------------------------------------------- coordinate maps


def _pullback(src: _Side, dst: _Side, X: list, budget: float):
    """prove_zero of (X^* g_src) - g_dst, where ``X`` gives src's coordinates as functions of dst's."""
    import sympy as sp

    n, m = dst.n, src.n
    Gs = src.spec.metric.xreplace(dict(zip(src.coords, X, strict=True)))
    J = [[sp.diff(X[i], dst.coords[a]) for a in range(n)] for i in range(m)]
    exprs = {}
    for a in range(n):
        for b in range(a, n):
            tot = sp.Integer(0)
            for i in range(m):
                if J[i][a] == 0:
                    continue
                for j in range(m):
                    if J[j][b] != 0 and Gs[i, j] != 0:
                        tot += J[i][a] * J[j][b] * Gs[i, j]
            exprs[f"g[{dst.coords[a]},{dst.coords[b]}]"] = tot - dst.spec.metric[a, b]
    return dst.zero(exprs, budget, f"the pull-back of {src.key}'s metric and {dst.key}'s metric")


def _map_text(src: _Side, X) -> dict[str, str]:
    return {str(c): _sstr(e) for c, e in zip(src.coords, X, strict=True)}


def _map_evidence(kind: str, src: _Side, dst: _Side, X, outcome, origin: str) -> Evidence:
    mapping = _map_text(src, X)
    shown = ", ".join(f"{k} = {v}" for k, v in mapping.items() if k != v)
    data = {"map": mapping, "direction": f"{src.key} coordinates in terms of {dst.key} coordinates",
            "method": outcome.method}
    if outcome.status == "pass":
        return Evidence(kind, "proved", f"{origin} ({shown or 'identity'}): the pull-back of {src.key}'s metric "
                                        f"equals {dst.key}'s metric; {outcome.detail}", data)
    if outcome.status == "fail":
        data["counterexample"] = outcome.counterexample
        return Evidence(kind, "failed", f"{origin} ({shown or 'identity'}) is not an isometry: "
                                        f"{_short(outcome.detail)}", data)
    return Evidence(kind, "inconclusive", f"{origin} ({shown or 'identity'}): {_short(outcome.detail)}", data)


def _user_map(a: _Side, b: _Side, items: Sequence[str], budget: float) -> tuple[Evidence, dict]:
    """Parse --map items (coordinates of one chart in terms of the other's) and test the pull-back."""
    from gravicat.errors import UnsafeExpression

    pairs = [_split_item(item, "--map") for item in items]
    lhs = [name for name, _ in pairs]
    if len(set(lhs)) != len(lhs):
        raise InputError("--map", None, "a coordinate is given twice")
    # the parameters of both charts under their own names (B's m with --match m=M stands for A's M),
    # then the unified ones (a name kept apart is reached as NAME_B); A's name wins a clash
    params = {**b.identified, **a.identified, **{str(p): p for p in a.spec.params}}
    names_a, names_b = [str(c) for c in a.coords], [str(c) for c in b.coords]
    first_error = None
    for src, dst, src_names, dst_names in ((a, b, names_a, names_b), (b, a, names_b, names_a)):
        if not all(name in src_names for name in lhs):
            continue
        env = {**params, **{str(c): c for c in dst.coords}}
        try:
            given = {name: _parse(text, env, dst_names, "--map", name) for name, text in pairs}
        except UnsafeExpression as exc:
            first_error = first_error or exc
            continue
        X = []
        for c in src.coords:
            if str(c) in given:
                X.append(given[str(c)])
            elif str(c) in dst_names:
                X.append(dst.coords[dst_names.index(str(c))])
            else:
                raise InputError("--map", str(c), f"no expression given for {src.key}'s coordinate '{c}', and "
                                                  f"{dst.key} has no coordinate of that name")
        outcome = _pullback(src, dst, X, budget)
        ev = _map_evidence("map", src, dst, X, outcome, "the given map")
        return ev, {"direction": ev.data["direction"], "expressions": ev.data["map"]}
    if first_error is not None:
        raise first_error
    raise InputError("--map", None, f"the left-hand sides ({', '.join(lhs)}) must all be coordinates of A "
                                    f"({', '.join(names_a)}) or all of B ({', '.join(names_b)})")


def _declared_map(a: _Side, b: _Side, budget: float) -> Evidence | None:
    if a.subject.doc.id != b.subject.doc.id or a.subject.chart == b.subject.chart:
        return None
    for owner, other in ((a, b), (b, a)):
        mapping = owner.spec.transforms.get(other.subject.chart)
        if not mapping:
            continue
        # the declared map gives other's coordinates in terms of owner's: pull other back to owner
        X = [mapping[str(c)] for c in other.coords] if all(str(c) in mapping for c in other.coords) else None
        if X is None:
            continue
        outcome = _pullback(other, owner, X, budget)
        return _map_evidence("declared-map", other, owner, X, outcome,
                             f"the transform declared in chart {owner.subject.chart}")
    return None


def _search_map(a: _Side, b: _Side, pivot: str, budget: float) -> Evidence | None:
    """Solve P_A(x) = P_B(y) for the one coordinate x of A that the invariant P_A depends on; try each root."""
    import sympy as sp

    pa, pb = a.inv.get(pivot), b.inv.get(pivot)
    if pa is None or pb is None:
        return None
    xa = [c for c in a.coords if _depends(pa, (c,))]
    if len(xa) != 1 or pa.atoms(sp.core.function.AppliedUndef):
        return None
    x = xa[0]
    names_b = [str(c) for c in b.coords]
    others = [c for c in a.coords if c != x]
    if not all(str(c) in names_b for c in others):
        return None
    dummy = sp.Dummy("x", positive=True)

    def solve():
        return [s for s in sp.solve(sp.Eq(pa.xreplace({x: dummy}), pb), dummy)
                if not s.has(sp.I) and s.is_real is not False]

    roots, err = _limited(solve, min(budget, 15.0))
    if err or not roots:
        return None
    for root in roots[:4]:
        X = [root if c == x else b.coords[names_b.index(str(c))] for c in a.coords]
        outcome = _pullback(a, b, X, budget)
        if outcome.status == "pass":
            return _map_evidence("found-map", a, b, X, outcome, f"a map found by equating the {pivot} scalars")
    return None


# --------------------------------------------------------------------------- invariants: proofs of difference


@dataclass
class _Obstruction:
    evidence: Evidence
    needs_identification: bool  # uses how the parameters of A and B are identified
    summary: str = ""
    for_all: bool = False  # holds for every parameter value, not only generic ones


def _point_text(counterexample) -> str:
    pt = (counterexample or {}).get("point") or {}
    return ", ".join(f"{k} = {v}" for k, v in pt.items())


def _constant(expr, coords) -> bool:
    return not _depends(expr, coords)


def _nonconstant_proof(side: _Side, expr, name: str, budget: float):
    """An Outcome 'fail' when some partial derivative of ``expr`` is provably non-zero."""
    import sympy as sp

    grads = {f"d{name}/d{c}": sp.diff(expr, c) for c in side.coords if _depends(expr, (c,))}
    if not grads:
        return None
    return side.zero(grads, budget, f"the derivatives of the {name}")


def _param_factors(expr, side: _Side) -> list[str]:
    """Factors of the numerator of ``expr`` that involve parameters only: where the evidence may vanish."""
    import sympy as sp

    try:
        num = sp.numer(sp.together(expr))
        _, factors = sp.factor_list(num)
    except (sp.PolynomialError, NotImplementedError, TypeError):
        return []
    out = []
    for f, _mult in factors:
        if f.free_symbols and not _depends(f, side.coords):
            out.append(f"{_sstr(f)} = 0")
    return out


def _compare_constants(name: str, a: _Side, b: _Side, budget: float) -> tuple[Evidence | None, _Obstruction | None]:
    import sympy as sp

    ca, cb = a.inv[name], b.inv[name]
    d = sp.cancel(ca - cb)
    if d == 0:
        return Evidence("invariant", "consistent", f"{name} = {_sstr(ca)} in both"), None
    if not d.free_symbols:
        proved = d.is_zero is False
    else:
        proved = b.zero({name: d}, budget, f"the difference of the constant {name}").status == "fail"
    if not proved:
        return Evidence("invariant", "inconclusive", f"{name}: {_sstr(ca)} in A, {_sstr(cb)} in B; "
                                                     "their difference was not shown non-zero"), None
    exceptions = _param_factors(d, b)
    opposite = (ca.is_positive and cb.is_negative) or (ca.is_negative and cb.is_positive) or \
               (ca.is_zero and cb.is_nonzero) or (ca.is_nonzero and cb.is_zero)
    detail = (f"{name} is the constant {_sstr(ca)} in A but {_sstr(cb)} in B; a scalar invariant must agree at "
              "corresponding points" + ("; their signs differ for every parameter value" if opposite else
                                        f" (they agree only where {' or '.join(exceptions)})" if exceptions else ""))
    return None, _Obstruction(Evidence("invariant-constant", "disproved", detail,
                                       {"invariant": name, "a": _sstr(ca), "b": _sstr(cb)}),
                              bool(d.free_symbols) and not opposite,
                              f"{name} = {_sstr(ca)} in A but {_sstr(cb)} in B", for_all=bool(opposite))


def _const_vs_function(name, const_side: _Side, func_side: _Side, budget) -> _Obstruction | None:
    outcome = _nonconstant_proof(func_side, func_side.inv[name], name, budget)
    if outcome is None or outcome.status != "fail":
        return None
    where = _point_text(outcome.counterexample)
    where = f" (e.g. at {where})" if where else ""
    detail = (f"{name} is the constant {_sstr(const_side.inv[name])} in {const_side.key} but a non-constant "
              f"function in {func_side.key}: {_short(_sstr(func_side.inv[name]), 160)}, whose derivative is "
              f"provably non-zero{where}")
    return _Obstruction(Evidence("invariant-constant", "disproved", detail,
                                 {"invariant": name, const_side.key.lower(): _sstr(const_side.inv[name]),
                                  func_side.key.lower(): _sstr(func_side.inv[name])}), False,
                        f"{name} is constant in {const_side.key} but not in {func_side.key}")


def _minors(side: _Side, p, q) -> dict:
    import sympy as sp

    cs = [c for c in side.coords if _depends(p, (c,)) or _depends(q, (c,))]
    dp = {c: sp.diff(p, c) for c in cs}
    dq = {c: sp.diff(q, c) for c in cs}
    return {f"d{ci}^d{cj}": dp[ci] * dq[cj] - dp[cj] * dq[ci] for ci, cj in itertools.combinations(cs, 2)}


def _relation_tests(pn: str, jn: str, x: _Side, y: _Side, budget: float,
                    out: list[Evidence]) -> tuple[_Obstruction | None, bool]:
    """Relations between invariants pn and jn found in x, tested in y: (obstruction, x has rank 1)."""
    import sympy as sp

    p, j = x.inv[pn], x.inv[jn]
    minors = _minors(x, p, j)
    if minors:
        rank_x = x.zero(minors, budget, f"the Jacobian minors of ({pn}, {jn})")
        if rank_x.status != "pass":
            return None, False  # independent in x (or undecided): no relation to test
    # rank 1 in x: jn is a function of pn
    minors_y = _minors(y, y.inv[pn], y.inv[jn])
    if minors_y:
        rank_y = y.zero(minors_y, budget, f"the Jacobian minors of ({pn}, {jn})")
        if rank_y.status == "fail":
            where = _point_text(rank_y.counterexample)
            detail = (f"in {x.key}, {jn} is a function of {pn} (d({pn}) ^ d({jn}) = 0, proved); in {y.key} they "
                      f"are functionally independent (d({pn}) ^ d({jn}) != 0"
                      + (f", e.g. at {where}" if where else f": {_short(rank_y.detail, 200)}") + "); "
                      "functional dependence of scalar invariants is preserved by every isometry")
            return _Obstruction(Evidence("invariant-rank", "disproved", detail,
                                         {"invariants": [pn, jn], "counterexample": rank_y.counterexample}),
                                False, f"{jn} is a function of {pn} in {x.key} but not in {y.key}"), True
    ratio = sp.cancel(j / p) if p != 0 else None
    if ratio is None or _depends(ratio, x.coords):
        return None, True
    rel = f"{jn} = {pn}" if ratio == 1 else f"{jn} = ({_sstr(ratio)})*{pn}"
    residual = y.inv[jn] - ratio * y.inv[pn]
    shown = sp.cancel(residual)
    if shown == 0:
        out.append(Evidence("invariant-relation", "consistent", f"{rel} in both"))
        return None, True
    outcome = y.zero({f"{jn} - ({_sstr(ratio)})*{pn}": residual}, budget, f"the relation {rel} of {x.key}")
    if outcome.status != "fail":
        return None, True
    exceptions = _param_factors(shown, y)
    detail = (f"in {x.key}, {rel} identically; in {y.key}, {jn} - "
              f"{'' if ratio == 1 else '(' + _sstr(ratio) + ')*'}{pn} = {_short(_sstr(shown), 200)}, "
              "not zero" + (f" (zero only where {' or '.join(exceptions)})" if exceptions else ""))
    return _Obstruction(Evidence("invariant-relation", "disproved", detail,
                                 {"relation": rel, "in": x.key, "residual": _sstr(shown)}),
                        bool(ratio.free_symbols), f"{rel} holds in {x.key} but not in {y.key}"), True


def _pair_tests(pn: str, jn: str, a: _Side, b: _Side, budget: float, out: list[Evidence]) -> _Obstruction | None:
    """Symbolic relation tests in both directions first, then the exact pointwise test."""
    rank1 = []
    for x, y in ((a, b), (b, a)):
        ob, dependent = _relation_tests(pn, jn, x, y, budget, out)
        if ob is not None:
            return ob
        if dependent:
            rank1.append((x, y))
    for x, y in rank1:
        ob = _pointwise(pn, jn, x, y, out)
        if ob is not None:
            return ob
    return None


def _rational_in(expr, var) -> tuple[Any, Any] | None:
    """(numerator, denominator) as polynomials in ``var`` when ``expr`` is rational in it."""
    import sympy as sp

    num, den = sp.fraction(sp.cancel(sp.together(expr)))
    try:
        return sp.Poly(num, var), sp.Poly(den, var)
    except sp.PolynomialError:
        return None


def _point_values(y: _Side, exprs: list, pd) -> list | None:
    """Exact rational values of ``exprs`` at a sample point of y, or None."""
    import sympy as sp

    sample = pd.sample
    sub = {s: sp.Rational(v.numerator, v.denominator) for s, v in sample.values.items()}
    for coord, (u, q) in sample.angles.items():
        if q != 1:
            return None
        uu = sp.Rational(u.numerator, u.denominator)
        sub[sp.cos(coord)] = (1 - uu**2) / (1 + uu**2)
        sub[sp.sin(coord)] = 2 * uu / (1 + uu**2)
    out = []
    for e in exprs:
        v = sp.sympify(e).xreplace(sub)
        if not v.is_Rational:
            return None
        out.append(v)
    return out


def _pointwise(pn: str, jn: str, x: _Side, y: _Side, out: list[Evidence]) -> _Obstruction | None:
    """In x, pn and jn depend on one coordinate; find a point of y whose pair of values x never takes.

    At the parameter values of a sample point of y, the values (p0, j0) of y's invariants are
    exact rationals; x takes them together at some (even complex) point only if the polynomials
    num_P - p0 den_P and num_J - j0 den_J in x's coordinate have a common root (their gcd).
    """
    import sympy as sp

    p, j = x.inv[pn], x.inv[jn]
    var = [c for c in x.coords if _depends(p, (c,)) or _depends(j, (c,))]
    if len(var) != 1 or p.atoms(sp.core.function.AppliedUndef) or j.atoms(sp.core.function.AppliedUndef):
        return None
    v = var[0]
    rp, rj = _rational_in(p, v), _rational_in(j, v)
    if rp is None or rj is None:
        return None
    try:
        points = y.geometry(0).sample_points()
    except Exception:  # noqa: BLE001 - no sample point: no pointwise test
        return None
    params = set(x.spec.params)
    tested = 0
    for pd in points:
        vals = _point_values(y, [y.inv[pn], y.inv[jn]], pd)
        if vals is None:
            continue
        p0, j0 = vals
        psub = {s: sp.Rational(f.numerator, f.denominator) for s, f in pd.sample.values.items() if s in params}
        try:
            fp = sp.Poly((rp[0].as_expr() - p0 * rp[1].as_expr()).xreplace(psub), v, domain="QQ")
            fj = sp.Poly((rj[0].as_expr() - j0 * rj[1].as_expr()).xreplace(psub), v, domain="QQ")
        except (sp.PolynomialError, sp.CoercionFailed):
            continue
        if fp.is_zero or fj.is_zero:
            continue
        tested += 1
        if sp.gcd(fp, fj).degree() == 0:
            where = ", ".join(f"{k} = {val}" for k, val in pd.sample.shown.items())
            detail = (f"in {x.key}, {jn} and {pn} are both functions of {v} alone; at the point of {y.key} "
                      f"({where}) {pn} = {p0} and {jn} = {j0}, a pair of values {x.key} takes at no point "
                      f"(for {v} the polynomial equations {pn} = {p0} and {jn} = {j0} have no common root, "
                      "not even a complex one)")
            return _Obstruction(Evidence("invariant-relation", "disproved", detail,
                                         {"invariants": [pn, jn], "point": dict(pd.sample.shown),
                                          "values": {pn: str(p0), jn: str(j0)}}), True,
                                f"a pair of values of ({pn}, {jn}) in {y.key} never occurs in {x.key}")
    if tested:
        out.append(Evidence("invariant-relation", "consistent",
                            f"at {tested} exact sample points of {y.key} the values of ({pn}, {jn}) are also taken "
                            f"in {x.key}"))
    return None


def _obstructions(a: _Side, b: _Side, budget: float, out: list[Evidence]) -> list[_Obstruction]:
    """Search for a proof of non-equivalence; appends consistent findings to ``out``."""
    found: list[_Obstruction] = []
    aux = max(2.0, budget / 4)
    if a.n != b.n:
        found.append(_Obstruction(Evidence("dimension", "disproved", f"A has {a.n} coordinates, B has {b.n}"), False,
                                  f"A has {a.n} coordinates, B has {b.n}"))
        return found
    if a.signature and b.signature and a.signature_exact and b.signature_exact:
        if a.signature != b.signature:
            found.append(_Obstruction(Evidence(
                "signature", "disproved", f"the signature is {_sig_text(a.signature)} in A and "
                                          f"{_sig_text(b.signature)} in B (exact at sample points)"), False,
                f"the signatures differ: {_sig_text(a.signature)} and {_sig_text(b.signature)}"))
            return found
        out.append(Evidence("signature", "consistent", f"{_sig_text(a.signature)} in both"))
    both_functions = []
    for name in INVARIANTS:
        if a.inv.get(name) is None or b.inv.get(name) is None:
            continue
        if _compare_unless_both_vary(name, a, b, aux, out, found):
            both_functions.append(name)
    if found:
        return found
    if not both_functions:
        return found
    pivot = both_functions[0]
    for other in both_functions[1:]:
        ob = _pair_tests(pivot, other, a, b, aux, out)
        if ob is not None:
            found.append(ob)
            return found
    # the gradient norm of the pivot: a differential invariant that separates, e.g., Kerr from Schwarzschild
    na, nb = _gradient(a, pivot, budget), _gradient(b, pivot, budget)
    if na is None or nb is None:
        out.append(Evidence("invariant", "inconclusive", f"|grad {pivot}|^2 not computed within the budget"))
        return found
    gname = f"|grad {pivot}|^2"
    a.inv[gname], b.inv[gname] = na, nb
    if _compare_unless_both_vary(gname, a, b, aux, out, found):
        ob = _pair_tests(pivot, gname, a, b, aux, out)
        if ob is not None:
            found.append(ob)
    return found


def _compare_unless_both_vary(name: str, a, b, aux, out: list, found: list) -> bool:
    """Compare invariant ``name`` of both sides when it is constant on at least one side (evidence
    into ``out``, an obstruction into ``found``); True when it varies on both sides (then it
    needs the pairwise tests)."""
    ka, kb = _constant(a.inv[name], a.coords), _constant(b.inv[name], b.coords)
    if ka and kb:
        ev, ob = _compare_constants(name, a, b, aux)
        if ob is not None:
            found.append(ob)
        elif ev is not None:
            out.append(ev)
        return False
    if ka != kb:
        const_side, func_side = (a, b) if ka else (b, a)
        ob = _const_vs_function(name, const_side, func_side, aux)
        if ob is not None:
            found.append(ob)
        return False
    return True


def _constant_curvature(side: _Side, budget: float):
    """Outcome of R_abcd = R/(n(n-1)) (g_ac g_bd - g_ad g_bc) with R constant, or None when R is not constant."""
    r = side.inv.get("ricci-scalar")
    w = side.inv.get("weyl-square")
    if r is None or not _constant(r, side.coords) or (w is not None and w != 0):
        return None
    geo = side.geometry(budget)
    n = side.n
    pairs = [(i, j) for i in range(n) for j in range(i + 1, n)]

    def fn(X):
        k = X.ricci_scalar / (n * (n - 1))
        out = {}
        for ia, (a, b) in enumerate(pairs):
            for c, d in pairs[ia:]:
                out[X.label("C", a, b, c, d)] = X.riemann_lower[a][b][c][d] - k * (
                    X.g[a][c] * X.g[b][d] - X.g[a][d] * X.g[b][c])
        return out

    return geo.verify(fn, budget=budget, what="R_abcd = R/(n(n-1)) (g_ac g_bd - g_ad g_bc)")


# --------------------------------------------------------------------------- the comparison


def _side_json(side: _Side, shown_match: dict[str, str]) -> dict[str, Any]:
    s = side.subject
    doc = s.doc.data
    params = []
    for name, p in doc["parameters"].items():
        params.append({"name": name, "range": p.get("range"), "matched": shown_match.get(f"{side.key}.{name}")})
    syms = _symmetries(side.spec)
    return {
        "subject": s.label,
        "entry": s.doc.id,
        "chart": s.chart,
        "title": doc["title"],
        "revision": s.revision,
        "number": s.number,
        "source": s.doc.source,
        "coordinates": [str(c) for c in side.coords],
        "signature": _sig_text(side.signature) if side.signature else None,
        "signature_note": side.signature_note,
        "field_equations": doc["field-equations"],
        "status": s.status,
        "parameters": params,
        "symmetries": {"dimension": len(syms), "coordinates": syms},
        "invariants": {k: (_sstr(side.inv[k]) if side.inv.get(k) is not None else None) for k in INVARIANTS},
        "invariants_note": side.inv_note,
    }


def compare(a: Subject, b: Subject, *, match: Sequence[str] = (), coordinate_map: Sequence[str] = (),
            budget: float = 20.0, search_map: bool = True) -> Comparison:
    """Compare chart ``a.chart`` of ``a.doc`` with chart ``b.chart`` of ``b.doc``. See the module docstring."""
    from gravicat.format.metricfile import build_chart

    sa = _Side("A", a, build_chart(a.doc, a.chart))
    sb = _Side("B", b, build_chart(b.doc, b.chart))
    shown, free_a, free_b, apart = _unify(sa, sb, match)
    evidence: list[Evidence] = [
        Evidence("parameters", "skipped", f"A's {name} and B's {name} are not identified (incompatible ranges or "
                                          f"signs); B's is called {name}_B here") for name in apart]
    verdict, summary = None, ""
    mapping = None
    if coordinate_map and sa.n != sb.n:
        raise InputError("--map", None, f"A has {sa.n} coordinates and B {sb.n}: no coordinate map between them")

    ren = _renaming(sa, sb, free_a, free_b, budget)
    if ren is not None:
        evidence.append(ren)
        verdict, summary = "identical", "the same chart up to renaming of symbols"
    if verdict is None and coordinate_map:
        ev, mapping = _user_map(sa, sb, coordinate_map, budget)
        evidence.append(ev)
        if ev.result == "proved":
            verdict, summary = "equivalent", "proved equal by pull-back through the given map"
    if verdict is None and not coordinate_map:
        ev = _declared_map(sa, sb, budget)
        if ev is not None:
            evidence.append(ev)
            if ev.result == "proved":
                verdict, summary = "equivalent", "proved equal by pull-back through the declared transform"

    for side in (sa, sb):
        _invariants(side, budget)
        _signature(side, budget)

    if verdict is None:
        verdict, summary = _decide(sa, sb, free_a, free_b, evidence, budget, search_map)
    if shown:
        summary += " (with " + ", ".join(f"{k} = {v}" for k, v in shown.items()) + ")"
    sides = [_side_json(sa, shown), _side_json(sb, shown)]
    for side, js in ((sa, sides[0]), (sb, sides[1])):
        extra = {k: _sstr(v) for k, v in side.inv.items() if k not in INVARIANTS and v is not None}
        if extra:
            js["invariants"].update(extra)
    return Comparison(verdict, summary, evidence, sides, shown, mapping)


def _decide(sa: _Side, sb: _Side, free_a, free_b, evidence: list[Evidence], budget: float,
            search_map: bool) -> tuple[str, str]:
    both_free = bool(free_a) and bool(free_b)
    if both_free:
        original = {str(p) for p in sb.spec0.params}
        hint = (f" (give --match, e.g. --match {free_b[0]}={free_a[0]})" if str(free_b[0]) in original else "")
        evidence.append(Evidence("parameters", "skipped",
                                 f"parameters not identified: {', '.join(map(str, free_a))} (A) and "
                                 f"{', '.join(map(str, free_b))} (B); evidence that depends on how they are "
                                 f"identified is not used{hint}"))
    consistent: list[Evidence] = []
    found = _obstructions(sa, sb, budget, consistent)
    usable = [o for o in found if not (both_free and o.needs_identification)]
    if usable:
        ob = usable[0]
        evidence.append(ob.evidence)
        free = [str(p) for p in free_a + free_b]
        qual = f" for generic values of {', '.join(free)}" if free and not ob.for_all else ""
        return "not-equivalent", f"not equivalent{qual}: {ob.summary}"
    for o in found:
        evidence.append(Evidence(o.evidence.kind, "skipped", "not used (parameters not identified): "
                                 + o.evidence.detail, o.evidence.data))
    evidence.extend(consistent)

    # both of constant curvature with the same value: locally isometric
    if sa.n == sb.n and sa.signature is not None and sa.signature == sb.signature:
        ra, rb = sa.inv.get("ricci-scalar"), sb.inv.get("ricci-scalar")
        if ra is not None and rb is not None and _constant(ra, sa.coords) and _constant(rb, sb.coords):
            import sympy as sp

            if sp.cancel(ra - rb) == 0:
                oa = _constant_curvature(sa, budget)
                ob_ = _constant_curvature(sb, budget) if oa is not None and oa.status == "pass" else None
                if oa is not None and ob_ is not None and oa.status == "pass" and ob_.status == "pass":
                    k = sp.factor(ra / (sa.n * (sa.n - 1)))
                    evidence.append(Evidence(
                        "constant-curvature", "proved",
                        f"both charts have constant curvature: R_abcd = K (g_ac g_bd - g_ad g_bc) with "
                        f"K = R/{sa.n * (sa.n - 1)} = {_sstr(k)} (proved in each chart; A: {oa.method}, B: "
                        f"{ob_.method}), the same signature {_sig_text(sa.signature)} and dimension {sa.n}; such "
                        f"metrics are locally isometric ({CONSTANT_CURVATURE_SOURCE})",
                        {"curvature": _sstr(k), "ricci_scalar": _sstr(ra), "source": CONSTANT_CURVATURE_SOURCE}))
                    return "equivalent", (f"locally: both have constant curvature with "
                                          f"R = {_sstr(ra)}")
    if search_map:
        pivot = next((k for k in ("kretschmann", "weyl-square", "ricci-scalar")
                      if sa.inv.get(k) is not None and sb.inv.get(k) is not None
                      and not _constant(sa.inv[k], sa.coords) and not _constant(sb.inv[k], sb.coords)), None)
        if pivot is not None:
            ev = _search_map(sa, sb, pivot, budget)
            if ev is not None:
                evidence.append(ev)
                return "equivalent", "proved equal by pull-back through a map found from the curvature scalars"
    missing = [s.name for s in (sa, sb) if s.inv_note]
    note = f"; curvature not computed for {', '.join(missing)}" if missing else ""
    evidence.append(Evidence("verdict", "inconclusive",
                             "no coordinate map proved and no invariant separates the charts" + note))
    return "undecided", "not shown equivalent: no isometry was proved and no invariant separates the charts" + note
