"""Physics facts of the bundled entries in other dimensions, of the type D family, of the magnetised and
cylindrical solutions and of the static axisymmetric vacua (issue #20, first half).

Every check of every bundled chart already runs in tests/test_bundled_checks.py (field equations, limits,
declared invariants, observers, transforms, proved by the engine). This file checks facts put into the
entries against published values, with a curvature computed here independently of the engine: plain sympy
differentiation of the bundled metric components, evaluated at a generic point with 40-digit mpmath
arithmetic, then Christoffel symbols, Riemann, Ricci and the Kretschmann scalar assembled numerically.
Relative tolerance 1e-20 unless stated (40 working digits; the metrics are smooth at the points chosen).
"""

from __future__ import annotations

import functools
import itertools

import mpmath
import pytest
import sympy as sp

from gravicat.engine.runner import bundled_documents
from gravicat.format.metricfile import build_chart

DOCS = bundled_documents()
mpmath.mp.dps = 40
TOL = mpmath.mpf("1e-20")

NEW_ENTRIES = (
    "tangherlini-5d", "tangherlini-6d", "myers-perry-5d", "btz", "btz-static", "charged-btz", "c-metric",
    "charged-c-metric", "kerr-newman-de-sitter", "kerr-taub-nut", "ernst-magnetised", "van-stockum",
    "zipoy-voorhees", "reissner-nordstrom-anti-de-sitter", "tangherlini-anti-de-sitter-5d",
    "reissner-nordstrom-5d", "black-string-5d", "kerr-anti-de-sitter", "linet-tian", "accelerating-kerr-newman",
)


@functools.cache
def _spec(entry, chart=None):
    return build_chart(DOCS[entry], chart)


def _values(spec, **given):
    """Symbol -> exact value: the given parameters and coordinates by name, defaults for other parameters."""
    out = {}
    for p in spec.params:
        out[p] = sp.nsimplify(given[p.name]) if p.name in given else spec.defaults[p]
    for x in spec.coords:
        out[x] = sp.nsimplify(given.get(x.name, sp.Rational(1, 3)))
    return out


def _num(expr, values):
    return mpmath.mpf(str(sp.N(expr.xreplace(values), 45)))


def curvature(spec, **given):
    """Ricci tensor R_ab, Ricci scalar and Kretschmann scalar at one point, from sympy derivatives."""
    vals = _values(spec, **given)
    X, G, n = spec.coords, spec.metric, len(spec.coords)
    g = mpmath.matrix(n, n)
    dg = [[[0] * n for _ in range(n)] for _ in range(n)]  # dg[c][a][b] = d_c g_ab
    ddg = [[[[0] * n for _ in range(n)] for _ in range(n)] for _ in range(n)]  # ddg[c][d][a][b]
    for a, b in itertools.combinations_with_replacement(range(n), 2):
        e = G[a, b]
        g[a, b] = g[b, a] = _num(e, vals)
        for c in range(n):
            ec = sp.diff(e, X[c])
            dg[c][a][b] = dg[c][b][a] = _num(ec, vals) if ec != 0 else mpmath.mpf(0)
            for d in range(c, n):
                ecd = sp.diff(ec, X[d]) if ec != 0 else 0
                v = _num(ecd, vals) if ecd != 0 else mpmath.mpf(0)
                ddg[c][d][a][b] = ddg[c][d][b][a] = ddg[d][c][a][b] = ddg[d][c][b][a] = v
    gi = g ** -1
    R = range(n)
    # Gamma_{e d b} = (d_d g_eb + d_b g_ed - d_e g_db)/2 and its derivative along c
    low = [[[(dg[d][e][b] + dg[b][e][d] - dg[e][d][b]) / 2 for b in R] for d in R] for e in R]
    dlow = [[[[(ddg[c][d][e][b] + ddg[c][b][e][d] - ddg[c][e][d][b]) / 2 for b in R] for d in R] for e in R]
            for c in R]
    gam = [[[sum(gi[a, e] * low[e][d][b] for e in R) for b in R] for d in R] for a in R]
    dgi = [[[-sum(gi[a, p] * dg[c][p][q] * gi[q, e] for p in R for q in R) for e in R] for a in R] for c in R]
    dgam = [[[[sum(dgi[c][a][e] * low[e][d][b] + gi[a, e] * dlow[c][e][d][b] for e in R) for b in R] for d in R]
             for a in R] for c in R]  # dgam[c][a][d][b] = d_c Gamma^a_db
    riem = {}  # R^a_{bcd}
    for a, b, c, d in itertools.product(R, R, R, R):
        riem[a, b, c, d] = (dgam[c][a][d][b] - dgam[d][a][c][b]
                            + sum(gam[a][c][e] * gam[e][d][b] - gam[a][d][e] * gam[e][c][b] for e in R))
    ric = mpmath.matrix(n, n)
    for b, d in itertools.product(R, R):
        ric[b, d] = sum(riem[a, b, a, d] for a in R)
    scalar = sum(gi[b, d] * ric[b, d] for b in R for d in R)
    lower = {(a, b, c, d): sum(g[a, e] * riem[e, b, c, d] for e in R) for a, b, c, d in itertools.product(R, R, R, R)}
    upper = {}
    for a, b, c, d in itertools.product(R, R, R, R):  # R^{a b c d} from R^a_{bcd}
        upper[a, b, c, d] = sum(riem[a, p, q, s] * gi[p, b] * gi[q, c] * gi[s, d]
                                for p in R for q in R for s in R
                                if gi[p, b] != 0 and gi[q, c] != 0 and gi[s, d] != 0)
    kretschmann = sum(lower[k] * upper[k] for k in lower)
    return {"g": g, "ricci": ric, "R": scalar, "K": kretschmann, "values": vals}


def close(a, b, tol=TOL):
    a, b = mpmath.mpf(a), mpmath.mpf(b)
    return abs(a - b) <= tol * max(1, abs(b))


def test_every_entry_of_this_half_is_bundled_with_references_and_ranges():
    for entry in NEW_ENTRIES:
        doc = DOCS[entry]
        assert len(doc.data["references"]) >= 2, entry
        assert all("range" in p and "default" in p for p in doc.data["parameters"].values()), entry


@pytest.mark.parametrize("entry, dim, mu", [("tangherlini-5d", 5, "mu"), ("tangherlini-6d", 6, "rh**3")])
def test_tangherlini_kretschmann_and_horizon(entry, dim, mu):
    # K = (D-1)(D-2)**2 (D-3) mu**2 / r**(2(D-1)) for f = 1 - mu/r**(D-3) (recalled from memory; at D = 4
    # with mu = 2M it is 48 M**2/r**6, C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation (1973),
    # eq. 31.4, also recalled); Ricci-flat (F. R. Tangherlini, Nuovo Cimento 27 (1963) 636)
    spec = _spec(entry, "static")
    out = curvature(spec, r="7/3", theta="5/7", chi="4/5", psi="2/3", phi="1/3")
    m = sp.sympify(mu).subs({sp.Symbol(p.name): out["values"][p] for p in spec.params})
    rr = sp.Rational(7, 3)
    expected = (dim - 1) * (dim - 2) ** 2 * (dim - 3) * m**2 / rr ** (2 * (dim - 1))
    assert close(out["K"], sp.N(expected, 40))
    assert all(abs(v) < TOL for v in out["ricci"])
    # horizon where g_tt = 0: r_h = mu**(1/(D-3))
    r_h = sp.root(m, dim - 3)
    assert spec.metric[0, 0].xreplace({**out["values"], spec.coords[1]: r_h}) == 0


def test_black_string_has_the_schwarzschild_kretschmann():
    # the flat factor adds no curvature: K = 48 M**2/r**6 (Misner, Thorne and Wheeler (1973), eq. 31.4,
    # recalled from memory); R. Gregory and R. Laflamme, Phys. Rev. Lett. 70 (1993) 2837 for the string
    out = curvature(_spec("black-string-5d", "static"), M="3/2", r="11/2", theta="6/7")
    assert close(out["K"], mpmath.mpf(48) * mpmath.mpf(3) ** 2 / 4 / mpmath.mpf(11 / 2) ** 6)


def test_myers_perry_outer_horizon_and_ricci_flatness():
    # r_+**2 = (mu - a**2 - b**2 + sqrt((mu - a**2 - b**2)**2 - 4 a**2 b**2))/2, where Delta = 0
    # (R. C. Myers and M. J. Perry, Ann. Phys. 172 (1986) 304; recalled from memory)
    spec = _spec("myers-perry-5d")
    mu, a, b = sp.Integer(1), sp.Rational(1, 4), sp.Rational(1, 3)
    rp2 = (mu - a**2 - b**2 + sp.sqrt((mu - a**2 - b**2) ** 2 - 4 * a**2 * b**2)) / 2
    r = spec.coords[1]
    delta = sp.fraction(sp.together(1 / spec.metric[1, 1]))[0]  # g^rr vanishes with Delta
    vals = {p: v for p, v in _values(spec, mu=1, a="1/4", b="1/3").items() if p in spec.params}
    assert sp.simplify(delta.xreplace(vals).subs(r, sp.sqrt(rp2))) == 0
    out = curvature(spec, mu=1, a="1/4", b="1/3", r="3/2", theta="3/5")
    assert all(abs(v) < TOL for v in out["ricci"])


def test_btz_horizons_and_constant_curvature():
    # N**2 = 0 at r_+-**2 = (M l**2/2)(1 +- sqrt(1 - (J/(M l))**2)); constant curvature, R = -6/l**2 and
    # R_abcd R^abcd = 12/l**4 (M. Bañados, C. Teitelboim and J. Zanelli, Phys. Rev. Lett. 69 (1992) 1849;
    # M. Bañados, M. Henneaux, C. Teitelboim and J. Zanelli, Phys. Rev. D 48 (1993) 1506; recalled from memory)
    spec = _spec("btz", "rotating")
    l, M, J = sp.Rational(3, 2), sp.Integer(2), sp.Rational(5, 4)
    r = spec.coords[1]
    vals = {p: {"l": l, "M": M, "J": J}[p.name] for p in spec.params}
    n2 = sp.together(1 / spec.metric[1, 1]).xreplace(vals)
    for sign in (1, -1):
        r2 = M * l**2 / 2 * (1 + sign * sp.sqrt(1 - (J / (M * l)) ** 2))
        assert sp.simplify(n2.subs(r, sp.sqrt(r2))) == 0
    out = curvature(spec, l="3/2", M=2, J="5/4", r="13/5")
    assert close(out["R"], -6 / mpmath.mpf(1.5) ** 2)
    assert close(out["K"], 12 / mpmath.mpf(1.5) ** 4)


def test_charged_btz_reduces_its_curvature_to_btz_only_without_charge():
    # with charge the curvature is no longer constant (C. Martínez, C. Teitelboim and J. Zanelli,
    # Phys. Rev. D 61 (2000) 104013): R differs from -6/l**2 by a term in Q**2/r**2
    spec = _spec("charged-btz")
    charged = curvature(spec, l=1, M=2, Q="1/2", r=3)
    neutral = curvature(spec, l=1, M=2, Q=0, r=3)
    assert close(neutral["R"], -6)
    assert not close(charged["R"], -6, tol=mpmath.mpf("1e-6"))


@pytest.mark.parametrize("point", [{"r": "5/2", "theta": "2/3"}, {"r": "7", "theta": "5/2"}])
def test_c_metric_kretschmann(point):
    # only Psi_2 = -M Omega**3/r**3 is non-zero, so K = 48 M**2 Omega**6/r**6 with Omega = 1 + A r cos(theta)
    # in this entry's orientation (J. B. Griffiths, P. Krtouš and J. Podolský, Class. Quantum Grav. 23 (2006)
    # 6745; J. B. Griffiths and J. Podolsky, Exact Space-Times (2009), accelerating black holes; recalled
    # from memory)
    spec = _spec("c-metric", "spherical")
    out = curvature(spec, M=1, A="1/10", **point)
    r, th = mpmath.mpf(sp.Rational(point["r"])), mpmath.mpf(sp.Rational(point["theta"]))
    omega = 1 + r * mpmath.cos(th) / 10
    assert close(out["K"], 48 * omega**6 / r**6)


@pytest.mark.parametrize("lam", ["1/100", "-1/50"])
def test_kerr_newman_with_lambda_of_either_sign_has_ricci_scalar_4_lambda(lam):
    # traceless Maxwell stress tensor: R = 4 Lambda (trace of G_ab + Lambda g_ab = 8 pi T_ab; B. Carter,
    # Commun. Math. Phys. 10 (1968) 280 for the metric)
    out = curvature(_spec("kerr-newman-de-sitter"), M=1, Q="1/2", a="1/2", Lambda=lam, r="7/2", theta="4/5")
    assert close(out["R"], 4 * mpmath.mpf(sp.Rational(lam)))


def test_kerr_anti_de_sitter_is_einstein_with_lambda():
    # R_ab = Lambda g_ab (Carter 1968; S. W. Hawking, C. J. Hunter and M. M. Taylor-Robinson,
    # Phys. Rev. D 59 (1999) 064005)
    out = curvature(_spec("kerr-anti-de-sitter"), M=1, a="3/4", Lambda="-1/5", r="9/4", theta="7/5")
    lam = mpmath.mpf(-1) / 5
    assert all(close(out["ricci"][i, j], lam * out["g"][i, j], tol=mpmath.mpf("1e-18")) or
               abs(out["ricci"][i, j] - lam * out["g"][i, j]) < TOL for i in range(4) for j in range(4))


def test_kerr_taub_nut_is_ricci_flat_at_a_generic_point():
    # M. Demiański and E. T. Newman (1966); J. G. Miller, J. Math. Phys. 14 (1973) 486: vacuum
    for chart in ("boyer-lindquist", "north-regular"):
        out = curvature(_spec("kerr-taub-nut", chart), M=1, n="2/3", a="3/5", r="17/5", theta="6/5")
        assert all(abs(v) < TOL for v in out["ricci"])


def test_ernst_horizon_area_does_not_depend_on_the_field():
    # the horizon r = 2M keeps the Schwarzschild area 16 pi M**2 for any B (F. J. Ernst, J. Math. Phys. 17
    # (1976) 54; recalled from memory): area = integral of sqrt(g_thth g_phph) dtheta dphi
    spec = _spec("ernst-magnetised")
    th = spec.coords[2]
    for B in ("0", "1/3", "2"):
        vals = {p: {"M": sp.Integer(1), "B": sp.Rational(B)}[p.name] for p in spec.params}
        vals[spec.coords[1]] = 2
        integrand = sp.sqrt(spec.metric[2, 2] * spec.metric[3, 3]).xreplace(vals)
        f = sp.lambdify(th, integrand, "mpmath")
        area = 2 * mpmath.pi * mpmath.quad(f, [0, mpmath.pi])
        assert close(area, 16 * mpmath.pi, tol=mpmath.mpf("1e-25"))


def test_van_stockum_density_and_closed_timelike_curves():
    # 8 pi mu = 4 a**2 exp(a**2 rho**2) and g_phiphi = rho**2 (1 - a**2 rho**2) < 0 beyond a rho = 1
    # (W. J. van Stockum, Proc. R. Soc. Edinburgh 57 (1937) 135; F. J. Tipler, Phys. Rev. D 9 (1974) 2203;
    # recalled from memory). G_tt = 8 pi mu u_t u_t with u = d/dt, u_t = -1.
    spec = _spec("van-stockum")
    out = curvature(spec, a="1/2", rho="6/5")
    g, ric = out["g"], out["ricci"]
    gi = g**-1
    scalar = sum(gi[i, j] * ric[i, j] for i in range(4) for j in range(4))
    g_tt_einstein = ric[0, 0] - scalar * g[0, 0] / 2
    a2, rho2 = mpmath.mpf(1) / 4, (mpmath.mpf(6) / 5) ** 2
    assert close(g_tt_einstein, 4 * a2 * mpmath.exp(a2 * rho2))
    gpp = spec.metric[2, 2]
    a = spec.params[0]
    rho = spec.coords[1]
    assert gpp.xreplace({a: sp.Rational(1, 2), rho: sp.Rational(19, 10)}) > 0
    assert gpp.xreplace({a: sp.Rational(1, 2), rho: sp.Rational(21, 10)}) < 0


def test_zipoy_voorhees_mass_and_vacuum():
    # -g_tt = 1 - 2 M/r + O(1/r**2) with M = delta k the mass of a rod of half length k (B. H. Voorhees,
    # Phys. Rev. D 2 (1970) 2119; D. M. Zipoy, J. Math. Phys. 7 (1966) 1137; recalled from memory)
    spec = _spec("zipoy-voorhees", "spherical-like")
    vals = {p: {"M": sp.Integer(2), "delta": sp.Rational(3, 2)}[p.name] for p in spec.params}
    r, th = spec.coords[1], spec.coords[2]
    gtt = spec.metric[0, 0].xreplace(vals).subs(th, sp.Rational(1, 2))
    big = sp.Integer(10) ** 12
    assert close(_num((1 + gtt) * r, {r: big}), 4, tol=mpmath.mpf("1e-10"))
    for chart, point in (("prolate", {"x": "9/4", "y": "1/3"}), ("spherical-like", {"r": "13/2", "theta": "4/7"})):
        out = curvature(_spec("zipoy-voorhees", chart), M=2, delta="3/2", **point)
        assert all(abs(v) < TOL for v in out["ricci"])


def test_linet_tian_is_einstein_with_negative_lambda():
    # R_ab = Lambda g_ab (B. Linet, J. Math. Phys. 27 (1986) 1817; Q. Tian, Phys. Rev. D 33 (1986) 3549)
    out = curvature(_spec("linet-tian"), sigma="1/5", Lambda="-1/3", rho="7/4")
    lam = -mpmath.mpf(1) / 3
    for i in range(4):
        for j in range(4):
            assert abs(out["ricci"][i, j] - lam * out["g"][i, j]) < TOL * max(1, abs(out["g"][i, j]))


def test_accelerating_kerr_newman_has_ricci_scalar_4_lambda():
    # J. B. Griffiths and J. Podolský, Int. J. Mod. Phys. D 15 (2006) 335: Einstein-Maxwell with Lambda,
    # traceless Maxwell tensor, so R = 4 Lambda
    out = curvature(_spec("accelerating-kerr-newman"), M=1, a="1/5", Q="1/4", g="1/6", A="1/30",
                    Lambda="-1/40", r="3", theta="9/7")
    assert close(out["R"], -mpmath.mpf(1) / 10, tol=mpmath.mpf("1e-18"))


def test_reissner_nordstrom_5d_extremal_double_horizon():
    # r_+-**2 = (mu +- sqrt(mu**2 - 4 q**2))/2 coincide at q = mu/2 (R. C. Myers and M. J. Perry (1986);
    # recalled from memory): f and f' vanish at r**2 = mu/2
    spec = _spec("reissner-nordstrom-5d")
    r = spec.coords[1]
    f = -spec.metric[0, 0].xreplace({p: {"mu": sp.Integer(2), "q": sp.Integer(1)}[p.name] for p in spec.params})
    assert sp.simplify(f.subs(r, 1)) == 0 and sp.simplify(sp.diff(f, r).subs(r, 1)) == 0


def test_tangherlini_anti_de_sitter_horizon():
    # r_h**2 = (l**2/2)(sqrt(1 + 4 mu/l**2) - 1) with Lambda = -6/l**2 in five dimensions (E. Witten,
    # Adv. Theor. Math. Phys. 2 (1998) 505; recalled from memory)
    spec = _spec("tangherlini-anti-de-sitter-5d")
    r = spec.coords[1]
    mu, l2 = sp.Integer(3), sp.Integer(2)
    gtt = spec.metric[0, 0].xreplace({p: {"mu": mu, "Lambda": -6 / l2}[p.name] for p in spec.params})
    rh2 = l2 / 2 * (sp.sqrt(1 + 4 * mu / l2) - 1)
    assert sp.simplify(gtt.subs(r, sp.sqrt(rh2))) == 0
    out = curvature(spec, mu=3, Lambda=-3, r="5/2", theta="1/2")
    assert close(out["R"], -10)  # R = 2 D Lambda/(D - 2) = 10 Lambda/3


def test_reissner_nordstrom_anti_de_sitter_kretschmann():
    # the Reissner-Nordström value (48 M**2 r**2 - 96 M Q**2 r + 56 Q**4)/r**8 plus 8 Lambda**2/3 (recalled
    # from memory; A. Chamblin, R. Emparan, C. V. Johnson and R. C. Myers, Phys. Rev. D 60 (1999) 064018
    # for the metric)
    out = curvature(_spec("reissner-nordstrom-anti-de-sitter", "static"), M=1, Q="1/2", Lambda="-3/10",
                    r="5/2", theta="1")
    M, Q, L, r = 1, mpmath.mpf(1) / 2, -mpmath.mpf(3) / 10, mpmath.mpf(5) / 2
    assert close(out["K"], 8 * L**2 / 3 + (48 * M**2 * r**2 - 96 * M * Q**2 * r + 56 * Q**4) / r**8)
