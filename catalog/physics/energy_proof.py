"""Energy conditions proved on the whole domain and parameter ranges where an inequality can be proved.

Hawking & Ellis, The Large Scale Structure of Space-Time, 1973, sec. 4.3, for a stress tensor of
Hawking-Ellis type I with energy density ``rho`` and principal pressures ``p_i`` (n dimensions):

* null (NEC): ``rho + p_i >= 0``;  weak (WEC): NEC and ``rho >= 0``;
* strong (SEC): NEC and ``(n - 3) rho + sum p_i >= 0`` (``rho + sum p_i`` in four dimensions);
* dominant (DEC): ``rho >= |p_i|``, i.e. ``rho - p_i >= 0`` and ``rho + p_i >= 0`` (and ``rho >= 0``).

The exact case handled (from the engine's exact Einstein tensor, :func:`gravicat.physics.matter.stress_energy8`):
``T^a_b`` is diagonal in the chart and, on each block of coordinates the metric couples
(``g_ab != 0`` joins ``a`` and ``b``), constant on the diagonal - the static and cosmological charts,
also in Eddington-Finkelstein form. Then the coordinate vectors are eigenvectors, the blocks are
orthogonal, and the block whose determinant is negative is the Lorentzian one (the metric has the
signature (-,+,...,+), which the ``signature`` check proves): its eigenvalue is ``-rho``, the other
blocks give the ``p_i``. Every quantity of the conditions is then an exact rational function of the
chart, and its sign on the region is shown by :func:`gravicat.physics.positivity.sign_on_region`
(method ``proved``), else checked at the engine's exact sample points and along a scan of each
non-angular coordinate from the first of them (method ``sampled``). A negative value at an exact
point is a violation shown by that point (method ``proved``): the point, the quantity, its exact
value and the violating vector (numerical components).

Anything else returns None, and the caller uses the sampled frame analysis of
:func:`gravicat.physics.matter.energy_conditions`.

Room: physics.
"""

from __future__ import annotations

from typing import Any

__all__ = ["proved_energy_conditions", "CONDITIONS"]

CONDITIONS = ("null", "weak", "strong", "dominant")

_SCAN = ("1/1000", "1/100", "1/10", "1/3", "1", "3", "10", "100")
_INSIDE = ("1/1000", "1/100", "1/10", "1/2", "9/10", "99/100", "999/1000")


def _blocks(geometry):
    """Index sets of the coordinates the metric couples (connected components of g_ab != 0)."""
    n, g = geometry.n, geometry.g
    parent = list(range(n))

    def find(i):
        while parent[i] != i:
            i = parent[i]
        return i

    for a in range(n):
        for b in range(a + 1, n):
            if not geometry.is_zero(g[a][b]):
                parent[find(a)] = find(b)
    groups: dict = {}
    for a in range(n):
        groups.setdefault(find(a), []).append(a)
    return list(groups.values())


def _det(X, idx):
    """The determinant of the block ``idx`` of the metric (Laplace expansion, exact)."""
    g = X.g
    if len(idx) == 1:
        return g[idx[0]][idx[0]]
    total = None
    a = idx[0]
    for k, b in enumerate(idx):
        if X._iz(g[a][b]):
            continue
        minor = _det_rows(X, idx[1:], [c for c in idx if c != b])
        term = g[a][b] * minor
        term = term if k % 2 == 0 else -term
        total = term if total is None else total + term
    return X.zero if total is None else total


def _det_rows(X, rows, cols):
    g = X.g
    if len(rows) == 1:
        return g[rows[0]][cols[0]]
    total = None
    a = rows[0]
    for k, b in enumerate(cols):
        if X._iz(g[a][b]):
            continue
        term = g[a][b] * _det_rows(X, rows[1:], [c for c in cols if c != b])
        term = term if k % 2 == 0 else -term
        total = term if total is None else total + term
    return X.zero if total is None else total


def _mixed8(X, spec, include_lambda):
    from gravicat.physics.matter import _mixed, stress_energy8

    return _mixed(X, stress_energy8(X, spec, include_lambda))


def _fmt_exact(v) -> str:
    """An exact value at a point (flint fmpq, or sympy) as text, divided by 8 pi."""
    import sympy as sp

    try:
        import flint

        if isinstance(v, flint.fmpq):
            return sp.sstr(sp.Rational(int(v.p), int(v.q)) / (8 * sp.pi))
        if isinstance(v, flint.arb):  # an interval: its midpoint, marked as approximate
            return "~" + v.mid().str(15, radius=False) + "/(8*pi)"
    except ImportError:  # pragma: no cover
        pass
    if isinstance(v, sp.Basic):
        return sp.sstr(v / (8 * sp.pi))
    import mpmath as mp

    return "~" + mp.nstr(v, 15) + "/(8*pi)"


def _sign_at(pd, v):
    """-1, 0 or 1 when the sign of the backend value ``v`` at ``pd`` is certain, else None; and
    whether the value is exact."""
    import flint

    z = pd.zero_test(v)
    if z is True:
        return 0, True
    if z is None:
        return None, False
    if isinstance(v, flint.fmpq):
        return (1 if v > 0 else -1), True
    if isinstance(v, flint.arb):  # a ball that excludes 0: the sign is certain
        return (1 if v > 0 else -1), True
    return (1 if v > 0 else -1), False


class _Quantities:
    """The quantities of the conditions (8 pi times each) and which conditions use them."""

    def __init__(self, geometry, M, blocks, lorentz):
        n = geometry.n
        names = [str(c) for c in geometry.coords]
        L = blocks[lorentz]
        lam_L = M[L[0]][L[0]]
        self.rho8 = -lam_L
        self.pressures = []  # (label, 8 pi p, multiplicity, block)
        if len(L) > 1:
            self.pressures.append((",".join(names[i] for i in L[1:]), lam_L, len(L) - 1, L))
        for k, B in enumerate(blocks):
            if k != lorentz:
                self.pressures.append((",".join(names[i] for i in B), M[B[0]][B[0]], len(B), B))
        q: dict[str, Any] = {"rho": self.rho8}
        self.uses = {c: [] for c in CONDITIONS}
        self.uses["weak"].append("rho")
        self.uses["dominant"].append("rho")
        for label, p8, _mult, block in self.pressures:
            if block is L:
                continue  # rho + p = 0 and rho - p = 2 rho within the Lorentzian block: covered by rho
            key = f"rho + p[{label}]"
            q[key] = self.rho8 + p8
            for c in CONDITIONS:
                self.uses[c].append(key)
            key = f"rho - p[{label}]"
            q[key] = self.rho8 - p8
            self.uses["dominant"].append(key)
        sec = self.rho8 * (n - 3)
        for _label, p8, mult, _block in self.pressures:
            sec = sec + p8 * mult
        key = "rho + sum p_i" if n == 4 else f"({n - 3}) rho + sum p_i"
        q[key] = sec
        self.uses["strong"].append(key)
        self.values = q


def proved_energy_conditions(geometry, spec, *, include_lambda: bool = True, budget: float | None = None):
    """The energy conditions of the chart proved where the exact case applies (see the module
    docstring): ``{"null": {"status", "method", "counterexample"}, ..., "hawking_ellis_type",
    "eigenvalues"}``, or None when the case does not apply (or its preparation ran out of budget)."""
    from gravicat.engine.geometry import BudgetExceeded

    budget = geometry.budget if budget is None else budget
    try:
        with geometry.deadline(budget):
            return _proved(geometry, spec, include_lambda)
    except (BudgetExceeded, ZeroDivisionError):
        return None


def _proved(geometry, spec, include_lambda):
    from gravicat.physics.positivity import region_relations, sign_on_region

    n = geometry.n
    M = _mixed8(geometry, spec, include_lambda)
    if all(geometry.is_zero(M[a][b]) for a in range(n) for b in range(n)):
        out = {c: {"status": "holds", "method": "proved", "counterexample": None,
                   "where": "T_ab = 0 identically (vacuum)"} for c in CONDITIONS}
        out["hawking_ellis_type"] = "I"
        out["eigenvalues"] = {"rho": "0", "pressures": {}, "timelike": None}
        return out
    if spec.fluid is not None and (fluid := _perfect_fluid(geometry, spec, include_lambda)) is not None:
        return fluid
    if not all(geometry.is_zero(M[a][b]) for a in range(n) for b in range(n) if a != b):
        return _null_dust(geometry, spec, M, include_lambda)
    blocks = _blocks(geometry)
    for B in blocks:
        if not all(geometry.is_zero(M[B[0]][B[0]] - M[a][a]) for a in B[1:]):
            return None
    relations = region_relations(spec)
    signs = []
    for B in blocks:
        d = geometry.to_sympy(_det(geometry, B))
        signs.append(sign_on_region(d, geometry.coords, geometry.params, relations))
    negative = [k for k, s in enumerate(signs) if s in ("negative", "nonpositive")]
    positive = [k for k, s in enumerate(signs) if s in ("positive", "nonnegative")]
    if len(negative) == 1:
        lorentz, exact_blocks = negative[0], True
    elif len(positive) == len(blocks) - 1:
        lorentz, exact_blocks = next(k for k in range(len(blocks)) if k not in positive), True
    else:
        lorentz, exact_blocks = _lorentz_at_points(geometry, blocks), False
        if lorentz is None:
            return None
    Q = _Quantities(geometry, M, blocks, lorentz)
    proved = {}
    for key, v in Q.values.items():
        if geometry.is_zero(v):
            proved[key] = "zero"
            continue
        proved[key] = sign_on_region(geometry.to_sympy(v), geometry.coords, geometry.params, relations) \
            if exact_blocks else None
    undecided = [k for k, s in proved.items() if s not in ("zero", "positive", "nonnegative")]
    found, good = _search(geometry, spec, Q, blocks, lorentz, undecided)
    out = {}
    for cond in CONDITIONS:
        keys = Q.uses[cond]
        bad = next((found[k] for k in keys if k in found), None)
        if bad is not None:
            out[cond] = {"status": "violated", "method": "proved" if bad["exact"] else "sampled",
                         "counterexample": {k: v for k, v in bad.items() if k != "exact"}}
            everywhere = [k for k in keys if proved[k] == "negative"]
            if everywhere:
                out[cond]["where"] = f"{everywhere[0]} < 0 on the whole domain (proved)"
        elif all(proved[k] in ("zero", "positive", "nonnegative") for k in keys):
            out[cond] = {"status": "holds", "method": "proved", "counterexample": None,
                         "where": "proved on the domain and parameter ranges: "
                                  + ", ".join(f"{k} >= 0" for k in keys)}
        elif (points := sum(1 for ok in good if all(ok.get(k) for k in keys))) and len(good) == points:
            out[cond] = {"status": f"holds at {points} sample points", "method": "sampled", "counterexample": None}
        else:
            out[cond] = {"status": "undecided", "method": "none", "counterexample": None}
    out["hawking_ellis_type"] = "I"
    names = [str(c) for c in geometry.coords]
    out["eigenvalues"] = {
        "rho": _show(geometry, Q.rho8),
        "pressures": {label: _show(geometry, p8) for label, p8, _m, _b in Q.pressures},
        "timelike": ",".join(names[i] for i in blocks[lorentz]),
    }
    return out


def _perfect_fluid(geometry, spec, include_lambda):
    """The conditions of a declared perfect fluid (or dust), when its stress tensor is exactly the
    chart's: 8 pi T_ab = (rho8 + p8) u_a u_b + p8 g_ab with g(u, u) = -1, checked here identically
    (whatever the coordinates: Goedel's rotating dust, Szekeres' dust). Then rho and the isotropic
    pressure p are the eigenvalues (Hawking & Ellis 1973, sec. 4.3, type I) and the conditions read
    rho + p >= 0 (null), rho >= 0 (weak), (n - 3) rho + (n - 1) p >= 0 (strong), rho >= |p|
    (dominant). Returns the result only when every condition is proved to hold on the region (a
    violation or an undecided sign goes on to the general analysis, which finds the point), else None."""
    from gravicat.physics.claims import SpecMatter
    from gravicat.physics.matter import stress_energy8
    from gravicat.physics.positivity import region_relations, sign_on_region

    n, g, z = geometry.n, geometry.g, geometry.is_zero
    matter = SpecMatter(spec, geometry)
    u = matter.velocity()
    ul = [geometry._sum([g[a][b] * u[b] for b in range(n) if not z(g[a][b]) and not z(u[b])]) for a in range(n)]
    norm = geometry._sum([ul[a] * u[a] for a in range(n) if not z(ul[a]) and not z(u[a])])
    if not z(norm + 1):
        return None
    rho8, p8 = matter.rho8(), matter.p8()
    T = stress_energy8(geometry, spec, include_lambda)
    if not all(z(T[a][b] - (rho8 + p8) * ul[a] * ul[b] - p8 * g[a][b]) for a in range(n) for b in range(a, n)):
        return None
    quantities = {"rho": rho8, "rho + p": rho8 + p8, "rho - p": rho8 - p8,
                  ("rho + 3 p" if n == 4 else f"({n - 3}) rho + ({n - 1}) p"): rho8 * (n - 3) + p8 * (n - 1)}
    strong = next(k for k in quantities if k not in ("rho", "rho + p", "rho - p"))
    uses = {"null": ["rho + p"], "weak": ["rho", "rho + p"], "strong": ["rho + p", strong],
            "dominant": ["rho", "rho + p", "rho - p"]}
    relations = region_relations(spec)
    signs = {}
    for key, v in quantities.items():
        signs[key] = "zero" if z(v) else sign_on_region(geometry.to_sympy(v), geometry.coords, geometry.params,
                                                         relations)
        if signs[key] not in ("zero", "positive", "nonnegative"):
            return None
    out: dict[str, Any] = {
        cond: {"status": "holds", "method": "proved", "counterexample": None,
               "where": "proved on the domain and parameter ranges for the declared fluid: "
                        + ", ".join(f"{k} >= 0" for k in keys)}
        for cond, keys in uses.items()}
    out["hawking_ellis_type"] = "I"
    out["eigenvalues"] = {"rho": _show(geometry, rho8), "pressures": {"fluid": _show(geometry, p8)},
                          "timelike": ",".join(str(geometry.coords[a]) for a in range(n) if not z(u[a]))}
    return out


def _show(geometry, v8) -> str:
    import sympy as sp

    return sp.sstr(geometry.to_sympy(v8) / (8 * sp.pi))


def _lorentz_at_points(geometry, blocks):
    """The block whose determinant is negative at every sample point (the same one), or None."""
    found = set()
    for pd in geometry.sample_points():
        try:
            with pd.precision():
                neg = [k for k, B in enumerate(blocks) if _sign_at(pd, _det(pd, B))[0] == -1]
        except (ZeroDivisionError, ValueError):
            continue
        if len(neg) != 1:
            return None
        found.add(neg[0])
    return found.pop() if len(found) == 1 else None


# ---------------------------------------------------------------------------
# counterexamples: the sample points, then a scan of each non-angular coordinate


def _search(geometry, spec, Q, blocks, lorentz, keys):
    """(quantity -> counterexample dict, one {quantity: value >= 0 there} per valid sample point)."""
    found: dict = {}
    good = []
    pts = geometry.sample_points()
    for pd in pts:
        ok = {}
        try:
            with pd.precision():
                for key, v in Q.values.items():
                    s, exact = _sign_at(pd, pd.ev(v))
                    ok[key] = s is not None and s >= 0
                    if s is not None and s < 0:
                        if key in keys and key not in found:
                            g = [[pd.g[a][b] for b in range(geometry.n)] for a in range(geometry.n)]
                            found[key] = _counterexample(dict(pd.sample.shown), key, _fmt_exact(pd.ev(v)), exact,
                                                         g, Q, blocks, lorentz, geometry)
        except (ZeroDivisionError, ValueError):
            continue
        good.append(ok)
    missing = [k for k in keys if k not in found]
    if missing and pts:
        found.update(_scan(geometry, spec, Q, blocks, lorentz, missing, pts[0]))
    return found, good


def _counterexample(point, key, value, exact, g, Q, blocks, lorentz, geometry):
    vec, kind = _vector(g, Q, blocks, lorentz, key)
    return {"point": point, "quantity": key, "value": value, "vector": vec, "vector_kind": kind, "exact": exact}


def _vector(g, Q, blocks, lorentz, key):
    """The violating vector at a point (numerical components, 15 digits) for ``key``: the unit
    timelike eigenvector u (rho, the strong and dominant quantities) or the null u + s_i (NEC)."""
    import mpmath as mp

    from gravicat.physics.petrov import _num

    with mp.workdps(40):
        G = [[_num(x) for x in row] for row in g]
        n = len(G)

        def unit(B, want_negative):
            sub = mp.matrix([[G[a][b] for b in B] for a in B])
            E, V = mp.eigsy(sub)
            k = min(range(len(B)), key=lambda i: E[i]) if want_negative else max(range(len(B)), key=lambda i: E[i])
            v = [mp.mpf(0)] * n
            for i, a in enumerate(B):
                v[a] = V[i, k]
            norm = mp.fsum(G[a][b] * v[a] * v[b] for a in range(n) for b in range(n))
            return [x / mp.sqrt(abs(norm)) for x in v]

        u = unit(blocks[lorentz], True)
        if u[0] < 0 or (u[0] == 0 and min(u) < 0 and max(u) <= 0):
            u = [-x for x in u]
        if key.startswith("rho + p["):
            label = key[len("rho + p["):-1]
            B = next(b for lab, _p, _m, b in Q.pressures if lab == label)
            s = unit(B, False)
            k = [u[a] + s[a] for a in range(n)]
            return [mp.nstr(x, 15) for x in k], "null"
        return [mp.nstr(x, 15) for x in u], "timelike"


def _scan(geometry, spec, Q, blocks, lorentz, keys, pd):
    """Exact points along each non-angular coordinate through ``pd`` (within the region), where a
    quantity of ``keys`` is negative: quantity -> counterexample."""
    import sympy as sp

    from gravicat.physics.positivity import region_relations

    s = pd.sample
    if s.funcs or spec.functions:
        return {}
    exprs = {k: geometry.to_sympy(Q.values[k]) for k in keys}
    if any(e.atoms(sp.Function) - e.atoms(sp.cos, sp.sin) for e in exprs.values()):
        return {}
    values = {sym: sp.Rational(v.numerator, v.denominator) for sym, v in s.values.items()}
    trig = {}
    for x, (u, q) in s.angles.items():
        if q != 1:
            return {}
        u = sp.Rational(u.numerator, u.denominator)
        trig[sp.cos(x)] = (1 - u**2) / (1 + u**2)
        trig[sp.sin(x)] = 2 * u / (1 + u**2)
    relations = region_relations(spec)
    found: dict = {}
    for x in geometry.coords:
        if x in s.angles or x not in values:
            continue
        for cand in _candidates(x, values, relations):
            point = {**values, x: cand}
            if not _inside(point, trig, relations):
                continue
            for key in keys:
                if key in found:
                    continue
                val = exprs[key].xreplace(trig).xreplace(point)
                try:
                    negative = bool(val.is_number and val.is_negative)
                except TypeError:
                    negative = False
                if negative:
                    shown = dict(s.shown)
                    shown[str(x)] = sp.sstr(cand)
                    g = spec.metric.xreplace(trig).xreplace(point).evalf(40)
                    g = [[g[a, b] for b in range(geometry.n)] for a in range(geometry.n)]
                    found[key] = _counterexample(shown, key, sp.sstr(sp.nsimplify(sp.simplify(val / (8 * sp.pi)))),
                                                 True, [[_mpf(v) for v in row] for row in g], Q, blocks, lorentz,
                                                 geometry)
            if len(found) == len(keys):
                return found
    return found


def _mpf(v):
    import mpmath as mp

    return mp.mpf(str(v))


def _candidates(x, values, relations):
    """Exact values of ``x`` within its bounds at the other values of the point."""
    import sympy as sp

    from gravicat.physics.positivity import _bounds

    others = {k: v for k, v in values.items() if k != x}
    lows, highs = _bounds((x,), relations)[x]
    lo = [b.xreplace(others) for b, _ in lows if not (b.free_symbols - set(others))]
    hi = [b.xreplace(others) for b, _ in highs if not (b.free_symbols - set(others))]
    lo = max(lo, key=lambda e: float(e)) if lo else None
    hi = min(hi, key=lambda e: float(e)) if hi else None
    steps = [sp.Rational(t) for t in _SCAN]
    if lo is not None and hi is not None:
        return [lo + (hi - lo) * sp.Rational(t) for t in _INSIDE]
    if lo is not None:
        scale = max(sp.Integer(1), abs(lo)) if lo.is_number else sp.Integer(1)
        return [lo + scale * t for t in steps]
    if hi is not None:
        scale = max(sp.Integer(1), abs(hi)) if hi.is_number else sp.Integer(1)
        return [hi - scale * t for t in steps]
    x0 = values[x]
    return [x0 + t for t in steps] + [x0 - t for t in steps]


def _inside(point, trig, relations) -> bool:
    import sympy as sp

    for rel in relations:
        try:
            v = rel.xreplace(trig).xreplace(point)
            if v is sp.true:
                continue
            if v is sp.false or not bool(v):
                return False
        except TypeError:
            return False
    return True


# ---------------------------------------------------------------------------
# null dust: T_ab = c k_a k_b with k null (Hawking-Ellis type II with zero eigenvalues)


def _null_dust(geometry, spec, M, include_lambda):
    """The conditions when ``T^a_b T^b_c = 0`` exactly (and T != 0): then T_ab = c k_a k_b with k null (a
    g-self-adjoint map whose square is 0 has a totally null image, a line in Lorentzian signature), and
    every one of the four conditions holds exactly where c >= 0 (T(v, v) = c (k.v)^2, trace 0, and the flux
    -T^a_b u^b = c |k.u| k^a is null and future-directed; Hawking & Ellis 1973, sec. 4.3, type II).
    The sign of c is that of a diagonal component T_aa = c k_a^2 that is not identically zero."""
    from gravicat.physics.matter import stress_energy8
    from gravicat.physics.positivity import region_relations, sign_on_region

    n = geometry.n
    for a in range(n):
        for c in range(n):
            terms = [M[a][b] * M[b][c] for b in range(n) if not geometry._iz(M[a][b]) and not geometry._iz(M[b][c])]
            if terms and not geometry.is_zero(geometry._sum(terms)):
                return None
    T = stress_energy8(geometry, spec, include_lambda)
    index = next((a for a in range(n) if not geometry.is_zero(T[a][a])), None)
    if index is None:
        return None
    names = [str(x) for x in geometry.coords]
    label = f"8 pi T_{names[index]}{names[index]}"
    c_expr = geometry.to_sympy(T[index][index])
    sign = sign_on_region(c_expr, geometry.coords, geometry.params, region_relations(spec))
    cex, good = None, 0
    if sign not in ("positive", "nonnegative", "zero"):
        for pd in geometry.sample_points():
            try:
                with pd.precision():
                    s, exact = _sign_at(pd, pd.ev(T[index][index]))
                    if s is not None and s < 0 and cex is None:
                        cex = {"point": dict(pd.sample.shown), "quantity": f"{label} (= c k_a^2)",
                               "value": _fmt_exact(pd.ev(T[index][index])), "exact": exact,
                               **_null_dust_vector(pd, T)}
                    good += s is not None and s >= 0
            except (ZeroDivisionError, ValueError):
                continue
    out = {}
    for cond in CONDITIONS:
        if sign in ("positive", "nonnegative", "zero"):
            out[cond] = {"status": "holds", "method": "proved", "counterexample": None,
                         "where": f"null dust T_ab = c k_a k_b: c >= 0 proved on the domain ({label} >= 0)"}
        elif cex is not None:
            out[cond] = {"status": "violated", "method": "proved" if cex["exact"] else "sampled",
                         "counterexample": {k: v for k, v in cex.items() if k != "exact"}}
        elif good:
            out[cond] = {"status": f"holds at {good} sample points", "method": "sampled", "counterexample": None,
                         "where": f"null dust T_ab = c k_a k_b: c >= 0 ({label} >= 0) at the sample points"}
        else:
            out[cond] = {"status": "undecided", "method": "none", "counterexample": None}
    out["hawking_ellis_type"] = "II"
    out["eigenvalues"] = {"rho": None, "pressures": {}, "timelike": None,
                          "null_dust": f"T_ab = c k_a k_b, k null, every eigenvalue 0; {label} = "
                                       f"{c_expr}"}
    return out


def _null_dust_vector(pd, T):
    """A null vector l of the automatic tetrad with T(l, l) < 0 at the point (numerical components)."""
    import mpmath as mp

    from gravicat.physics.petrov import _num, tetrad_at

    with mp.workdps(40):
        tet, _ = tetrad_at(pd)
        if tet is None:
            return {"vector": [], "vector_kind": "null"}
        n = pd.n
        Tn = [[_num(pd.ev(T[a][b])) if not pd._iz(T[a][b]) else mp.mpf(0) for b in range(n)] for a in range(n)]
        best = min((tet["l"], tet["n"]), key=lambda v: mp.fsum(Tn[a][b] * v[a] * v[b] for a in range(n)
                                                               for b in range(n)))
        return {"vector": [mp.nstr(x, 15) for x in best], "vector_kind": "null"}
