"""The two sides of a comparison: subjects, evidence, and each chart prepared (parameters unified,
signature, curvature invariants, obvious symmetries). See :mod:`gravicat.physics.equivalence`.
"""

from __future__ import annotations

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


def _assignments(items: Sequence[str], option: str) -> list[tuple[str, str]]:
    """``(name, text)`` pairs of a repeatable ``NAME=EXPR`` option (``--match``, ``--map``).

    Split by the one ``NAME=VALUE`` parser (:mod:`gravicat.format.assign`): an item may hold
    several comma-separated assignments, and a malformed one reads as in every other command.
    """
    from gravicat.format.assign import split_assignments

    return [pair for item in items for pair in split_assignments(item, option)]


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
    from gravicat.engine.fork import describe_limit, run_forked

    out = run_forked(lambda emit: fn(), wall_seconds=seconds)
    if out.finished:
        return out.value, None
    if out.error is not None:
        return None, out.error
    if out.limit == "wall":
        return None, f"no result within {seconds:g} s"
    return None, describe_limit(out, None, seconds)  # the memory cap, or how the child ended


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
            raise InputError("--set", None, f"{option_items} puts {who} outside its range '{rel}'")
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
    from gravicat.format.assign import parse_assignments

    pairs = _assignments(match, "--set")
    for name, _text in pairs:
        if name not in pb and name not in pa:
            raise InputError("--set", name, f"not a parameter of A ({', '.join(pa) or 'none'}) "
                                              f"or B ({', '.join(pb) or 'none'})")
    # B's parameters in terms of A's, and A's (named only by A) in terms of B's: each value is an
    # expression in the other side's parameters, read by the one NAME=VALUE parser
    to_b = parse_assignments([f"{n}={t}" for n, t in pairs if n in pb], "--set", allowed=pb, env=pa,
                             kind="parameter of B", numbers=False, chained=False)
    to_a = parse_assignments([f"{n}={t}" for n, t in pairs if n not in pb], "--set", allowed=pa, env=pb,
                             kind="parameter of A", numbers=False, chained=False)
    for name, _text in pairs:
        if name in to_b:
            sub_b[pb[name]] = to_b[name]
            shown[f"B.{name}"] = _sstr(to_b[name])
        else:
            sub_a[pa[name]] = to_a[name]
            shown[f"A.{name}"] = _sstr(to_a[name])
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
