"""Proofs of difference from curvature invariants: constants that differ, a constant against a function,
functional dependence (the rank of a Jacobian), relations between invariants and pairs of values one side never
takes. Each proof is an :class:`_Obstruction` with its evidence.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

from gravicat.physics.equivalence_sides import (
    INVARIANTS,
    Evidence,
    _depends,
    _gradient,
    _short,
    _Side,
    _sig_text,
    _sstr,
)

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
