"""Proofs of sameness: identical up to renaming, and isometry by the pull-back through a coordinate map
(given with ``--map``, declared in the entry, or found by equating a curvature scalar).
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence

from gravicat.errors import InputError
from gravicat.physics.equivalence_sides import (
    Evidence,
    _assignments,
    _compatible,
    _depends,
    _limited,
    _parse,
    _short,
    _Side,
        _sstr,
)

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

    pairs = _assignments(items, "--map")
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
