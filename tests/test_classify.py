"""Petrov type decided exactly (gravicat.physics.petrov), checked against published classifications.

Sources: H. Stephani, D. Kramer, M. MacCallum, C. Hoenselaers and E. Herlt, Exact Solutions of
Einstein's Field Equations, 2nd ed. (Cambridge 2003), ch. 4 (Petrov types, I^3 = 27 J^2) and the
solution chapters (Schwarzschild, Kerr, Reissner-Nordstrom, Kerr-Newman, Taub-NUT, Vaidya, Melvin,
Goedel: type D; pp-waves and plane waves: N; Robertson-Walker, de Sitter, anti-de Sitter, Einstein
static, Bertotti-Robinson: O; Kasner with generic exponents: I).
"""

from __future__ import annotations

import mpmath as mp
import pytest

from gravicat.engine.geometry import Geometry
from gravicat.format.bundled import bundled_path, read_bundled
from gravicat.format.metricfile import build_chart
from gravicat.physics import petrov as P


def _geometry(entry, chart=None):
    doc = read_bundled(bundled_path(entry))
    return Geometry(build_chart(doc, chart), budget=10)


@pytest.mark.parametrize(
    ("entry", "chart", "expected"),
    [
        # Stephani et al. 2003, sec. 15.4 (Schwarzschild), 21.1 (Kerr, Kerr-Newman), 15.4/16 (Reissner-Nordstrom),
        # 20.2 (Taub-NUT), 15.4 (Vaidya), 22.2 (Melvin), 12.4 (Goedel): type D
        ("schwarzschild", "schwarzschild", "D"),
        ("schwarzschild", "painleve-gullstrand", "D"),
        ("kerr", "boyer-lindquist", "D"),
        ("kerr", "kerr-schild", "D"),
        ("reissner-nordstrom", "static", "D"),
        ("kerr-newman", "boyer-lindquist", "D"),
        ("taub-nut", "standard", "D"),
        ("vaidya", "ingoing", "D"),
        ("melvin", "cylindrical", "D"),
        ("godel", "original", "D"),
        # Stephani et al. 2003, ch. 24 (pp-waves and plane waves): type N
        ("pp-wave", "brinkmann", "N"),
        ("plane-wave", "brinkmann", "N"),
        # conformally flat: Robertson-Walker (ch. 14), de Sitter and anti-de Sitter (constant curvature),
        # Einstein static universe, Bertotti-Robinson (sec. 12.3): type O
        ("flrw-flat", "comoving-cartesian", "O"),
        ("flrw-closed", "hyperspherical", "O"),
        ("de-sitter", "static", "O"),
        ("anti-de-sitter", "global", "O"),
        ("einstein-static", "areal", "O"),
        ("bertotti-robinson", "static", "O"),
        # Kasner with generic exponents: type I (Stephani et al. 2003, sec. 13.3); Robinson-Trautman type III
        # entry (Stephani et al. 2003, sec. 28.1)
        ("kasner", "comoving", "I"),
        ("robinson-trautman-type-iii", "null", "III"),
    ],
)
def test_petrov_types_from_the_literature(entry, chart, expected):
    res = P.petrov_type(_geometry(entry, chart))
    assert res.type == expected, res.where
    if expected != "I":
        assert res.method == "symbolic" and res.where.startswith("proved on the domain")


def test_other_dimensions_say_not_defined():
    res = P.petrov_type(_geometry("tangherlini-5d", "static"))
    assert res.type is None and res.where.startswith("not defined") and "4 dimensions" in res.where


def test_a_wrong_type_is_not_proved():
    # Kerr is type D, not N (Stephani et al. 2003, sec. 21.1): the identities of type N (W^2 = 0) fail
    geo = _geometry("kerr", "boyer-lindquist")
    out = geo.verify(P.type_identities_fn("N"), what="the identities of type N")
    assert out.status == "fail"


# values at 15 significant digits (the tetrad is built in double-like precision): compared to 1e-12 relative
def _kinnersley_psi2(entry, chart, kerr):
    geo = _geometry(entry, chart)
    pd = geo.sample_points()[0]
    num = {str(k): mp.mpf(v) for k, v in pd.sample.numeric.items()}
    M, r, th = num["M"], num["r"], num["theta"]
    a = num["a"] if kerr else mp.mpf(0)
    Sigma_c = mp.mpc(r, a * mp.cos(th))  # r + i a cos(theta)
    Delta = r * r - 2 * M * r + a * a
    S = r * r + a * a * mp.cos(th) ** 2
    # Kinnersley tetrad in Boyer-Lindquist coordinates (t, r, theta, phi) (Teukolsky 1973, eq. 4.4; recalled)
    tet = {
        "l": [(r * r + a * a) / Delta, 1, 0, a / Delta],
        "n": [(r * r + a * a) / (2 * S), -Delta / (2 * S), 0, a / (2 * S)],
        "m": [x / (mp.sqrt(2) * Sigma_c) for x in (mp.mpc(0, a * mp.sin(th)), 0, 1, mp.mpc(0, 1 / mp.sin(th)))],
    }
    with mp.workdps(40):
        psi = P.weyl_scalars_at(pd, tet)
    expected = -M / mp.mpc(r, -a * mp.cos(th)) ** 3
    return psi, expected, pd


def test_schwarzschild_psi2_in_the_kinnersley_tetrad():
    # Psi2 = -M/r^3, the only non-zero Weyl scalar (Chandrasekhar, The Mathematical Theory of Black Holes,
    # 1983, ch. 3; recalled from memory)
    psi, expected, _ = _kinnersley_psi2("schwarzschild", "schwarzschild", kerr=False)
    assert abs(psi["Psi2"] - expected) < mp.mpf(10) ** -12 * abs(expected)
    for k in ("Psi0", "Psi1", "Psi3", "Psi4"):
        assert abs(psi[k]) < mp.mpf(10) ** -12 * abs(expected)


def test_kerr_psi2_in_the_kinnersley_tetrad_and_the_invariants():
    # Psi2 = -M/(r - i a cos theta)^3 (Teukolsky 1973, Astrophys. J. 185, 635, eq. 4.5; recalled from memory)
    psi, expected, pd = _kinnersley_psi2("kerr", "boyer-lindquist", kerr=True)
    assert abs(psi["Psi2"] - expected) < mp.mpf(10) ** -12 * abs(expected)
    for k in ("Psi0", "Psi1", "Psi3", "Psi4"):
        assert abs(psi[k]) < mp.mpf(10) ** -12 * abs(expected)
    # the tetrad-free invariants agree with I = 3 Psi2^2 and J = -Psi2^3 (Stephani et al. 2003, eq. 4.20)
    I, J = P.invariants_at(pd)
    assert abs(I - 3 * expected**2) < mp.mpf(10) ** -12 * abs(I)
    assert abs(J + expected**3) < mp.mpf(10) ** -12 * abs(J)
    # and with the scalars of the automatic tetrad (the invariants do not depend on the tetrad)
    auto = P.weyl_scalars_at(pd)
    I2, J2 = P.invariants_from_scalars(auto)
    assert abs(I2 - I) < mp.mpf(10) ** -10 * abs(I)


# -- symmetries (gravicat.physics.killing) -------------------------------------------------------------


def _kerr_spec():
    return build_chart(read_bundled(bundled_path("kerr")), "boyer-lindquist")


def test_obvious_killing_vectors_of_kerr():
    # Kerr in Boyer-Lindquist coordinates is stationary and axisymmetric: d/dt and d/dphi (Wald 1984, sec. 12.3)
    from gravicat.physics.killing import obvious_killing_vectors

    assert obvious_killing_vectors(_geometry("kerr", "boyer-lindquist")) == ["t", "phi"]


def test_rotation_killing_vector_of_schwarzschild_and_a_wrong_sign():
    # spherical symmetry: xi = -sin(phi) d/dtheta - cot(theta) cos(phi) d/dphi is a Killing vector of every
    # spherically symmetric metric (Wald 1984, sec. 6.1); flipping one sign breaks Killing's equation
    import sympy as sp

    from gravicat.physics.killing import prove_killing_vector

    spec = build_chart(read_bundled(bundled_path("schwarzschild")), "schwarzschild")
    t, r, th, ph = spec.coords
    good = [0, 0, -sp.sin(ph), -sp.cos(th) / sp.sin(th) * sp.cos(ph)]
    assert prove_killing_vector(spec, good).status == "pass"
    bad = [0, 0, -sp.sin(ph), sp.cos(th) / sp.sin(th) * sp.cos(ph)]
    assert prove_killing_vector(spec, bad).status == "fail"


def _kerr_killing_tensor(sign):
    # K_ab = Sigma (l_a n_b + n_a l_b) + r^2 g_ab with the Kinnersley l, n (Walker & Penrose, Commun. Math. Phys.
    # 18 (1970) 265; Teukolsky 1973, eq. 4.4 for the tetrad; recalled from memory); Carter's constant is
    # K_ab p^a p^b
    import sympy as sp

    spec = _kerr_spec()
    t, r, th, ph = spec.coords
    M, a = (next(p for p in spec.params if str(p) == name) for name in ("M", "a"))
    Delta = r**2 - 2 * M * r + a**2
    Sigma = r**2 + a**2 * sp.cos(th) ** 2
    lu = sp.Matrix([(r**2 + a**2) / Delta, 1, 0, a / Delta])
    nu = sp.Matrix([r**2 + a**2, -Delta, 0, a]) / (2 * Sigma)
    g = spec.metric
    ll, nl = g * lu, g * nu
    K = [[sp.cancel(Sigma * (ll[i] * nl[j] + nl[i] * ll[j]) + sign * r**2 * g[i, j]) for j in range(4)]
         for i in range(4)]
    return spec, K


def test_kerr_killing_tensor_holds_and_a_sign_flip_is_caught():
    from gravicat.physics.killing import prove_killing_tensor

    spec, K = _kerr_killing_tensor(+1)
    assert prove_killing_tensor(spec, K).status == "pass"
    spec, K = _kerr_killing_tensor(-1)
    out = prove_killing_tensor(spec, K)
    assert out.status == "fail" and out.counterexample


# -- matter and energy conditions (gravicat.physics.matter) --------------------------------------------


def test_morris_thorne_violates_the_null_energy_condition_at_the_throat():
    # rho + p_r = -b0^2/(4 pi r^4) < 0 (b = b0^2/r, Phi = 0): Morris & Thorne, Am. J. Phys. 56 (1988) 395,
    # eqs. 12-14 (exotic matter at the throat r = b0)
    import sympy as sp

    from gravicat.physics.matter import diagonal_eigenvalues, energy_conditions

    geo = _geometry("morris-thorne", "areal")
    ev = diagonal_eigenvalues(geo, geo.spec)
    assert ev is not None
    r = next(c for c in geo.coords if str(c) == "r")
    b0 = next(p for p in geo.params if str(p) == "b0")
    rho, p_r = -ev["t"], ev["r"]
    at_throat = sp.simplify((rho + p_r).subs(r, b0))
    assert sp.simplify(at_throat + 1 / (4 * sp.pi * b0**2)) == 0
    ec = energy_conditions(geo, geo.spec)
    assert ec["null"]["status"] == "violated" and ec["null"]["counterexample"]["vector"]


def test_alcubierre_eulerian_energy_density_is_negative():
    # T_ab n^a n^b = -(vs^2 / (32 pi)) (y^2 + z^2)/rs^2 (df/drs)^2 <= 0 for the Eulerian observers
    # (Alcubierre, Class. Quantum Grav. 11 (1994) L73, eq. 19): negative wherever df/drs != 0
    from gravicat.physics.matter import eulerian_energy_density8

    geo = _geometry("alcubierre", None)
    signs = []
    for pd in geo.sample_points():
        with pd.precision():
            v = eulerian_energy_density8(pd, geo.spec)
            z = pd.zero_test(v)
            if z is False:
                signs.append(v < 0)
    assert signs and all(signs)


def test_a_regular_black_hole_core_violates_the_strong_condition():
    # Hayward's regular core is de Sitter-like (rho = -p): rho + sum p_i < 0 near r = 0 (Hayward, Phys. Rev.
    # Lett. 96 (2006) 031103; the de Sitter core violates the strong condition - recalled from memory)
    import sympy as sp

    from gravicat.physics.matter import diagonal_eigenvalues

    geo = _geometry("hayward", "static")
    ev = diagonal_eigenvalues(geo, geo.spec)
    r = next(c for c in geo.coords if str(c) == "r")
    vals = {str(p): sp.Rational(1) for p in geo.params}
    subs = {p: vals[str(p)] for p in geo.params}
    sec = (-ev["t"] + ev["r"] + ev["theta"] + ev["phi"]).subs(subs).subs(r, sp.Rational(1, 10))
    assert sec.evalf() < 0


# -- principal null directions (gravicat.physics.petrov.principal_null_directions) -----------------------


def test_kerr_principal_null_directions_are_kinnersleys_l_and_n():
    # the repeated principal null directions of Kerr are those of the Kinnersley tetrad in Boyer-Lindquist
    # coordinates, l = ((r^2 + a^2)/Delta, 1, 0, a/Delta) and n = (r^2 + a^2, -Delta, 0, a)/(2 Sigma)
    # (Chandrasekhar, The Mathematical Theory of Black Holes, 1983, ch. 6; Teukolsky 1973, eq. 4.4; recalled
    # from memory); scaled so that the t component is 1, compared to 1e-10
    geo = _geometry("kerr", "boyer-lindquist")
    pd = geo.sample_points()[0]
    got = P.principal_null_directions(pd, "D")
    assert got is not None and [d["multiplicity"] for d in got["directions"]] == [2, 2]
    num = {str(k): mp.mpf(v) for k, v in pd.sample.numeric.items()}
    M, a, r = num["M"], num["a"], num["r"]
    Delta = r * r - 2 * M * r + a * a
    expected = [[1, Delta / (r * r + a * a), 0, a / (r * r + a * a)],
                [1, -Delta / (r * r + a * a), 0, a / (r * r + a * a)]]
    vectors = [[mp.mpf(x) for x in d["vector"]] for d in got["directions"]]
    for want in expected:
        assert any(all(abs(v[i] - want[i]) < mp.mpf(10) ** -10 for i in range(4)) for v in vectors)
    for k in ("Psi0", "Psi1", "Psi3", "Psi4"):  # the adapted tetrad: only Psi2 (Stephani et al. 2003, sec. 4.3)
        assert got["adapted_weyl_scalars"][k] == "0.0"


def test_plane_wave_principal_null_direction_is_the_wave_vector():
    # a plane wave in Brinkmann coordinates is type N with the covariantly constant null vector d/dv as its
    # quadruple principal null direction (Stephani et al. 2003, sec. 24.5; recalled from memory); no coordinate
    # hypersurface is spacelike at a generic point, so the tetrad starts from a timelike covector of g^ab
    geo = _geometry("plane-wave", "brinkmann")
    got = P.principal_null_directions(geo.sample_points()[0], "N")
    assert got is not None
    (d,) = got["directions"]
    assert d["multiplicity"] == 4 and [mp.mpf(x) for x in d["vector"]] == [0, 1, 0, 0]


# -- sign analysis on the region (gravicat.physics.positivity) -------------------------------------------


def _sign(entry, chart, text):
    import sympy as sp

    from gravicat.physics.positivity import region_relations, sign_on_region

    spec = build_chart(read_bundled(bundled_path(entry)), chart)
    names = {str(s): s for s in spec.coords + spec.params}
    return sign_on_region(sp.sympify(text, locals=names), spec.coords, spec.params, region_relations(spec))


def test_signs_proved_on_the_region_and_none_when_not_shown():
    # Delta = r^2 - 2 M r + a^2 > 0 outside the outer horizon r > M + sqrt(M^2 - a^2) (a root of Delta)
    assert _sign("kerr", "boyer-lindquist", "r**2 - 2*M*r + a**2") == "positive"
    # cos(eta) - 1 < 0 for 0 < eta < 2 pi, so this density of the closed dust universe is positive
    assert _sign("flrw-closed-dust", "conformal", "-3/(4*pi*A**2*(cos(eta) - 1)**3)") == "positive"
    assert _sign("reissner-nordstrom", "static", "Q**2/(8*pi*r**4)") == "nonnegative"
    # r - 3 M changes sign on r > 2 M: never claimed either way
    assert _sign("schwarzschild", "schwarzschild", "r - 3*M") is None
    # r^3 - M l^2 changes sign on r > 0 (Hayward's core), but not on r > 2 M with l <= 4 M/(3 sqrt 3)
    assert _sign("hayward", "ingoing-eddington-finkelstein", "r**3 - M*l**2") is None
    assert _sign("hayward", "static", "r**3 - M*l**2") == "positive"


def test_closed_dust_universe_holds_every_condition_proved():
    # dust, rho > 0 and p = 0: every energy condition holds (Hawking & Ellis 1973, sec. 4.3); Friedmann's
    # closed model in conformal time, rho = 3 A/(4 pi a^3) with a = A (1 - cos eta) (recalled from memory)
    from gravicat.physics.energy_proof import proved_energy_conditions

    geo = _geometry("flrw-closed-dust", "conformal")
    got = proved_energy_conditions(geo, geo.spec)
    assert got is not None
    for cond in ("null", "weak", "strong", "dominant"):
        assert (got[cond]["status"], got[cond]["method"]) == ("holds", "proved")
    assert got["eigenvalues"]["timelike"] == "eta"


def test_vaidya_null_dust_conditions_depend_on_the_mass_function():
    # ingoing Vaidya: T_ab = (dm/dv)/(4 pi r^2) k_a k_b with k = -dv null, so 8 pi T_vv = 2 m'(v)/r^2 and every
    # energy condition holds exactly where dm/dv >= 0 (Griffiths & Podolsky, Exact Space-Times, 2009, sec. 9.5;
    # Hawking & Ellis 1973, sec. 4.3, type II; recalled from memory)
    import sympy as sp

    from gravicat.physics.classify import classify_chart

    geo = _geometry("vaidya", "ingoing")
    out = classify_chart(geo.spec, budget=10)
    matter = out["matter"]
    assert matter["hawking_ellis_type"] == "II"
    text = matter["eigenvalues"]["null_dust"].rpartition("= ")[2]
    v, r = (next(c for c in geo.coords if str(c) == name) for name in ("v", "r"))
    m = next(f for f in geo.spec.functions if str(f.func) == "m")
    got = sp.sympify(text, locals={"m": m.func, "v": v, "r": r})
    assert sp.simplify(got - 2 * sp.Derivative(m, v) / r**2) == 0
    for cond in ("null", "weak", "strong", "dominant"):
        item = out["energy_conditions"][cond]
        assert item["status"] == "depends on m(v)" and item["counterexample"]["vector_kind"] == "null"
