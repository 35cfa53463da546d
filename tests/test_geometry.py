"""The verification engine (gravicat.engine.geometry) against published results and sympy itself.

Every expected value names its source. Values marked "recalled from memory"
were not re-read from the publication while writing the test.
"""

from __future__ import annotations

from fractions import Fraction

import sympy as sp
from _charts import (
    Fluid,
    H,
    Lam,
    M,
    Q,
    a,
    afun,
    chart,
    flrw,
    k,
    kerr,
    kerr_metric,
    kerr_newman,
    ph,
    r,
    reissner_nordstrom,
    schwarzschild,
    sph,
    t,
    th,
    u,
    v,
    x,
    y,
    z,
)

from gravicat.engine.geometry import Geometry, prove_zero


def exact_equal(geo, value, expected):
    """``value`` (an engine value) equals the sympy expression ``expected`` identically."""
    return geo.is_zero(value - geo.val(expected))


# ---------------------------------------------------------------------------
# Kretschmann scalars, compared exactly


def test_schwarzschild_kretschmann():
    # K = 48 M^2 / r^6: Misner, Thorne & Wheeler, Gravitation (1973), eq. 31.4 ff. (value recalled from memory)
    geo = Geometry(schwarzschild())
    assert geo.path == "flint"
    assert exact_equal(geo, geo.kretschmann, 48 * M**2 / r**6)
    assert not exact_equal(geo, geo.kretschmann, 48 * M**2 / r**5)


def test_reissner_nordstrom_kretschmann():
    # K = 8 (6 M^2 r^2 - 12 M Q^2 r + 7 Q^4) / r^8: the a = 0 case of C. Cherubini, D. Bini, S. Capozziello,
    # R. Ruffini, "Second order scalar invariants of the Riemann tensor", Int. J. Mod. Phys. D 11 (2002) 827,
    # Kerr-Newman Kretschmann formula (recalled from memory)
    geo = Geometry(reissner_nordstrom())
    assert exact_equal(geo, geo.kretschmann, 8 * (6 * M**2 * r**2 - 12 * M * Q**2 * r + 7 * Q**4) / r**8)


def test_kerr_kretschmann_closed_form():
    # K = 48 M^2 (r^6 - 15 a^2 r^4 c^2 + 15 a^4 r^2 c^4 - a^6 c^6) / Sigma^6, c = cos(theta):
    # R. C. Henry, "Kretschmann scalar for a Kerr-Newman black hole", ApJ 535 (2000) 350, eq. 1 with Q = 0
    # (recalled from memory)
    geo = Geometry(kerr())
    c = sp.cos(th)
    S = r**2 + a**2 * c**2
    K = 48 * M**2 * (r**6 - 15 * a**2 * r**4 * c**2 + 15 * a**4 * r**2 * c**4 - a**6 * c**6) / S**6
    assert exact_equal(geo, geo.kretschmann, K)
    assert geo.is_zero(geo.ricci_scalar)
    # vacuum: the Weyl square equals the Kretschmann scalar
    assert geo.is_zero(geo.weyl_square - geo.kretschmann)


def test_kerr_newman_kretschmann_closed_form():
    # Henry (2000), ApJ 535, 350, eq. 1 (recalled from memory)
    geo = Geometry(kerr_newman())
    c = sp.cos(th)
    S = r**2 + a**2 * c**2
    K = (
        8
        / S**6
        * (
            6 * M**2 * (r**6 - 15 * a**2 * r**4 * c**2 + 15 * a**4 * r**2 * c**4 - a**6 * c**6)
            - 12 * M * Q**2 * r * (r**4 - 10 * a**2 * r**2 * c**2 + 5 * a**4 * c**4)
            + Q**4 * (7 * r**4 - 34 * a**2 * r**2 * c**2 + 7 * a**4 * c**4)
        )
    )
    assert exact_equal(geo, geo.kretschmann, K)


# ---------------------------------------------------------------------------
# cosmology


def test_flrw_ricci_scalar_and_friedmann_equations():
    # R = 6 (a''/a + a'^2/a^2 + k/a^2); G_tt = 3 (a'^2 + k)/a^2 and G^r_r = -(2 a a'' + a'^2 + k)/a^2:
    # S. Carroll, Spacetime and Geometry (2004), eqs. 8.44-8.47 (equation numbers recalled from memory)
    geo = Geometry(flrw())
    A = afun(t)
    A1, A2 = sp.diff(A, t), sp.diff(A, t, 2)
    assert exact_equal(geo, geo.ricci_scalar, 6 * (A2 / A + A1**2 / A**2 + k / A**2))
    assert exact_equal(geo, geo.einstein[0][0], 3 * (A1**2 + k) / A**2)
    grr = A**2 / (1 - k * r**2)
    assert exact_equal(geo, geo.einstein[1][1], -(2 * A * A2 + A1**2 + k) / A**2 * grr)


def _fluid_flrw(scale, rho, p):
    return chart(
        (t, x, y, z),
        sp.diag(-1, scale**2, scale**2, scale**2),
        (),
        claim="perfect-fluid",
        domain=(t > 0,),
        fluid=Fluid(rho, p, (1, 0, 0, 0)),
    )


def _fluid_residual(X):
    from gravicat.plugins.field_equations import residuals

    return residuals(X.geometry.spec if hasattr(X, "geometry") else X.spec, "perfect-fluid")(X)


def test_einstein_de_sitter_dust_and_radiation():
    # flat FLRW: dust a ~ t^(2/3) with 8 pi rho = 4/(3 t^2); radiation a ~ t^(1/2) with 8 pi rho = 3/(4 t^2), p = rho/3:
    # B. Ryden, Introduction to Cosmology (2003), sec. 6.2 (a(t) laws) with the Friedmann equation
    # H^2 = 8 pi rho / 3 (eq. 4.29) (recalled from memory)
    dust = Geometry(_fluid_flrw(t ** sp.Rational(2, 3), 1 / (6 * sp.pi * t**2), sp.Integer(0)))
    out = dust.verify(_fluid_residual)
    assert out.status == "pass" and out.method == "symbolic", out
    rad = Geometry(_fluid_flrw(sp.sqrt(t), 3 / (32 * sp.pi * t**2), 1 / (32 * sp.pi * t**2)))
    out = rad.verify(_fluid_residual)
    assert out.status == "pass", out
    wrong = Geometry(_fluid_flrw(sp.sqrt(t), 3 / (32 * sp.pi * t**2), sp.Integer(0)))  # radiation without pressure
    out = wrong.verify(_fluid_residual)
    assert out.status == "fail" and out.counterexample["component"].startswith("E[")


def test_de_sitter_ricci_scalar():
    # static de Sitter: R = 4 Lambda (S. Carroll, Spacetime and Geometry (2004), sec. 8.2; recalled from memory)
    f = 1 - Lam * r**2 / 3
    geo = Geometry(chart((t, r, th, ph), sph(-f, 1 / f), (Lam,), domain=(r > 0, r < sp.sqrt(3 / Lam))))
    assert exact_equal(geo, geo.ricci_scalar, 4 * Lam)
    assert exact_equal(geo, geo.kretschmann, 8 * Lam**2 / 3)  # maximally symmetric: K = R^2/6 (n = 4)


# ---------------------------------------------------------------------------
# Kasner and plane-fronted waves


def _kasner(p1, p2, p3, params=()):
    return chart((t, x, y, z), sp.diag(-1, t ** (2 * p1), t ** (2 * p2), t ** (2 * p3)), params, domain=(t > 0,))


def test_kasner_vacuum_iff_conditions():
    # vacuum iff p1 + p2 + p3 = 1 = p1^2 + p2^2 + p3^2:
    # L. D. Landau & E. M. Lifshitz, The Classical Theory of Fields, 4th ed. (1975), sec. 117, eq. 117.4
    # (recalled from memory)
    p1, p2 = sp.symbols("p1 p2", real=True)
    geo = Geometry(_kasner(p1, p2, 1 - p1 - p2, (p1, p2)))
    p3 = 1 - p1 - p2
    # with the first condition imposed, G_tt t^2 = (1 - (p1^2 + p2^2 + p3^2)) / 2
    assert exact_equal(geo, geo.einstein[0][0], (1 - (p1**2 + p2**2 + p3**2)) / 2 / t**2)
    third = sp.Rational(1, 3)
    ok = Geometry(_kasner(-third, 2 * third, 2 * third))
    assert ok.verify(lambda X: {"R": X.ricci[0][0], "Rxx": X.ricci[1][1]}).status == "pass"
    bad = Geometry(_kasner(sp.Rational(1, 2), sp.Rational(1, 2), sp.Integer(0)))  # sum 1, squares 1/2
    assert bad.verify(lambda X: {X.label("R", 0, 0): X.ricci[0][0]}).status == "fail"


def _ppwave(profile, functions=()):
    m = sp.Matrix([[profile, -1, 0, 0], [-1, 0, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]])
    return chart((u, v, x, y), m, (), functions=functions)


def test_pp_wave_vacuum_iff_harmonic():
    # ds^2 = H du^2 - 2 du dv + dx^2 + dy^2 is vacuum iff H_xx + H_yy = 0:
    # H. Stephani et al., Exact Solutions of Einstein's Field Equations, 2nd ed. (2003), sec. 24.5
    # (recalled from memory)
    Hf = H(u, x, y)
    geo = Geometry(_ppwave(Hf, (Hf,)))
    assert geo.path == "flint"
    assert exact_equal(geo, geo.ricci[0][0], -(sp.diff(Hf, x, 2) + sp.diff(Hf, y, 2)) / 2)
    nonzero = [(i, j) for i in range(4) for j in range(4) if not geo.is_zero(geo.ricci[i][j])]
    assert nonzero == [(0, 0)]
    harmonic = Geometry(_ppwave(sp.sin(u) * (x**2 - y**2) + x * y))
    assert harmonic.verify(lambda X: {X.label("R", 0, 0): X.ricci[0][0]}).status == "pass"
    not_harmonic = Geometry(_ppwave(x**2 + y**2))
    out = not_harmonic.verify(lambda X: {X.label("R", 0, 0): X.ricci[0][0]})
    assert out.status == "fail" and out.counterexample["residual"] == "-2"  # R_uu = -(2 + 2)/2


# ---------------------------------------------------------------------------
# cross-check against sympy.diffgeom (general-purpose reference implementation)


def _diffgeom_ricci(coords, metric, tag):
    from sympy.diffgeom import CoordSystem, Manifold, Patch, TensorProduct, metric_to_Ricci_components

    n = len(coords)
    man = Manifold(f"m{tag}", n)
    patch = Patch(f"p{tag}", man)
    fresh = [sp.Symbol(f"{c}_{tag}", real=True) for c in coords]
    cs = CoordSystem(f"c{tag}", patch, fresh)
    fields = cs.base_scalars()
    forms = cs.base_oneforms()
    sub = dict(zip(coords, fields, strict=True))
    g = sum(metric[i, j].subs(sub) * TensorProduct(forms[i], forms[j]) for i in range(n) for j in range(n))
    ric = metric_to_Ricci_components(g)
    back = dict(zip(fields, coords, strict=True))
    return [[sp.sympify(ric[i][j]).subs(back) for j in range(n)] for i in range(n)]


def _same(a_, b):
    d = a_ - b
    return sp.cancel(d) == 0 or sp.simplify(d) == 0


def test_ricci_matches_sympy_diffgeom():
    # sympy.diffgeom.metric_to_Ricci_components (a general-purpose reference implementation)
    rho = sp.Symbol("rho", positive=True)
    cases = [
        ((th, ph), sp.diag(rho**2, rho**2 * sp.sin(th) ** 2), (rho,)),  # round 2-sphere
        ((x, y), sp.diag(1 / y**2, 1 / y**2), ()),  # hyperbolic half-plane
        ((t, x), sp.diag(-(x**2), 1), ()),  # Rindler
        ((t, x), sp.diag(-sp.exp(2 * t), sp.exp(2 * t)), ()),  # conformally flat, de Sitter-like
        ((x, y, z), sp.diag(1, x**2, x**2 * sp.sin(y) ** 2), ()),  # flat space, spherical coordinates
    ]
    for tag, (coords, metric, params) in enumerate(cases):
        geo = Geometry(chart(coords, metric, params))
        ref = _diffgeom_ricci(coords, metric, tag)
        n = len(coords)
        for i in range(n):
            for j in range(n):
                assert _same(geo.to_sympy(geo.ricci[i][j]), ref[i][j]), (coords, i, j)


def _plain_ricci(coords, g):
    """Ricci tensor by the textbook formulas in plain sympy (reference; slow but independent of the engine)."""
    n = len(coords)
    gi = g.inv(method="LU")
    Gam = [
        [
            [
                sum(
                    gi[a_, e]
                    * (sp.diff(g[e, b], coords[c]) + sp.diff(g[e, c], coords[b]) - sp.diff(g[b, c], coords[e]))
                    for e in range(n)
                )
                / 2
                for c in range(n)
            ]
            for b in range(n)
        ]
        for a_ in range(n)
    ]
    out = sp.zeros(n)
    for i in range(n):
        for j in range(n):
            R = sum(sp.diff(Gam[a_][i][j], coords[a_]) - sp.diff(Gam[a_][a_][i], coords[j]) for a_ in range(n))
            R += sum(Gam[a_][a_][e] * Gam[e][i][j] - Gam[a_][j][e] * Gam[e][a_][i] for a_ in range(n) for e in range(n))
            out[i, j] = R
    return out


def test_ricci_matches_plain_sympy():
    s, w = sp.symbols("s w", positive=True)
    cases = [
        ((t, r), sp.diag(-(1 - 2 * M / r), 1 / (1 - 2 * M / r)), (M,)),  # Schwarzschild t-r plane
        ((x, y), sp.Matrix([[sp.exp(x), x * y], [x * y, 1 + x**2]]), ()),  # no symmetry at all
        ((t, r, th), sp.diag(-(1 - s / r), 1 / (1 - s / r), r**2 + w**2), (s, w)),
        ((t, x, y), sp.Matrix([[-1, 0, sp.exp(x)], [0, 1, 0], [sp.exp(x), 0, sp.exp(2 * x) / 2]]), ()),  # Goedel-like
    ]
    for coords, metric, params in cases:
        geo = Geometry(chart(coords, metric, params))
        ref = _plain_ricci(coords, metric)
        n = len(coords)
        for i in range(n):
            for j in range(n):
                assert _same(geo.to_sympy(geo.ricci[i][j]), ref[i, j]), (coords, i, j)


# ---------------------------------------------------------------------------
# broken metrics: a counterexample with a real non-zero residual


def _reference_ricci_at(spec, point, i, j):
    """R_ij at a counterexample point, recomputed with plain sympy (diff, then exact substitution)."""
    coords = spec.coords
    g = sp.Matrix(spec.metric).subs({p: sp.Rational(point[str(p)]) for p in spec.params})  # parameters first: faster
    n = len(coords)
    gi = g.inv(method="LU")
    Gam = [
        [
            [
                sum(
                    gi[a_, e]
                    * (sp.diff(g[e, b], coords[c]) + sp.diff(g[e, c], coords[b]) - sp.diff(g[b, c], coords[e]))
                    for e in range(n)
                )
                / 2
                for c in range(n)
            ]
            for b in range(n)
        ]
        for a_ in range(n)
    ]
    R = sum(sp.diff(Gam[a_][i][j], coords[a_]) for a_ in range(n)) - sum(
        sp.diff(Gam[a_][a_][i], coords[j]) for a_ in range(n)
    )
    R += sum(Gam[a_][a_][e] * Gam[e][i][j] - Gam[a_][j][e] * Gam[e][a_][i] for a_ in range(n) for e in range(n))
    values = {}
    for s in list(spec.params) + list(coords):
        txt = point[str(s)]
        if "atan" in txt:
            uu = sp.Rational(txt.split("atan(")[1].rstrip(")"))
            values[sp.cos(s)] = (1 - uu**2) / (1 + uu**2)
            values[sp.sin(s)] = 2 * uu / (1 + uu**2)
        else:
            values[s] = sp.Rational(txt)
    trig = {kk: vv for kk, vv in values.items() if not kk.is_Symbol}
    plain = {kk: vv for kk, vv in values.items() if kk.is_Symbol}
    return sp.nsimplify(R.xreplace(trig).xreplace(plain))


def _vacuum(X):
    return {X.label("R", i, j): X.ricci[i][j] for i in range(X.n) for j in range(i, X.n)}


def _check_counterexample(spec, out):
    assert out.status == "fail", out
    cex = out.counterexample
    assert cex["residual"] not in ("0", "~0")
    names = [str(c) for c in spec.coords]
    comp = cex["component"]
    i, j = (names.index(s) for s in comp[2:-1].split(","))
    ref = _reference_ricci_at(spec, cex["point"], i, j)
    assert ref != 0
    assert ref == sp.Rational(cex["residual"])


def test_wrong_power_schwarzschild_fails_with_real_residual():
    f = 1 - 2 * M / r**2  # wrong power of r
    spec = chart((t, r, th, ph), sph(-f, 1 / f), (M,), domain=(r > 2 * M, th > 0, th < sp.pi), ranges=(M > 0,))
    _check_counterexample(spec, Geometry(spec).verify(_vacuum))


def test_flipped_sign_kerr_fails_with_real_residual():
    g = kerr_metric()
    # flipped sign of 2 M r in Delta inside g_rr only (flipping g_t phi alone would be a -> -a: still Kerr)
    g[1, 1] = (r**2 + a**2 * sp.cos(th) ** 2) / (r**2 + 2 * M * r + a**2)
    spec = kerr(sp.ImmutableMatrix(g))
    out = Geometry(spec).verify(_vacuum)
    assert out.status == "fail" and out.method == "sampled"
    assert sp.Rational(out.counterexample["residual"]) != 0  # (independent recomputation: the swapped-factor test)


def test_swapped_factor_kerr_fails_with_real_residual():
    spec = kerr(kerr_metric(swap=True))  # g_rr = Delta/Sigma instead of Sigma/Delta
    out = Geometry(spec).verify(_vacuum)
    _check_counterexample(spec, out)


def test_flipped_sign_schwarzschild_real_residual():
    f = 1 + 2 * M / r  # negative-mass sign slip in g_tt only
    spec = chart(
        (t, r, th, ph), sph(-(1 - 2 * M / r), 1 / f), (M,), domain=(r > 2 * M, th > 0, th < sp.pi), ranges=(M > 0,)
    )
    _check_counterexample(spec, Geometry(spec).verify(_vacuum))


# ---------------------------------------------------------------------------
# engine behaviour


def test_sampling_respects_domain_and_parameter_ranges():
    geo = Geometry(kerr(), samples=12)
    pts = geo.sample_points()
    assert len(pts) == 12
    for pd in pts:
        vals = {s: pd.sample.numeric[s] for s in list(geo.params) + list(geo.coords)}
        assert 0 <= vals[a] < vals[M]
        assert vals[r] > vals[M] + sp.sqrt(vals[M] ** 2 - vals[a] ** 2)
        assert 0 < vals[th] < sp.pi
        assert all(pd.zero_test(pd.g[i][j]) is not None for i in range(4) for j in range(4))  # exact rationals


def test_samples_are_reproducible():
    one = [p.sample.shown for p in Geometry(kerr(), seed=3).sample_points()]
    two = [p.sample.shown for p in Geometry(kerr(), seed=3).sample_points()]
    assert one == two


def test_budget_exhausted_is_inconclusive_never_pass():
    geo = Geometry(kerr(), budget=0.0)
    geo.field.deadline = None
    out = geo.verify(
        lambda X: {X.label("K", 0): X.kretschmann - X.val(sp.Integer(0)) if False else X.weyl_square - X.kretschmann}
    )
    # the budget covers the preparation too (derivatives of the metric for the sample points)
    assert out.status == "inconclusive" and out.method == "sampled" and "did not finish" in out.detail
    # once the metric's derivatives exist, a spent budget still leaves the sampled evidence
    _ = geo.ddg
    out = geo.verify(lambda X: {X.label("K", 0): X.weyl_square - X.kretschmann})
    assert out.status == "inconclusive" and out.points > 0


def test_fallback_path_is_recorded():
    # Abs(r) is settled by a domain r > 2M (fast path), not by r**2 > 4 M**2, which allows either sign
    f = 1 - 2 * M / sp.Abs(r)
    spec = chart((t, r, th, ph), sph(-f, 1 / f), (M,), domain=(r**2 > 4 * M**2, th > 0, th < sp.pi), ranges=(M > 0,))
    geo = Geometry(spec, budget=1.0)
    assert geo.path == "sympy" and "Abs" in geo.fallback_reason
    out = geo.verify(_vacuum)
    assert out.status in ("pass", "inconclusive") and out.path == "sympy"
    bad = Geometry(
        chart((t, r, th, ph), sph(-(1 - 3 * M / sp.Abs(r)), 1 / f), (M,), domain=(r > 2 * M,), ranges=(M > 0,)),
        budget=1.0,
    )
    out = bad.verify(_vacuum)
    assert out.status == "fail" and out.method == "sampled"


def test_forced_sympy_path_agrees_with_flint_on_rational_metric():
    spec = reissner_nordstrom()
    fast = Geometry(spec)
    slow = Geometry(spec, path="sympy")
    assert slow.path == "sympy"
    for i in range(4):
        assert sp.cancel(fast.to_sympy(fast.einstein[i][i]) - slow.einstein[i][i]) == 0


def test_prove_zero_identities():
    # sin^2 + cos^2 = 1 and a square-root identity; a false one fails
    ok = prove_zero(
        {"trig": sp.sin(th) ** 2 + sp.cos(th) ** 2 - 1, "sqrt": sp.sqrt(r**2) ** 2 - r**2},
        (th, r),
        (),
        (th > 0, th < sp.pi, r > 0),
    )
    assert ok.status == "pass"
    bad = prove_zero({"x": sp.sin(2 * th) - sp.sin(th) * sp.cos(th)}, (th,), (), (th > 0, th < sp.pi))
    assert bad.status == "fail" and bad.counterexample["component"] == "x"


def test_christoffel_schwarzschild():
    # Gamma^r_tt = M (r - 2M) / r^3, Gamma^t_tr = M / (r (r - 2M)), Gamma^theta_phi phi = -sin cos:
    # Carroll (2004), eq. 5.23 (recalled from memory)
    geo = Geometry(schwarzschild())
    G = geo.christoffel
    assert exact_equal(geo, G[1][0][0], M * (r - 2 * M) / r**3)
    assert exact_equal(geo, G[0][0][1], M / (r * (r - 2 * M)))
    assert exact_equal(geo, G[2][3][3], -sp.sin(th) * sp.cos(th))
    assert exact_equal(geo, G[3][2][3], sp.cos(th) / sp.sin(th))


# ---------------------------------------------------------------------------
# generators of the fast path: nested roots, LambertW, opaque sub-expressions, exponentials


def test_nested_root_derivative_matches_sympy():
    # d/dx sqrt(x + sqrt(x^2 + 1)): the engine's derivation rules against sympy.diff (reference library)
    e = sp.sqrt(x + sp.sqrt(x**2 + 1)) * y + sp.sqrt(x + sp.sqrt(x**2 + 1)) ** 3
    geo = Geometry(chart((x, y), sp.diag(1, e**2), domain=(x > 0,)))
    assert geo.path == "flint"
    # an algebraic generator r with r^4 - 2 x r^2 - 1 = 0, kept reduced modulo that polynomial (no tower)
    assert [g.kind for g in geo.field.base].count("alg") == 1 and len(geo.field.algs) == 1
    assert not any(s.tower for s in geo.field.sqrts) and geo.field.complete
    for i, c in enumerate((x, y)):
        assert exact_equal(geo, geo.dval(e, i), sp.diff(e, c))
    assert exact_equal(geo, geo.ddval(e, 0, 0), sp.diff(e, x, 2))


def test_nested_root_curvature_matches_sympy():
    # dx^2 + f(x)^2 dy^2 has Gaussian curvature -f''/f, so R = -2 f''/f (do Carmo, Differential Geometry of
    # Curves and Surfaces (1976), sec. 4-3, exercise on orthogonal parametrisations; recalled from memory);
    # f''/f itself is evaluated by sympy.diff
    f = sp.sqrt(x + sp.sqrt(x**2 + 1))
    geo = Geometry(chart((x, y), sp.diag(1, f**2), domain=(x > 0,)))
    assert exact_equal(geo, geo.ricci_scalar, -2 * sp.diff(f, x, 2) / f)
    wrong = Geometry(chart((x, y), sp.diag(1, f**2), domain=(x > 0,)))
    out = wrong.verify(lambda X: {"R": X.ricci_scalar - X.val(2 * sp.diff(f, x, 2) / f)})
    assert out.status == "fail" and out.method == "sampled"


def test_kerr_schild_root_is_an_algebraic_generator_and_inverse_metric_is_exact():
    # Kerr-Schild form g = eta + f k k with r from r^4 - (x^2 + y^2 + z^2 - a^2) r^2 - a^2 z^2 = 0:
    # R. P. Kerr, Phys. Rev. Lett. 11 (1963) 237; M. Visser, The Kerr spacetime: a brief introduction (2007),
    # eqs. 10-13 (recalled from memory). The inverse is g^ab = eta^ab - f k^a k^b with k null.
    rho2 = x**2 + y**2 + z**2 - a**2
    R = sp.sqrt(rho2 / 2 + sp.sqrt(rho2**2 / 4 + a**2 * z**2))
    k = [1, (R * x + a * y) / (R**2 + a**2), (R * y - a * x) / (R**2 + a**2), z / R]
    f = 2 * M * R**3 / (R**4 + a**2 * z**2)
    eta = sp.diag(-1, 1, 1, 1)
    g = eta + f * sp.Matrix(4, 4, lambda i, j: k[i] * k[j])
    spec = chart((t, x, y, z), g, (M, a), domain=(z > 0,), ranges=(M > 0, a > 0, a < M))
    geo = Geometry(spec)
    # r is an algebraic generator; its polynomial is F2 y^2 + F0, so y becomes the square root of -F0/F2
    # over Q(M, a, x, z, r) and r a free variable (no tower, no reduction)
    F = geo.field
    assert geo.path == "flint" and any(g.kind == "alg" for g in F.base) and not F.algs
    assert [str(s.sym) for s in F.sqrts] == ["y"] and F.sqrts[0].coord is not None
    assert F.complete  # the defining polynomial is irreducible: a non-zero remainder is a definite non-zero
    # R really is the root: R^4 - rho2 R^2 - a^2 z^2 = 0 exactly
    assert geo.is_zero(geo.val(R**4 - rho2 * R**2 - a**2 * z**2))
    k_up = [-1, k[1], k[2], k[3]]
    for i in range(4):
        for j in range(4):
            assert exact_equal(geo, geo.ginv[i][j], eta[i, j] - f * k_up[i] * k_up[j])
    assert geo.is_zero(geo.det + 1)


def test_lambertw_derivative_and_exp_rewrite():
    # W e^W = z gives W' = W / (z (1 + W)) (R. M. Corless et al., On the Lambert W function, Adv. Comput. Math. 5
    # (1996) 329, eq. 3.2; recalled from memory), compared with sympy.diff
    T, X_ = sp.symbols("T X", real=True)
    w = sp.LambertW((X_**2 - T**2) * sp.exp(-1))
    e = w**2 + sp.exp(-w) * X_ + 1 / (1 + w)
    geo = Geometry(chart((T, X_), sp.diag(-1, 1 + w**2), domain=(T**2 - X_**2 < 1,)))
    for i, c in enumerate((T, X_)):
        assert exact_equal(geo, geo.dval(e, i), sp.diff(e, c))
    assert not any(g.kind == "exp" for g in geo.field.base)  # exp(-W) = W/z, not a new generator


def test_lambertw_of_u_exp_u_only_where_the_branch_is_right():
    from gravicat.engine.ratfun import simplify_lambertw

    u = r / (2 * M) - 1
    w = sp.LambertW(u * sp.exp(u))
    # principal branch: W(u e^u) = u exactly when u >= -1, here from r > 2M
    assert simplify_lambertw(w, (r,), (M,), (r > 2 * M,)) == u
    # u >= -1 does not follow from r > -M: W stays
    assert simplify_lambertw(w, (r,), (M,), (r > -M,)).has(sp.LambertW)
    assert simplify_lambertw(w, (r,), (M,), ()).has(sp.LambertW)


def test_kruskal_szekeres_is_vacuum_on_the_fast_path():
    # ds^2 = 32 M^3/r e^(-r/2M) (-dT^2 + dX^2) + r^2 dOmega^2 with (r/2M - 1) e^(r/2M) = X^2 - T^2:
    # C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation (1973), eq. 31.14 (recalled from memory)
    T, X_ = sp.symbols("T X", real=True)
    rr = 2 * M * (1 + sp.LambertW((X_**2 - T**2) * sp.exp(-1)))
    conf = 32 * M**3 / rr * sp.exp(-rr / (2 * M))
    spec = chart(
        (T, X_, th, ph),
        sp.diag(-conf, conf, rr**2, rr**2 * sp.sin(th) ** 2),
        (M,),
        domain=(T**2 - X_**2 < 1, th > 0, th < sp.pi),
        ranges=(M > 0,),
    )
    geo = Geometry(spec)
    assert geo.path == "flint"
    out = geo.verify(_vacuum)
    assert out.status == "pass" and out.method == "symbolic", out
    assert exact_equal(geo, geo.kretschmann, 48 * M**2 / rr**6)


def test_exponentials_of_one_atom_share_a_generator():
    # exp(r/2M) = exp(r/4M)^2 must reduce to zero (one generator exp(r/4M)), and a false variant fails
    ok = prove_zero({"e": sp.exp(r / (2 * M)) - sp.exp(r / (4 * M)) ** 2}, (r,), (M,), (r > 0, M > 0))
    assert ok.status == "pass" and ok.method == "symbolic"
    bad = prove_zero({"e": sp.exp(r / (2 * M)) - sp.exp(r / (4 * M))}, (r,), (M,), (r > 0, M > 0))
    assert bad.status == "fail"


def _majumdar_papapetrou(U):
    # ds^2 = -dt^2/U^2 + U^2 (dx^2 + dy^2 + dz^2), A = dt/U: electrovacuum iff U is harmonic in flat space:
    # S. D. Majumdar, Phys. Rev. 72 (1947) 390; A. Papapetrou, Proc. R. Irish Acad. A 51 (1947) 191;
    # J. B. Hartle and S. W. Hawking, Commun. Math. Phys. 26 (1972) 87, eq. 2.1 (recalled from memory)
    m1, m2, d = sp.symbols("m1 m2 d", positive=True)
    U = U(m1, m2, d)
    return chart(
        (t, x, y, z),
        sp.diag(-1 / U**2, U**2, U**2, U**2),
        (m1, m2, d),
        claim="electrovacuum",
        potential=(1 / U, 0, 0, 0),
        domain=(x > 0,),
    )


def _two_centres(m1, m2, d):
    return 1 + m1 / sp.sqrt(x**2 + y**2 + (z - d) ** 2) + m2 / sp.sqrt(x**2 + y**2 + (z + d) ** 2)


def test_opaque_sum_majumdar_papapetrou_electrovacuum():
    from gravicat.plugins.field_equations import residuals

    spec = _majumdar_papapetrou(_two_centres)
    geo = Geometry(spec)
    assert geo.path == "flint" and len(geo.opaque) == 1  # U is carried as an opaque function of x, y, z
    out = geo.verify(residuals(spec, "electrovacuum"))
    assert out.status == "pass" and out.method == "symbolic", out
    # in terms of the placeholder, g_tt is -1/X1^2; expanded, it is in the chart's own symbols
    (ph_,) = geo.opaque
    assert sp.simplify(geo.to_sympy(geo.g[0][0], opaque=True) + 1 / ph_**2) == 0
    explicit = geo.to_sympy(geo.christoffel[1][0][0])
    assert not explicit.atoms(sp.core.function.AppliedUndef) and explicit.free_symbols <= set(spec.coords + spec.params)
    assert "X1(x, y, z) = " in geo.legend()


def test_opaque_sum_that_is_not_harmonic_fails():
    from gravicat.plugins.field_equations import residuals

    def U(m1, m2, d):  # the second centre's 1/|x - x2| replaced by |x - x2|: not harmonic
        return 1 + m1 / sp.sqrt(x**2 + y**2 + (z - d) ** 2) + m2 * sp.sqrt(x**2 + y**2 + (z + d) ** 2)

    spec = _majumdar_papapetrou(U)
    geo = Geometry(spec)
    assert geo.opaque
    out = geo.verify(residuals(spec, "electrovacuum"))
    assert out.status == "fail" and out.counterexample is not None


def test_no_opaque_sums_in_rational_or_single_root_metrics():
    from gravicat.engine.ratfun import find_aliases

    assert not find_aliases(list(kerr().metric), kerr().coords)
    interior = -((3 * sp.sqrt(1 - 2 * M / 5) - sp.sqrt(1 - 2 * M * r**2 / 125)) ** 2) / 4
    assert not find_aliases([interior], (t, r, th, ph))  # one coordinate-dependent root only


def test_fallback_budget_is_cpu_time():
    from gravicat.engine.geometry import _run_limited

    def spin():
        while True:
            pass

    out, err = _run_limited(spin, 1)
    assert (out, err) == ({}, "budget")


# ---------------------------------------------------------------------------
# nested roots as algebraic generators (no tower)


def _ks_metric(R, f_of_r=None, kz_of_r=None):
    f = (f_of_r or (lambda q: 2 * M * q**3 / (q**4 + a**2 * z**2)))(R)
    kz = (kz_of_r or (lambda q: z / q))(R)
    k = [1, (R * x + a * y) / (R**2 + a**2), (R * y - a * x) / (R**2 + a**2), kz]
    return sp.diag(-1, 1, 1, 1) + f * sp.Matrix(4, 4, lambda i, j: k[i] * k[j])


def _ks_root():
    rho2 = x**2 + y**2 + z**2 - a**2
    return sp.sqrt(rho2 / 2 + sp.sqrt(rho2**2 / 4 + a**2 * z**2))


def _kerr_schild(f_of_r=None, kz_of_r=None, ranges=(M > 0, a > 0, a < M)):
    """Kerr-Schild form g = eta + f k k, r the positive root of r^4 - (x^2 + y^2 + z^2 - a^2) r^2 - a^2 z^2:
    R. P. Kerr, Phys. Rev. Lett. 11 (1963) 237; M. Visser, The Kerr spacetime: a brief introduction (2007),
    eqs. 10-13 (recalled from memory)."""
    g = _ks_metric(_ks_root(), f_of_r, kz_of_r)
    params = (M, a) if not g.has(Q) else (M, a, Q)
    return chart((t, x, y, z), g, params, domain=(z > 0,), ranges=ranges)


def _ricci_reference(f_of_r, coords, point, dps=50):
    """R_bd at ``point`` with sympy as the reference: sympy differentiates the explicit nested root r(x, y, z)
    (first and second derivatives) and the metric as a function of (x, y, z, r); the chain rule joins them
    and everything is evaluated with ``dps`` digits; then R_bd = d_a G^a_bd - d_d G^a_ab + G^a_ae G^e_bd -
    G^a_de G^e_ab with d g^-1 = -g^-1 dg g^-1."""
    import mpmath

    n = len(coords)
    rs = sp.Symbol("r_s", positive=True)
    G = _ks_metric(rs, f_of_r)
    root = _ks_root()
    with mpmath.workdps(dps + 10):
        sub = {s: sp.Rational(v) for s, v in point.items()}

        def num(e, extra=None):
            return mpmath.mpf(str(sp.N(e.subs({**sub, **(extra or {})}), dps + 10)))

        rv = num(root)
        dr = [num(sp.diff(root, c)) for c in coords]
        ddr = [[num(sp.diff(root, c, d)) for d in coords] for c in coords]
        at = {rs: sp.Float(mpmath.nstr(rv, dps + 8), dps + 10)}

        def dG(i, j, *wrt):
            return num(sp.diff(G[i, j], *wrt), at) if wrt else num(G[i, j], at)

        g0 = mpmath.matrix([[dG(i, j) for j in range(n)] for i in range(n)])
        Gi = g0**-1
        dg = [[[None] * n for _ in range(n)] for _ in range(n)]
        ddg = [[[[None] * n for _ in range(n)] for _ in range(n)] for _ in range(n)]
        for i in range(n):
            for j in range(i, n):
                Gc = [dG(i, j, c) for c in coords]
                Gr = dG(i, j, rs)
                Grr = dG(i, j, rs, rs)
                Gcr = [dG(i, j, c, rs) for c in coords]
                for c in range(n):
                    dg[c][i][j] = dg[c][j][i] = Gc[c] + Gr * dr[c]
                    for d in range(c, n):
                        v = dG(i, j, coords[c], coords[d]) + Gcr[c] * dr[d] + Gcr[d] * dr[c]
                        v += Grr * dr[c] * dr[d] + Gr * ddr[c][d]
                        ddg[c][d][i][j] = ddg[c][d][j][i] = ddg[d][c][i][j] = ddg[d][c][j][i] = v
        G1 = [[[(dg[b][a][c] + dg[c][a][b] - dg[a][b][c]) / 2 for c in range(n)] for b in range(n)] for a in range(n)]
        dG1 = [
            [
                [[(ddg[e][b][a][c] + ddg[e][c][a][b] - ddg[e][a][b][c]) / 2 for c in range(n)] for b in range(n)]
                for a in range(n)
            ]
            for e in range(n)
        ]
        dGi = [
            [
                [-sum(Gi[a, p] * dg[e][p][q] * Gi[q, b] for p in range(n) for q in range(n)) for b in range(n)]
                for a in range(n)
            ]
            for e in range(n)
        ]
        Gam = [[[sum(Gi[a, p] * G1[p][b][c] for p in range(n)) for c in range(n)] for b in range(n)] for a in range(n)]
        dGam = [
            [
                [
                    [sum(dGi[e][a][p] * G1[p][b][c] + Gi[a, p] * dG1[e][p][b][c] for p in range(n)) for c in range(n)]
                    for b in range(n)
                ]
                for a in range(n)
            ]
            for e in range(n)
        ]

    def ric(b, d):
        with mpmath.workdps(dps + 10):
            v = sum(dGam[a][a][b][d] - dGam[d][a][a][b] for a in range(n))
            v += sum(Gam[a][a][e] * Gam[e][b][d] - Gam[a][d][e] * Gam[e][a][b] for a in range(n) for e in range(n))
            return v

    return ric


def test_kerr_schild_ricci_matches_sympy_at_a_rational_point():
    # Kerr-Newman's profile f = r^2 (2 M r - Q^2)/(r^4 + a^2 z^2) (Visser 2007, sec. on Kerr-Newman; recalled from
    # memory) makes the Ricci tensor non-zero, so the comparison is not 0 = 0. Reference: sympy's differentiation
    # of the explicit nested root, 50 digits (general-purpose library, independent of the engine's derivation).
    import mpmath

    prof = lambda q: q**2 * (2 * M * q - Q**2) / (q**4 + a**2 * z**2)  # noqa: E731
    geo = Geometry(_kerr_schild(prof))
    assert geo.path == "flint" and not any(s.tower for s in geo.field.sqrts)
    point = {
        t: 0,
        x: sp.Rational(2, 7),
        y: sp.Rational(-3, 5),
        z: sp.Rational(5, 9),
        M: 1,
        a: sp.Rational(3, 8),
        Q: sp.Rational(1, 3),
    }
    ref = _ricci_reference(prof, (t, x, y, z), point)
    pt = geo.field.point({s: Fraction(int(v.p), int(v.q)) for s, v in ((s, sp.Rational(v)) for s, v in point.items())})
    with mpmath.workdps(60):
        for b, d in ((0, 0), (1, 3), (2, 2)):
            mine = mpmath.mpf(geo.ricci[b][d].evaluate(pt).mid().str(70, radius=False))
            expected = ref(b, d)
            assert abs(expected) > 1e-3  # a real non-zero component
            assert abs(mine - expected) < mpmath.mpf(10) ** -40


def test_kerr_schild_vacuum_proved_and_a_broken_one_fails_with_a_counterexample():
    geo = Geometry(_kerr_schild())
    ok = geo.verify(lambda X: {X.label("R", b, d): X.ricci[b][d] for b in range(4) for d in range(b, 4)})
    assert ok.status == "pass" and ok.method == "symbolic"
    # copying slip: k_z = z/(2r) instead of z/r (k is then no longer null, Kerr 1963)
    broken = Geometry(_kerr_schild(kz_of_r=lambda q: z / (2 * q)))
    out = broken.verify(lambda X: {X.label("R", b, d): X.ricci[b][d] for b in range(4) for d in range(b, 4)})
    assert out.status == "fail" and out.counterexample and out.counterexample["component"].startswith("R[")
    assert broken.field.complete  # a non-zero normal form is a definite non-zero here


def test_nested_root_with_two_inner_roots_falls_back_to_the_tower():
    # sqrt(x + sqrt(x^2 + 1) + sqrt(x^2 + 2)) has two different inner roots: not A + c sqrt(B), so a tower
    e = sp.sqrt(x + sp.sqrt(x**2 + 1) + sp.sqrt(x**2 + 2)) * y
    geo = Geometry(chart((x, y), sp.diag(1, e), domain=(x > 0, y > 0)))
    assert geo.path == "flint" and any(s.tower for s in geo.field.sqrts)
    assert not any(g.kind == "alg" for g in geo.field.base)
    for i, c in enumerate((x, y)):
        assert exact_equal(geo, geo.dval(e, i), sp.diff(e, c))


def test_algebraic_generator_reduction_inverse_and_inner_root():
    # r = sqrt(x + sqrt(x^2 + 1)): r^4 - 2 x r^2 - 1 = 0 and sqrt(x^2 + 1) = r^2 - x (algebra, no source needed)
    rr = sp.sqrt(x + sp.sqrt(x**2 + 1))
    geo = Geometry(chart((x, y), sp.diag(1, rr * y**2), domain=(x > 0, y > 0)))
    F = geo.field
    assert len(F.algs) == 1 and not F.sqrts  # the inner root is no generator of its own
    assert geo.is_zero(geo.val(rr**4 - 2 * x * rr**2 - 1))
    assert geo.is_zero(geo.val(sp.sqrt(x**2 + 1) - rr**2 + x))
    d = geo.val(rr**3 + x * rr + 5)
    assert geo.is_zero(d * (geo.one / d) - geo.one)  # inverse through the conjugates r -> -r, r^2 -> 2x - r^2
    assert not geo.is_zero(geo.val(rr**2 - x))  # = sqrt(x^2 + 1), definitely non-zero
    # 1/r = r^3 - 2 x r, shown without a root in the denominator
    assert exact_equal(geo, geo.val(1 / rr), rr**3 - 2 * x * rr)


def test_preparation_counts_against_the_budget():
    # a tiny budget ends the check inconclusive while the second derivatives of the metric are being
    # prepared (they were computed outside any budget before): the check cannot run for minutes
    geo = Geometry(_kerr_schild(lambda q: q**2 * (2 * M * q - Q**2) / (q**4 + a**2 * z**2)), budget=1e-6)
    out = geo.verify(lambda X: {X.label("R", b, d): X.ricci[b][d] for b in range(4) for d in range(b, 4)})
    assert out.status == "inconclusive" and "did not finish" in out.detail
    assert "ddg" not in geo.__dict__ and "ricci" not in geo.__dict__
    # with the default budget the same geometry object still proves what it can
    geo.budget = 20.0
    assert geo.verify(lambda X: {"det": X.det + 1}).status == "pass"


def test_values_free_of_the_root_are_shown_without_it():
    # Kerr's Kretschmann scalar in Kerr-Schild coordinates is a rational function of x, y, z: shown as one. Closed
    # form: R. C. Henry, ApJ 535 (2000) 350, eq. 1 with Q = 0 and cos(theta) = z/r (value recalled from memory)
    geo = Geometry(_kerr_schild())
    shown = geo.to_sympy(geo.kretschmann)
    assert all(p.exp.is_Integer for p in shown.atoms(sp.Pow)) and shown.free_symbols == {M, a, x, y, z}
    R = _ks_root()
    c = z / R
    henry = (
        48 * M**2 * (R**6 - 15 * a**2 * R**4 * c**2 + 15 * a**4 * R**2 * c**4 - a**6 * c**6) / (R**2 + a**2 * c**2) ** 6
    )
    pt = {M: 1, a: sp.Rational(1, 2), x: sp.Rational(1, 3), y: sp.Rational(2, 5), z: sp.Rational(3, 4)}
    assert abs(sp.N(shown.subs(pt) - henry.subs(pt), 50)) < 1e-40
    # a value that needs the root shows its explicit expression (and the same number)
    v = geo.christoffel[0][0][1]
    text = geo.to_sympy(v)
    assert text.has(sp.sqrt(a**2 * z**2 + (-(a**2) + x**2 + y**2 + z**2) ** 2 / 4))
    ptq = {s: Fraction(int(q.p), int(q.q)) for s, q in ((s, sp.Rational(q)) for s, q in {**pt, t: 0}.items())}
    engine = v.evaluate(geo.field.point(ptq))
    assert abs(sp.N(text.subs(pt), 40) - sp.Float(engine.mid().str(40, radius=False), 40)) < 1e-30


def test_two_nested_roots_are_two_reduced_algebraic_generators():
    # r1 = sqrt(x + sqrt(x^2 + 1)), r2 = sqrt(y + sqrt(y^2 + 1)): two defining polynomials, both applied by
    # reduction; derivatives against sympy.diff (reference library)
    r1 = sp.sqrt(x + sp.sqrt(x**2 + 1))
    r2 = sp.sqrt(y + sp.sqrt(y**2 + 1))
    e = r1 * r2 + r1**3 / (r2 + x)
    geo = Geometry(chart((x, y), sp.diag(1, e), domain=(x > 0, y > 0)))
    F = geo.field
    assert len(F.algs) == 2 and not F.sqrts and F.complete
    for i, c in enumerate((x, y)):
        assert exact_equal(geo, geo.dval(e, i), sp.diff(e, c))
    assert exact_equal(geo, geo.ddval(e, 0, 1), sp.diff(e, x, y))
    d = geo.val(r1 + r2 + 1)
    assert geo.is_zero(d * (geo.one / d) - geo.one)


def test_inertia_exact_interval_and_float_against_sympy():
    import flint

    from gravicat.engine.geometry import inertia

    # a rational symmetric matrix with off-diagonal terms; reference: sympy's eigenvalues (reference library)
    rows = [[-3, 1, 0, 2], [1, 2, 0, 0], [0, 0, 5, 1], [2, 0, 1, 1]]
    ev = [complex(v).real for v in sp.Matrix(rows).eigenvals(multiple=True)]
    expected = (sum(v < 0 for v in ev), 0, sum(v > 0 for v in ev))
    assert inertia([[flint.fmpq(v) for v in row] for row in rows]) == (expected, True)
    # Schwarzschild at r = 3 sqrt(2) M, theta = pi/4 (M = 1), entries as 320-bit balls: Lorentzian
    # (-,+,+,+) outside r = 2M (K. Schwarzschild 1916; S. M. Carroll, Spacetime and Geometry, 2004,
    # chapter 5, the Schwarzschild metric; recalled from memory)
    with flint.ctx.workprec(320):
        r = 3 * flint.arb(2).sqrt()
        f = 1 - 2 / r
        s2 = flint.arb(1) / 2
        g = [[-f, 0, 0, 0], [0, 1 / f, 0, 0], [0, 0, r**2, 0], [0, 0, 0, r**2 * s2]]
        assert inertia(g) == ((1, 0, 3), True)
        # a singular matrix of balls: the constant coefficient's ball contains 0, so the signs are not
        # certain and the floating-point eigenvalues (0 and 2 sqrt 2) are counted instead
        q = flint.arb(2).sqrt()
        assert inertia([[q, q], [q, q]]) == ((0, 1, 1), False)


# ---------------------------------------------------------------------------
# the three backends of the curvature formulas agree


def test_ball_backend_agrees_with_the_symbolic_and_point_backends():
    """BallCurvature (the backend repair screens with), fed the exact g, dg, ddg of a sample point as
    balls, gives the Kretschmann scalar of the symbolic chart at that point: K = 48 M^2 / r^6
    (Misner, Thorne & Wheeler, Gravitation (1973), eq. 31.4 ff., value recalled from memory), and
    every Riemann component of the per-point backend within 1e-40 (256-bit balls)."""
    import flint

    from gravicat.engine.curvature import BallCurvature
    from gravicat.engine.ratfun import arb_precision

    geo = Geometry(schwarzschild())
    pd = geo.sample_points()[0]
    assert pd.point is not None
    n = geo.n
    with arb_precision(256):
        ball = BallCurvature(
            [[flint.arb(pd.g[a][b]) for b in range(n)] for a in range(n)],
            [[[flint.arb(pd.dg[c][a][b]) for b in range(n)] for a in range(n)] for c in range(n)],
            [[[[flint.arb(pd.ddg[c][d][a][b]) for b in range(n)] for a in range(n)] for d in range(n)]
             for c in range(n)],
            geo.coords,
        )
        values = {str(s): flint.fmpq(v.numerator, v.denominator) for s, v in pd.sample.values.items()}
        expected = flint.arb(48) * flint.arb(values["M"]) ** 2 / flint.arb(values["r"]) ** 6
        tol = flint.arb(10) ** -40
        assert abs(ball.kretschmann - expected) < tol * expected
        assert abs(ball.kretschmann - flint.arb(pd.kretschmann)) < tol * expected
        R = ball.riemann
        for a in range(n):
            for b in range(n):
                for c in range(n):
                    for d in range(n):
                        assert abs(R[a][b][c][d] - flint.arb(pd.riemann[a][b][c][d])) < tol
        for a in range(n):
            for b in range(n):
                assert abs(ball.ricci[a][b]) < tol  # vacuum: R_ab = 0 (Wald, General Relativity, 1984, eq. 6.1.44)
