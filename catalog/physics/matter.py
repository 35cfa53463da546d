"""The matter content of a chart and the energy conditions (Hawking & Ellis, The Large Scale Structure of
Space-Time, 1973, sec. 4.3).

``8 pi T_ab = G_ab + Lambda g_ab`` from the engine's Einstein tensor and the chart's declared cosmological
constant (:class:`gravicat.physics.claims.SpecMatter`): the declared matter when the field-equation claim
holds (the ``field-equations`` verifier proves that), the effective matter where ``field-equations = "none"``.

At a sample point, ``T^a_b`` is written in an orthonormal frame (Gram-Schmidt, as for the Petrov tetrad)
and its eigenvalues found at 40 digits; when they are real with a timelike eigenvector (Hawking-Ellis type
I) the energy density is ``rho = -lambda_0`` and the principal pressures ``p_i`` the other eigenvalues, and

* null (NEC): ``rho + p_i >= 0``;  weak (WEC): NEC and ``rho >= 0``;
* strong (SEC): NEC and ``rho + sum p_i >= 0``;  dominant (DEC): ``rho >= |p_i|``.

A value within 10^-12 of zero (relative to the largest eigenvalue) is never a violation.
A violation gives the point and the
violating vector (coordinate components); otherwise the condition holds at the N sample points (method
``sampled``). Other Hawking-Ellis types (II, III, IV) are reported, and their conditions left undecided.

Status: a library slice (no command or verifier plugin yet). Room: physics.
"""

from __future__ import annotations

__all__ = ["stress_energy8", "eulerian_energy_density8", "diagonal_eigenvalues", "point_matter",
           "energy_conditions", "CONDITIONS"]

CONDITIONS = ("null", "weak", "strong", "dominant")


def stress_energy8(X, spec, include_lambda: bool = True):
    """8 pi T_ab (list of lists) on the backend ``X``: G_ab + Lambda g_ab. With ``include_lambda=False``
    the cosmological constant counts as matter (vacuum energy): 8 pi T_ab = G_ab."""
    from gravicat.physics.claims import SpecMatter

    lam = SpecMatter(spec, X).cosmological_constant() if include_lambda else None
    G, g, n = X.einstein, X.g, X.n
    if lam is None:
        return [[G[a][b] for b in range(n)] for a in range(n)]
    return [[G[a][b] + lam * g[a][b] for b in range(n)] for a in range(n)]


def _mixed(X, T):
    n, gi, iz = X.n, X.ginv, X._iz
    return [[X._sum([gi[a][c] * T[c][b] for c in range(n) if not iz(gi[a][c]) and not iz(T[c][b])])
             for b in range(n)] for a in range(n)]


def eulerian_energy_density8(X, spec, time_index: int = 0):
    """8 pi T_ab n^a n^b for the unit normal n of the hypersurfaces x^time_index = const (the Eulerian
    observers): ``-T^tt / g^tt``."""
    T = stress_energy8(X, spec)
    n, gi, iz = X.n, X.ginv, X._iz
    t = time_index
    Ttt = X._sum([gi[t][a] * gi[t][b] * T[a][b] for a in range(n) for b in range(n)
                  if not iz(gi[t][a]) and not iz(gi[t][b]) and not iz(T[a][b])])
    return -Ttt / gi[t][t]


def diagonal_eigenvalues(geometry, spec):
    """When T^a_b is diagonal in the chart (proved), its eigenvalues as sympy expressions
    (coordinate name -> T^a_a), else None. With a diagonal metric the timelike one is -rho."""
    import sympy as sp

    M = _mixed(geometry, stress_energy8(geometry, spec))
    n = geometry.n
    if not all(geometry.is_zero(M[a][b]) for a in range(n) for b in range(n) if a != b):
        return None
    return {str(geometry.coords[a]): sp.simplify(geometry.to_sympy(M[a][a]) / (8 * sp.pi)) for a in range(n)}


def _frame(pd):
    from gravicat.physics.petrov import _num, tetrad_at

    tet, _ = tetrad_at(pd)
    if tet is None:
        return None
    import mpmath as mp

    r2 = mp.sqrt(2)
    l, nn, m = tet["l"], tet["n"], tet["m"]
    e0 = [(l[a] + nn[a]) / r2 for a in range(pd.n)]
    e1 = [(l[a] - nn[a]) / r2 for a in range(pd.n)]
    e2 = [mp.re(m[a]) * r2 for a in range(pd.n)]
    e3 = [mp.im(m[a]) * r2 for a in range(pd.n)]
    _ = _num
    return [e0, e1, e2, e3]


def point_matter(pd, spec, include_lambda: bool = True):
    """Hawking-Ellis type, rho, the p_i and the frame eigenvectors at one sample point (a dict)."""
    import mpmath as mp

    from gravicat.physics.petrov import _num

    with pd.precision():  # interval and floating values of the point need the engine's extra digits
        T8 = stress_energy8(pd, spec, include_lambda)
    with mp.workdps(40), pd.precision():
        T = [[_num(v) for v in row] for row in T8]
        E = _frame(pd)
        if E is None:
            return {"type": None, "reason": "no orthonormal frame from the coordinates"}
        n = pd.n
        Th = [[mp.fsum(T[a][b] * E[i][a] * E[j][b] for a in range(n) for b in range(n)) / (8 * mp.pi)
               for j in range(n)] for i in range(n)]
        eta = [-1, 1, 1, 1]
        Mx = mp.matrix([[eta[i] * Th[i][j] for j in range(n)] for i in range(n)])
        vals, vecs = mp.eig(Mx)
        scale = max([abs(v) for v in vals] + [mp.mpf(10) ** -30])
        tol = scale * mp.mpf(10) ** -12  # the eigen-solver's accuracy: a sign within it is not decided
        if any(abs(mp.im(v)) > tol for v in vals):
            return {"type": "IV"}
        cols = []
        for k in range(n):
            v = [mp.re(vecs[i, k]) for i in range(n)]
            norm = -v[0] ** 2 + v[1] ** 2 + v[2] ** 2 + v[3] ** 2
            cols.append((mp.re(vals[k]), v, norm))
        timelike = [c for c in cols if c[2] < -tol]
        if len(timelike) != 1 or abs(mp.det(vecs)) < mp.mpf(10) ** -20:
            return {"type": "II/III"}
        lam0, v0, norm0 = timelike[0]
        rho = -lam0
        others = [c for c in cols if c is not timelike[0]]
        coord = lambda v: [mp.fsum(v[i] * E[i][a] for i in range(n)) for a in range(n)]  # noqa: E731
        u = [x / mp.sqrt(-norm0) for x in v0]
        out = {"type": "I", "rho": rho, "p": [c[0] for c in others], "tol": tol, "u": coord(u), "k": []}
        for c in others:
            s = [x / mp.sqrt(c[2]) for x in c[1]]
            out["k"].append(coord([u[i] + s[i] for i in range(n)]))
        return out


def _violations(m):
    """(condition -> (value, vector text)) of the violated conditions at a type I point."""
    import mpmath as mp

    rho, p, tol = m["rho"], m["p"], m["tol"]
    bad = {}
    nec = [(rho + pi, k) for pi, k in zip(p, m["k"], strict=True) if rho + pi < -tol]
    if nec:
        bad["null"] = (nec[0][0], nec[0][1], "rho + p_i")
    if "null" in bad:
        bad["weak"] = bad["strong"] = bad["null"]
    if rho < -tol:
        bad["weak"] = (rho, m["u"], "rho")
    if "strong" not in bad and rho + mp.fsum(p) < -tol:
        bad["strong"] = (rho + mp.fsum(p), m["u"], "rho + sum p_i")
    dec = [rho - abs(pi) for pi in p]
    if rho < -tol or min(dec) < -tol:
        bad["dominant"] = (min([rho] + dec), m["u"], "rho - |p_i|")
    return bad


def energy_conditions(geometry, spec, include_lambda: bool = True) -> dict:
    """Status of each of :data:`CONDITIONS` over the chart's sample points (see the module docstring)."""
    import mpmath as mp

    points = geometry.sample_points()
    counts = {"I": 0}
    found: dict = {}
    types = set()
    for pd in points:
        try:
            m = point_matter(pd, spec, include_lambda)
        except (ZeroDivisionError, ValueError):
            continue
        types.add(m["type"])
        if m["type"] != "I":
            continue
        counts["I"] += 1
        for cond, (val, vec, what) in _violations(m).items():
            found.setdefault(cond, {"point": dict(pd.sample.shown), "quantity": what,
                                    "value": mp.nstr(val, 15), "vector": [mp.nstr(x, 15) for x in vec]})
    out = {}
    for cond in CONDITIONS:
        if cond in found:
            out[cond] = {"status": "violated", "method": "sampled", "counterexample": found[cond]}
        elif counts["I"] and types == {"I"}:
            out[cond] = {"status": f"holds at {counts['I']} sample points", "method": "sampled",
                         "counterexample": None}
        else:
            out[cond] = {"status": "undecided", "method": "none", "counterexample": None}
    out["hawking_ellis_types"] = sorted(t for t in types if t)
    return out
