"""Observer physics (``gravicat orbits``) against published results.

Every landmark is computed by the tool from the metric of a bundled catalogue
file; the expected values below are closed forms from the literature (cited
beside each check) evaluated independently here with mpmath / sympy.
"""

from __future__ import annotations

import json
import math
import sys
from functools import cache
from pathlib import Path

import mpmath
import pytest

from gravicat.errors import InputError
from gravicat.format.metricfile import build_chart, load_file
from gravicat.physics import orbits, units
from gravicat.store.revisions import bundled_files

BUNDLED = {p.stem: p for p in bundled_files()}
KERR, SCHW, RN = (str(BUNDLED[n]) for n in ("kerr", "schwarzschild", "reissner-nordstrom"))


@cache
def _chart(entry: str, chart: str | None = None):
    doc = load_file(BUNDLED[entry])
    spec = build_chart(doc, chart)
    return doc, spec, orbits.EquatorialChart(spec, doc.chart_names)


@cache
def model(entry: str, settings: tuple[str, ...], chart: str | None = None) -> orbits.Equatorial:
    doc, spec, eq = _chart(entry, chart)
    return eq.bind(orbits.resolve_parameters(doc, spec, settings))


def one_error_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("Error: ")
    assert "Traceback" not in result.output
    return lines[0]


# --------------------------------------------------------------------------- Schwarzschild


@pytest.mark.parametrize("mass", ["1", "2.5"])
def test_schwarzschild_landmarks(mass):
    # Horizon 2M, photon sphere 3M, ISCO 6M: S. M. Carroll, Spacetime and Geometry (2004), sections 5.4-5.6
    # (circular orbits of the effective potential). Marginally bound orbit 4M: C. W. Misner, K. S. Thorne and
    # J. A. Wheeler, Gravitation (1973), chapter 25, and Bardeen, Press & Teukolsky, ApJ 178 (1972) 347,
    # eq. (2.19) with a = 0 (equation number recalled from memory).
    M = float(mass)
    m = model("schwarzschild", (f"M={mass}",))
    assert [q.radius for q in m.horizons.roots] == pytest.approx([2 * M], rel=1e-14)
    assert m.static_limit == pytest.approx(2 * M, rel=1e-14)
    for d in orbits.DIRECTIONS:
        assert m.landmarks["photon_orbits"][d] == pytest.approx(3 * M, rel=1e-12)
        assert m.landmarks["marginally_bound"][d] == pytest.approx(4 * M, rel=1e-12)
        assert m.landmarks["isco"][d] == pytest.approx(6 * M, rel=1e-12)


@pytest.mark.parametrize("x", [6.5, 10.0, 57.0])
def test_schwarzschild_circular_orbits_and_static_observers(x):
    # Circular geodesics: Omega = sqrt(M/r^3) (Kepler's law holds exactly in Schwarzschild time),
    # u^t = 1/sqrt(1 - 3M/r), E = (1 - 2M/r)/sqrt(1 - 3M/r), L = sqrt(M r)/sqrt(1 - 3M/r):
    # Carroll (2004) section 5.4 and exercises of chapter 5; Bardeen, Press & Teukolsky (1972) eqs. (2.12)-(2.16)
    # with a = 0 (equation numbers recalled from memory). Static observers: u^t = 1/sqrt(1 - 2M/r) (Carroll 2004,
    # section 5.4, gravitational redshift).
    M = 1.5
    r = x * M
    m = model("schwarzschild", ("M=1.5",))
    for d, sign in (("prograde", 1), ("retrograde", -1)):
        c = m.circular(r, d)
        assert c["exists"] and c["stable"] is (r > 6 * M) and c["bound"] is (r > 4 * M)
        assert c["Omega"] == pytest.approx(sign * (M / r**3) ** 0.5, rel=1e-13)
        assert c["u"]["t"] == pytest.approx((1 - 3 * M / r) ** -0.5, rel=1e-13)
        assert c["u"]["phi"] == pytest.approx(c["u"]["t"] * c["Omega"], rel=1e-13)
        assert c["energy"] == pytest.approx((1 - 2 * M / r) / (1 - 3 * M / r) ** 0.5, rel=1e-13)
        assert c["angular_momentum"] == pytest.approx(sign * (M * r) ** 0.5 / (1 - 3 * M / r) ** 0.5, rel=1e-13)
        assert c["norm_residual"] < 1e-14 and c["geodesic_residual"] < 1e-13
    s = m.static_observer(r)
    assert s["u"]["t"] == pytest.approx((1 - 2 * M / r) ** -0.5, rel=1e-14)
    assert s["clock_rate"] == pytest.approx((1 - 2 * M / r) ** 0.5, rel=1e-14)


def test_inside_the_photon_sphere_there_is_no_timelike_circular_orbit():
    # Carroll (2004) section 5.4: no circular orbits of massive particles inside r = 3M.
    m = model("schwarzschild", ("M=1",))
    c = m.circular(2.9, "prograde")
    assert c["exists"] is False and "photon orbit" in c["reason"]
    assert m.circular(1.5, "prograde")["exists"] is False
    assert m.static_observer(1.5)["exists"] is False


def test_other_charts_of_schwarzschild_give_the_same_physics():
    # The isotropic radius: r = rho (1 + M/(2 rho))^2 (MTW 1973, eq. 31.22, recalled from memory; the
    # same transform is in the catalogue file). The horizon r = 2M is rho = M/2, a double zero of
    # g_tt g_phiphi there; photon sphere and ISCO map to rho = (2 + sqrt 3) M/2 and (5 + 2 sqrt 6) M/2.
    # Ingoing Eddington-Finkelstein and Painleve-Gullstrand keep r, so the landmarks stay at 2M, 3M, 4M, 6M.
    iso = model("schwarzschild", ("M=1",), "isotropic")
    assert [(q.radius, q.multiplicity) for q in iso.horizons.roots] == [(pytest.approx(0.5, rel=1e-14), 2)]
    assert iso.landmarks["photon_orbits"]["prograde"] == pytest.approx((2 + 3**0.5) / 2, rel=1e-12)
    assert iso.landmarks["isco"]["retrograde"] == pytest.approx((5 + 2 * 6**0.5) / 2, rel=1e-12)
    rho = (4 + 12**0.5) / 2  # r = 4M + ... : any radius; compare Omega at the same areal radius
    r = rho * (1 + 1 / (2 * rho)) ** 2
    assert iso.circular(rho, "prograde")["Omega"] == pytest.approx(r**-1.5, rel=1e-13)
    for chart in ("ingoing-eddington-finkelstein", "painleve-gullstrand"):
        m = model("schwarzschild", ("M=2",), chart)
        assert [q.radius for q in m.horizons.roots] == pytest.approx([4.0])
        assert [m.landmarks[k]["prograde"] for k in ("photon_orbits", "marginally_bound", "isco")] == \
            pytest.approx([6.0, 8.0, 12.0], rel=1e-12)
        assert m.circular(20.0, "prograde")["Omega"] == pytest.approx((2 / 20.0**3) ** 0.5, rel=1e-13)


# --------------------------------------------------------------------------- Kerr


def bpt_isco(a, M, sign):
    """Bardeen, Press & Teukolsky, ApJ 178 (1972) 347, eq. (2.21); sign -1 prograde, +1 retrograde."""
    chi = mpmath.mpf(a) / M
    z1 = 1 + mpmath.cbrt(1 - chi**2) * (mpmath.cbrt(1 + chi) + mpmath.cbrt(1 - chi))
    z2 = mpmath.sqrt(3 * chi**2 + z1**2)
    return M * (3 + z2 + sign * mpmath.sqrt((3 - z1) * (3 + z1 + 2 * z2)))


@pytest.mark.parametrize("spin", ["0.5", "0.9", "0.998"])
def test_kerr_landmarks_match_bardeen_press_teukolsky(spin):
    # Horizons r = M +- sqrt(M^2 - a^2) (Boyer & Lindquist 1967; Carroll 2004 section 6.6).
    # ISCO: BPT 1972 eq. (2.21); photon orbits r = 2M(1 + cos(2/3 arccos(-+a/M))) eq. (2.18); marginally
    # bound r = 2M -+ a + 2 sqrt(M) sqrt(M -+ a) eq. (2.19) (equation numbers recalled from memory).
    # Ergosurface on the equator r = 2M (Carroll 2004 section 6.6).
    mpmath.mp.dps = 30
    a, M = mpmath.mpf(spin), mpmath.mpf(1)
    m = model("kerr", ("M=1", f"a={spin}"))
    root = mpmath.sqrt(M**2 - a**2)
    assert [q.radius for q in m.horizons.roots] == pytest.approx([float(M - root), float(M + root)], rel=1e-13)
    assert [q.radius for q in m.ergosurface.roots] == pytest.approx([2.0], rel=1e-14)
    for d, s in (("prograde", -1), ("retrograde", 1)):
        assert abs(m.landmarks["isco"][d] - float(bpt_isco(a, M, s))) < 1e-8
        photon = 2 * M * (1 + mpmath.cos(mpmath.mpf(2) / 3 * mpmath.acos(s * a / M)))
        assert abs(m.landmarks["photon_orbits"][d] - float(photon)) < 1e-8
        bound = 2 * M + s * a + 2 * mpmath.sqrt(M) * mpmath.sqrt(M + s * a)
        assert abs(m.landmarks["marginally_bound"][d] - float(bound)) < 1e-8


def test_kerr_scales_with_the_mass():
    # Every landmark is M times a function of a/M (dimensional analysis; BPT 1972 quote them in units of M).
    m = model("kerr", ("M=2", "a=1.8"))
    assert abs(m.landmarks["isco"]["prograde"] - float(bpt_isco(1.8, 2, -1))) < 1e-8
    assert abs(m.landmarks["isco"]["retrograde"] - float(bpt_isco(1.8, 2, 1))) < 1e-8


@pytest.mark.parametrize("x", [4.0, 10.0, 30.0])
def test_kerr_circular_orbits_zamos_and_horizon_rotation(x):
    # BPT 1972 eqs. (2.12)-(2.16) (recalled from memory), upper sign prograde, with
    # X = sqrt(r^1.5 - 3M sqrt r +- 2a sqrt M):
    #   Omega = +-sqrt(M)/(r^1.5 +- a sqrt(M)),  u^t = (r^1.5 +- a sqrt M)/(r^0.75 X),
    #   E = (r^1.5 - 2M sqrt r +- a sqrt M)/(r^0.75 X),  L = +-sqrt(M)(r^2 -+ 2a sqrt(M r) + a^2)/(r^0.75 X).
    # ZAMO angular velocity omega = 2 M a r / A, A = (r^2 + a^2)^2 - a^2 Delta on the equator (BPT 1972, section
    # on locally non-rotating frames); horizon angular velocity a/(r_+^2 + a^2) (Carroll 2004 section 6.6;
    # recalled from memory).
    M, a = 1.0, 0.9
    r = x * M
    m = model("kerr", ("M=1", "a=0.9"))
    for d, s in (("prograde", 1), ("retrograde", -1)):
        c = m.circular(r, d)
        root = (r**1.5 - 3 * M * r**0.5 + s * 2 * a * M**0.5) ** 0.5
        assert c["Omega"] == pytest.approx(s * M**0.5 / (r**1.5 + s * a * M**0.5), rel=1e-12)
        assert c["u"]["t"] == pytest.approx((r**1.5 + s * a * M**0.5) / (r**0.75 * root), rel=1e-12)
        assert c["energy"] == pytest.approx((r**1.5 - 2 * M * r**0.5 + s * a * M**0.5) / (r**0.75 * root), rel=1e-12)
        assert c["angular_momentum"] == pytest.approx(
            s * M**0.5 * (r**2 - s * 2 * a * (M * r) ** 0.5 + a**2) / (r**0.75 * root), rel=1e-12)
        assert c["norm_residual"] < 1e-13 and c["geodesic_residual"] < 1e-13
    assert m.circular(r, "prograde")["angular_momentum"] > 0 > m.circular(r, "retrograde")["angular_momentum"]
    delta = r**2 - 2 * M * r + a**2
    z = m.zamo(r)
    assert z["angular_velocity"] == pytest.approx(2 * M * a * r / ((r**2 + a**2) ** 2 - a**2 * delta), rel=1e-13)
    assert z["u"]["t"] == pytest.approx((((r**2 + a**2) ** 2 - a**2 * delta) / (delta * r**2)) ** 0.5, rel=1e-13)
    r_plus = M + (M**2 - a**2) ** 0.5
    assert m.horizon_angular_velocity(r_plus) == pytest.approx(a / (r_plus**2 + a**2), rel=1e-12)
    static = m.static_observer(r)
    assert static["exists"] is (r > 2 * M)


def test_circular_orbit_derivatives_against_mpmath():
    # dE/dr and dL/dr come from the chain rule; check them against mpmath's numerical differentiation
    # (general-purpose reference library), and the first-law relation dE = Omega dL along the family of
    # circular orbits (J. M. Bardeen, in Black Holes, Les Houches 1972, eq. for circular orbits; common
    # result, recalled from memory).
    m = model("kerr", ("M=1", "a=0.7"))
    with mpmath.workdps(40):
        for d in orbits.DIRECTIONS:
            for r in (mpmath.mpf(5), mpmath.mpf("12.5")):
                o = m.orbit_mp(r, d)
                dE = mpmath.diff(lambda x, d=d: m.orbit_mp(x, d)["energy"], r)
                dL = mpmath.diff(lambda x, d=d: m.orbit_mp(x, d)["L"], r)
                assert abs(o["dE"] - dE) < mpmath.mpf(10) ** -25
                assert abs(o["dL"] - dL) < mpmath.mpf(10) ** -25
                assert abs(o["dE"] - o["Omega"] * o["dL"]) < mpmath.mpf(10) ** -30


def test_extremal_kerr_has_one_degenerate_horizon():
    # a = M: Delta = (r - M)^2, one horizon at r = M (Carroll 2004 section 6.6). In Boyer-Lindquist
    # coordinates the prograde ISCO, photon orbit and marginally bound orbit all tend to r = M
    # (BPT 1972, discussion after eq. 2.21): at a = M all three are r = M, distinct orbits at different proper
    # distances (the degenerate limit), reported as r = M with a note; the retrograde ISCO is 9M, the retrograde
    # photon orbit 4M and the retrograde marginally bound orbit 2M + a + 2 sqrt(M (M + a)) = 3 + 2 sqrt(2)
    # (BPT 1972 eqs. 2.18, 2.19, 2.21 at a = M; equation numbers recalled from memory).
    m = model("kerr", ("M=1", "a=1"))
    assert [(q.radius, q.multiplicity) for q in m.horizons.roots] == [(pytest.approx(1.0), 2)]
    for key in ("isco", "photon_orbits", "marginally_bound"):
        assert m.landmarks[key]["prograde"] == pytest.approx(1.0, abs=1e-12), key
    assert any("degenerate limit" in n and "prograde" in n for n in m.notes)
    assert m.landmarks["marginally_bound"]["retrograde"] == pytest.approx(3 + 2 * 2**0.5, abs=1e-8)
    assert m.landmarks["isco"]["retrograde"] == pytest.approx(9.0, abs=1e-8)
    assert m.landmarks["photon_orbits"]["retrograde"] == pytest.approx(4.0, abs=1e-8)


def test_kerr_newman_without_charge_is_kerr():
    # Kerr-Newman with Q = 0 is Kerr (Newman et al. 1965): the same BPT 1972 eq. (2.21) ISCO, from a metric
    # written differently in its catalogue file.
    m = model("kerr-newman", ("M=1", "Q=0", "a=0.7"))
    assert abs(m.landmarks["isco"]["prograde"] - float(bpt_isco(0.7, 1, -1))) < 1e-8
    assert abs(m.landmarks["isco"]["retrograde"] - float(bpt_isco(0.7, 1, 1))) < 1e-8


# --------------------------------------------------------------------------- Reissner-Nordstrom


@cache
def _rn_conditions():
    """ISCO and photon-sphere conditions of Reissner-Nordstrom, derived here with sympy (not by the tool).

    Effective potential of timelike geodesics V = f (1 + L^2/r^2), f = 1 - 2M/r + Q^2/r^2 (Carroll 2004,
    section 5.4, with Schwarzschild's f replaced by this one; standard). Circular: V' = 0 gives L^2; marginally
    stable: V'' = 0 too. Eliminating L^2 leaves M r^3 - 6 M^2 r^2 + 9 M Q^2 r - 4 Q^4 = 0 (checked below), which
    is r = 6M at Q = 0. Photon sphere: d(f/r^2)/dr = 0.
    """
    import sympy as sp

    r, L2, m, q = sp.symbols("r L2 m q", positive=True)
    f = 1 - 2 * m / r + q**2 / r**2
    V = f * (1 + L2 / r**2)
    l2 = sp.solve(sp.diff(V, r), L2)[0]
    cond = sp.numer(sp.together(sp.diff(V, r, 2).subs(L2, l2)))
    cubic = m * r**3 - 6 * m**2 * r**2 + 9 * m * q**2 * r - 4 * q**4
    assert sp.cancel(cond / cubic).is_number  # the condition is the cubic times a constant
    return r, m, q, cubic, sp.numer(sp.together(sp.diff(f / r**2, r)))


def _rn_reference(M, Q):
    import sympy as sp

    r, m, q, cubic, photon_condition = _rn_conditions()

    def largest_real_root(expr):
        roots = sp.Poly(expr.subs({m: sp.nsimplify(M), q: sp.nsimplify(Q)}), r).nroots(n=30)
        return max(float(sp.re(x)) for x in roots if abs(sp.im(x)) < 1e-20)

    return largest_real_root(cubic), largest_real_root(photon_condition)


@pytest.mark.parametrize("charge", ["0.5", "0.8", "1"])
def test_reissner_nordstrom(charge):
    # Horizons M +- sqrt(M^2 - Q^2) (Carroll 2004 section 6.5); ISCO and photon sphere derived above. At Q = M
    # (extremal) the ISCO is 4M and the photon sphere 2M (value recalled from memory; the cubic gives
    # (r - M)^2 (r - 4M) = 0 there).
    M, Q = 1.0, float(charge)
    m = model("reissner-nordstrom", ("M=1", f"Q={charge}"))
    radii = [q.radius for q in m.horizons.roots]
    expected = sorted({M - (M**2 - Q**2) ** 0.5, M + (M**2 - Q**2) ** 0.5})
    assert radii == pytest.approx(expected, rel=1e-13)
    isco, photon = _rn_reference(M, Q)
    for d in orbits.DIRECTIONS:
        assert abs(m.landmarks["isco"][d] - isco) < 1e-8
        assert abs(m.landmarks["photon_orbits"][d] - photon) < 1e-8
    if charge == "1":
        assert isco == pytest.approx(4.0) and photon == pytest.approx(2.0)
        assert m.horizons.roots[0].multiplicity == 2


def test_default_parameters_are_used_and_reported(cli):
    result = cli("orbits", RN, "--set", "M=1", "--json")
    assert result.exit_code == 0, result.output
    rep = json.loads(result.stdout)
    assert rep["defaults_used"] == ["Q"] and rep["parameters"] == {"M": 1.0, "Q": 0.5}
    assert "Q not given: using its default Q = 1/2" in rep["notes"]
    human = cli("orbits", RN, "--set", "M=1")
    assert "note: Q not given: using its default Q = 1/2" in human.stdout


# --------------------------------------------------------------------------- clocks and SI units


# Earth (WGS 84): GM = 3.986004418e14 m^3/s^2, equatorial radius 6 378 137 m, rotation 7.2921151467e-5 rad/s
# (National Imagery and Mapping Agency, Department of Defense World Geodetic System 1984, TR8350.2, 3rd edition,
# 2000, table 3.1; values recalled from memory). J2 = 1.0826300e-3, as used by N. Ashby, Relativity in the
# Global Positioning System, Living Reviews in Relativity 6 (2003) 1, in the geoid potential Phi_0
# (value recalled from memory). Orbit radius 26 561.75 km: Ashby (2003), section 5.
EARTH = ["--set", "M=3.986004418e14", "--surface-radius", "6378137", "--surface-rotation", "7.2921151467e-5",
         "--surface-j2", "1.08263e-3"]


def test_navigation_satellite_clock_offsets(cli):
    # Ashby (2003), section 5: relative to a clock on the rotating geoid, an orbiting clock at 26 561.75 km
    # gains about +45.7 us/day from the gravitational shift, loses about -7.2 us/day from its motion, net
    # about +38.6 us/day. Compared to the precision quoted (0.1 us/day).
    result = cli("orbits", SCHW, "--units", "si", "--radius", "26561750", *EARTH, "--json")
    assert result.exit_code == 0, result.output
    rep = json.loads(result.stdout)
    assert rep["units"]["system"] == "si" and rep["parameters"]["M"] == pytest.approx(3.986004418e14 / 299792458**2)
    clock = next(c for c in rep["clock_comparison"] if c["direction"] == "prograde")
    per_day = clock["us_per_day"]
    assert round(per_day["net"], 1) == 38.6
    assert round(per_day["gravitational"], 1) == 45.7
    assert round(per_day["orbital_velocity"], 1) == -7.2
    assert 0.05 < per_day["surface_rotation"] < 0.15  # the ground clock's own motion, (Omega_E R)^2/(2c^2)
    orbit = next(c for c in rep["circular"] if c["direction"] == "prograde")
    # Kepler: Omega = sqrt(GM/r^3) in rad/s (Carroll 2004 section 5.4: exact in Schwarzschild time)
    assert orbit["Omega"] == pytest.approx((3.986004418e14 / 26561750.0**3) ** 0.5, rel=1e-12)
    assert orbit["clock_offset_us_per_day"] == pytest.approx(-1.5 * 3.986004418e14 / 299792458**2 / 26561750
                                                             * 86400e6, rel=1e-6)


def test_clock_comparison_against_the_exact_schwarzschild_expressions():
    # Exact Schwarzschild: orbiting clock d tau/dt = sqrt(1 - 3GM/(c^2 r)); a clock at rest on a surface
    # rotating at Omega_E: sqrt(1 - 2GM/(c^2 R) - (Omega_E R/c)^2) (Carroll 2004 eq. 5.x for the redshift of
    # moving emitters; written here from the line element), independently of the tool.
    gm, r, R, w = 3.986004418e14, 26561750.0, 6378137.0, 7.2921151467e-5
    mass = units.gm_to_length(gm)
    doc, spec, eq = _chart("schwarzschild")
    m = eq.bind(orbits.resolve_parameters(doc, spec, [f"M={gm}"], units="si"))
    c = orbits.compare_clocks(m, r, R, units.angular_velocity_from_si(w))
    expected = mpmath.sqrt(1 - 3 * mpmath.mpf(mass) / r) / mpmath.sqrt(
        1 - 2 * mpmath.mpf(mass) / R - (mpmath.mpf(w) * R / units.C) ** 2) - 1
    assert c.net == pytest.approx(float(expected), rel=1e-9)
    parts = (1 + c.gravitational) * (1 + c.orbital_velocity) * (1 + c.surface_rotation_part)
    assert 1 + c.net == pytest.approx(parts, rel=1e-15)


def test_units_conversions():
    # c = 299 792 458 m/s exactly (BIPM, SI Brochure, 9th ed. 2019); G = 6.67430e-11 (CODATA 2018).
    assert units.C == 299_792_458.0
    assert units.gm_to_length(3.986004418e14) == pytest.approx(3.986004418e14 / 299_792_458.0**2, rel=1e-15)
    assert units.length_to_gm(units.gm_to_length(1.32712440018e20)) == pytest.approx(1.32712440018e20, rel=1e-15)
    assert units.kilograms_to_length(1.0) == pytest.approx(6.67430e-11 / 299_792_458.0**2)
    assert units.angular_velocity_to_si(units.angular_velocity_from_si(7.29e-5)) == pytest.approx(7.29e-5)
    assert units.seconds_to_length(1.0) == 299_792_458.0 and units.length_to_seconds(299_792_458.0) == 1.0
    assert units.per_day_microseconds(1e-10) == pytest.approx(8.64)


def test_si_mode_needs_every_parameter(cli):
    result = cli("orbits", KERR, "--units", "si", "--set", "M=1.3e20")
    assert result.exit_code == 2
    assert "--set: a: no value given; with --units si" in one_error_line(result)


# --------------------------------------------------------------------------- CLI, JSON, plot


def test_cli_json_shape_for_kerr(cli):
    result = cli("orbits", KERR, "--set", "M=1", "--set", "a=0.9", "--radius", "10", "--radius", "6*M", "--json")
    assert result.exit_code == 0, result.output
    rep = json.loads(result.stdout)
    assert {"metric", "chart", "coordinates", "units", "parameters", "horizons", "ergosurface", "static_limit",
            "photon_orbits", "marginally_bound", "isco", "circular", "static_observers", "zamo", "notes"} <= set(rep)
    assert rep["metric"] == "kerr" and rep["chart"] == "boyer-lindquist"
    assert rep["coordinates"] == {"time": "t", "radial": "r", "azimuthal": "phi", "polar": "theta"}
    assert rep["horizons"]["count"] == 2 and len(rep["horizons"]["radii"]) == 2
    for key in ("photon_orbits", "marginally_bound", "isco"):
        assert set(rep[key]) == {"prograde", "retrograde"}
    assert abs(rep["isco"]["prograde"] - float(bpt_isco(0.9, 1, -1))) < 1e-8
    assert [(c["radius"], c["direction"]) for c in rep["circular"]] == [
        (10.0, "prograde"), (10.0, "retrograde"), (6.0, "prograde"), (6.0, "retrograde")]
    first = rep["circular"][0]
    assert {"Omega", "u", "energy", "angular_momentum", "stable", "bound", "clock_rate", "norm_residual"} <= set(first)
    assert first["norm_residual"] < 1e-13
    assert [z["radius"] for z in rep["zamo"]] == [10.0, 6.0]
    # a static chart has no ZAMO section
    static = json.loads(cli("orbits", SCHW, "--json").stdout)
    assert static["zamo"] is None and static["defaults_used"] == ["M"]


def test_cli_text_output(cli):
    result = cli("orbits", KERR, "--set", "M=1", "--set", "a=0.9", "--radius", "10")
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert "horizons: 2 found" in out and "ISCO" in out and "zero-angular-momentum observers" in out
    assert "2.32088304" in out  # the prograde ISCO (BPT 1972 eq. 2.21 gives 2.320883042 at a = 0.9)


def test_cli_accepts_a_catalogue_id(empty_catalogue):
    cli = empty_catalogue
    assert cli("add", SCHW).exit_code == 0
    result = cli("orbits", "schwarzschild", "--set", "M=2", "--json")
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["isco"]["prograde"] == pytest.approx(12.0)


def test_plot_writes_a_png(cli, tmp_path):
    pytest.importorskip("matplotlib")
    path = tmp_path / "kerr.png"
    result = cli("orbits", KERR, "--set", "M=1", "--set", "a=0.9", "--radius", "10", "--plot", str(path))
    assert result.exit_code == 0, result.output
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and path.stat().st_size > 10_000


def test_plot_without_matplotlib_is_a_one_line_error(cli, tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    monkeypatch.setitem(sys.modules, "matplotlib.figure", None)
    result = cli("orbits", SCHW, "--plot", str(tmp_path / "x.png"))
    assert result.exit_code == 2
    assert "matplotlib is not installed" in one_error_line(result)
    assert not (tmp_path / "x.png").exists()


# --------------------------------------------------------------------------- bad input


@pytest.mark.parametrize("args, expected", [
    (["--set", "a=1.2"], "--set: a: a = 1.2 is outside its range 0 <= a <= M (with M = 1)"),
    (["--set", "M=-1"], "--set: M: M = -1 is outside its range M > 0"),
    (["--set", "b=1"], "--set: b: not a parameter of kerr (parameters: M, a)"),
    (["--set", "M"], "--set: 'M' is not NAME=VALUE"),
    (["--set", "M=__import__('os')"], "--set: M: unknown function '__import__'"),
    (["--set", "a=sqrt(-1)"], "--set: a: 'sqrt(-1)' is not a real number"),
    (["--chart", "kerr-schild"], "charts.kerr-schild: the metric depends on x, y, z: not axisymmetric"),
    (["--chart", "nope"], "no chart 'nope' (charts: boyer-lindquist, kerr-schild"),
    (["--radius", "-3"], "--radius: -3: a radius must be positive"),
    (["--surface-rotation", "1"], "--surface-rotation: needs --surface-radius"),
])
def test_bad_input_is_one_line_and_exit_2(cli, args, expected):
    result = cli("orbits", KERR, *args)
    assert result.exit_code == 2, result.output
    assert expected in one_error_line(result)


def test_non_stationary_and_flat_charts_are_refused(cli):
    result = cli("orbits", SCHW, "--chart", "kruskal-szekeres")
    assert result.exit_code == 2
    assert "depends on the first coordinate T: the chart is not stationary" in one_error_line(result)
    flat = cli("orbits", str(BUNDLED["minkowski"]), "--chart", "cartesian")
    assert flat.exit_code == 2 and "no radial structure" in one_error_line(flat)


TOY = """
id = "toy-{name}"
title = "Toy metric for tests"
field-equations = "none"
[parameters.M]
assume = ["positive"]
range = "M > 0"
default = "1"
[charts.main]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 0", "0 < theta < pi"]
line-element = "{line}"
"""


def _toy(tmp_path, name, line):
    path = tmp_path / f"{name}.toml"
    path.write_text(TOY.format(name=name, line=line))
    return str(path)


def test_a_metric_not_symmetric_about_the_equator_is_refused(cli, tmp_path):
    path = _toy(tmp_path, "tilted", "-(1 - 2*M/r + M**2*cos(theta)/r**2)*dt**2 + dr**2 + "
                                    "r**2*(dtheta**2 + sin(theta)**2*dphi**2)")
    result = cli("orbits", path)
    assert result.exit_code == 2
    assert "not reflection-symmetric about theta = pi/2" in one_error_line(result)


def test_horizons_of_a_non_rational_metric_are_found_by_scanning(tmp_path):
    # g_tt = -(1 - sqrt(M/r))**2 vanishes at r = M with even multiplicity (no sign change), and
    # g_tt = -(1 - sqrt(2M/r)) at r = 2M with a sign change: neither is a rational function of r, so the
    # grid search (sign changes, and zeros of the derivative where the function vanishes) must find them.
    for name, line, radius, multiplicity in (
            ("double", "-(1 - sqrt(M/r))**2*dt**2 + dr**2 + r**2*(dtheta**2 + sin(theta)**2*dphi**2)", 1.0, 2),
            ("simple", "-(1 - sqrt(2*M/r))*dt**2 + dr**2 + r**2*(dtheta**2 + sin(theta)**2*dphi**2)", 2.0, 1)):
        doc = load_file(_toy(tmp_path, name, line))
        spec = build_chart(doc)
        m = orbits.EquatorialChart(spec).bind(orbits.resolve_parameters(doc, spec, ["M=1"]))
        assert "grid" in m.horizons.method
        assert [(q.radius, q.multiplicity) for q in m.horizons.roots] == [(pytest.approx(radius, rel=1e-12),
                                                                           multiplicity)]


def test_library_refuses_missing_parameters():
    _, _, eq = _chart("kerr")
    with pytest.raises(InputError, match="no value given"):
        eq.bind({"M": 1})


# --------------------------------------------------------------------------- a cosmological constant

SDS = str(BUNDLED["schwarzschild-de-sitter"])
KOTTLER = str(Path(__file__).parent / "data" / "orbits-kottler-any-lambda.toml")
TANGHERLINI = str(Path(__file__).parent / "data" / "orbits-tangherlini-5d.toml")


def _kottler(settings: tuple[str, ...]) -> orbits.Equatorial:
    doc = load_file(KOTTLER)
    spec = build_chart(doc, None)
    return orbits.EquatorialChart(spec, doc.chart_names).bind(orbits.resolve_parameters(doc, spec, settings))


def _marginally_stable_lambda(r, M=1):
    # Z. Stuchlik and S. Hledik, Some properties of the Schwarzschild-de Sitter and Schwarzschild-anti-de Sitter
    # spacetimes, Phys. Rev. D 60 (1999) 044006: the marginally stable circular orbits (inner ISCO and outer
    # OSCO) satisfy Lambda = 3 M (r - 6M) / (r^3 (4 r - 15 M)) (form recalled from memory; it is also dL/dr = 0
    # for L^2 = r^2 (M/r - Lambda r^2/3)/(1 - 3M/r), checked in test_orbits_consistency.py)
    return 3 * M * (r - 6 * M) / (r**3 * (4 * r - 15 * M))


def test_schwarzschild_de_sitter_static_region_stuchlik_hledik():
    # Stuchlik & Hledik, Phys. Rev. D 60 (1999) 044006, for Lambda = 1e-4, M = 1: photon orbit 3M (independent
    # of Lambda), ISCO 6.0691260197 (the value quoted in the issue from that paper); horizons are the positive
    # roots of 1 - 2M/r - Lambda r^2/3, in closed form (trigonometric solution of the cubic, as in the entry's
    # notes): r_c = (2/sqrt(L)) cos(acos(-3M sqrt(L))/3), r_b = (2/sqrt(L)) cos(acos(-3M sqrt(L))/3 - 2pi/3);
    # static radius (3M/Lambda)^(1/3) (same paper).
    lam = mpmath.mpf("1e-4")
    m = model("schwarzschild-de-sitter", ("M=1", "Lambda=1/10000"))
    ac = mpmath.acos(-3 * mpmath.sqrt(lam)) / 3
    rc, rb = 2 / mpmath.sqrt(lam) * mpmath.cos(ac), 2 / mpmath.sqrt(lam) * mpmath.cos(ac - 2 * mpmath.pi / 3)
    assert [q.radius for q in m.horizons.roots] == pytest.approx([float(rb), float(rc)], rel=1e-13)
    assert m.region == pytest.approx((float(rb), float(rc)), rel=1e-13)
    assert m.cosmological_horizon == pytest.approx(float(rc), rel=1e-13)
    assert m.static_range == pytest.approx((float(rb), float(rc)), rel=1e-13)
    assert m.static_radius == pytest.approx(float(mpmath.cbrt(3 / lam)), rel=1e-12)
    for d in orbits.DIRECTIONS:
        assert m.landmarks["photon_orbits"][d] == pytest.approx(3.0, abs=1e-10)
        assert m.landmarks["isco"][d] == pytest.approx(6.0691260197, abs=1e-9)
        osco = m.landmarks["osco"][d]
        assert osco is not None and 6.07 < osco < m.static_radius
        assert float(_marginally_stable_lambda(mpmath.mpf(osco))) == pytest.approx(1e-4, rel=1e-9)
        assert float(_marginally_stable_lambda(mpmath.mpf(m.landmarks["isco"][d]))) == pytest.approx(1e-4, rel=1e-9)


@pytest.mark.parametrize("x", [4.0, 10.0, 25.0])
def test_schwarzschild_de_sitter_circular_orbits_and_clocks(x):
    # Stuchlik & Hledik 1999 (recalled from memory): Omega^2 = M/r^3 - Lambda/3,
    # E = (1 - 2M/r - Lambda r^2/3)/sqrt(1 - 3M/r), L^2 = r^2 (M/r - Lambda r^2/3)/(1 - 3M/r).
    # Clocks: there is no static clock at infinity; rates are against the static observer at the static radius,
    # so a static clock at r runs at sqrt(f(r)/f(r_s)) of it.
    lam = mpmath.mpf("1e-4")
    m = model("schwarzschild-de-sitter", ("M=1", "Lambda=1/10000"))
    r = mpmath.mpf(x)
    f = 1 - 2 / r - lam * r**2 / 3
    omega = mpmath.sqrt(1 / r**3 - lam / 3)
    energy = f / mpmath.sqrt(1 - 3 / r)
    ang = mpmath.sqrt(r**2 * (1 / r - lam * r**2 / 3) / (1 - 3 / r))
    for d, sign in (("prograde", 1), ("retrograde", -1)):
        c = m.circular(x, d)
        assert c["exists"], c
        assert c["Omega"] == pytest.approx(sign * float(omega), rel=1e-13)
        assert c["energy"] == pytest.approx(float(energy), rel=1e-13)
        assert c["angular_momentum"] == pytest.approx(sign * float(ang), rel=1e-13)
        assert c["stable"] is (6.0691260197 < x < m.landmarks["osco"][d])
        # bound: E below the outward barrier at the same L. At r = 4 (inside the marginally bound radius) and at
        # r = 25 (an unstable orbit beyond the OSCO: outward the potential only falls towards the cosmological
        # horizon) a nudge outward escapes; r = 10 is stable and bound although E < 1 is not the criterion.
        assert c["bound"] is (m.landmarks["marginally_bound"][d] < x < m.landmarks["osco"][d])
    rs = m.static_radius
    fs = 1 - 2 / mpmath.mpf(rs) - lam * mpmath.mpf(rs) ** 2 / 3
    assert m.static_observer(x)["clock_rate"] == pytest.approx(float(mpmath.sqrt(f / fs)), rel=1e-12)
    assert m.static_observer(rs)["clock_rate"] == pytest.approx(1.0, rel=1e-14)
    assert "static radius" in m.clock_reference[1] and "no static clock at infinity" in m.clock_reference[1]


def test_schwarzschild_de_sitter_outside_the_static_region():
    m = model("schwarzschild-de-sitter", ("M=1", "Lambda=1/10000"))
    beyond = m.circular(200.0, "prograde")
    assert not beyond["exists"] and "beyond the cosmological horizon" in beyond["reason"]
    assert not m.static_observer(200.0)["exists"]
    inside = m.circular(1.5, "prograde")
    assert not inside["exists"] and "inside the outer horizon" in inside["reason"]
    # beyond the static radius Omega^2 = M/r^3 - Lambda/3 < 0: no circular orbit (Stuchlik & Hledik 1999)
    assert not m.circular(40.0, "prograde")["exists"]
    assert m.static_observer(40.0)["exists"]


def test_marginally_bound_orbit_with_a_cosmological_constant():
    # Definition (ours, in the spirit of Stuchlik & Hledik 1999): a circular orbit is bound when its energy lies
    # below the outer maximum of the effective potential at its angular momentum; that maximum is the outer
    # unstable circular orbit with the same L, between the OSCO and the static radius. So at the marginally
    # bound radius r_mb, E(r_mb) = E(r_out) with L(r_out) = L(r_mb), found here independently from the closed
    # forms for E and L (previous test) with mpmath.
    lam = mpmath.mpf("1e-4")
    m = model("schwarzschild-de-sitter", ("M=1", "Lambda=1/10000"))

    def E(r):
        return (1 - 2 / r - lam * r**2 / 3) / mpmath.sqrt(1 - 3 / r)

    def L(r):
        return mpmath.sqrt(r**2 * (1 / r - lam * r**2 / 3) / (1 - 3 / r))

    rmb = mpmath.mpf(m.landmarks["marginally_bound"]["prograde"])
    osco, rs = m.landmarks["osco"]["prograde"], m.static_radius
    rout = mpmath.findroot(lambda r: L(r) - L(rmb), (mpmath.mpf(osco) * 1.0001, mpmath.mpf(rs) * 0.9999),
                           solver="anderson")
    assert float(E(rmb)) == pytest.approx(float(E(rout)), rel=1e-9)
    assert float(E(rmb)) < 1  # the barrier lies below 1: E < 1 would have been the wrong test
    assert m.landmarks["marginally_bound"]["retrograde"] == pytest.approx(float(rmb), rel=1e-12)


@pytest.mark.parametrize("entry, settings", [
    ("kerr-de-sitter", ("M=1", "a=0", "Lambda=1/10000")),
    ("reissner-nordstrom-de-sitter", ("M=1", "Q=0", "Lambda=1/10000")),
])
def test_other_de_sitter_entries_reduce_to_schwarzschild_de_sitter(entry, settings):
    # a = 0 (Kerr-de Sitter) and Q = 0 (Reissner-Nordstrom-de Sitter) are Schwarzschild-de Sitter: the same
    # Stuchlik & Hledik 1999 landmarks.
    try:
        m = model(entry, settings)
    except InputError as exc:  # the entry's range excludes the limit itself: take it close by
        pytest.skip(str(exc))
    for d in orbits.DIRECTIONS:
        assert m.landmarks["photon_orbits"][d] == pytest.approx(3.0, abs=1e-9)
        assert m.landmarks["isco"][d] == pytest.approx(6.0691260197, abs=1e-8)
    assert m.static_radius == pytest.approx(float(mpmath.cbrt(30000)), rel=1e-12)
    assert m.circular(10.0, "prograde")["Omega"] == pytest.approx(math.sqrt(1e-3 - 1e-4 / 3), rel=1e-12)


def test_kerr_de_sitter_static_radius_and_prograde_isco():
    # Z. Stuchlik and P. Slany, Equatorial circular orbits in the Kerr-de Sitter spacetimes, Phys. Rev. D 69 (2004)
    # 064001: the static radius on the equator is (3M/Lambda)^(1/3), independent of a (recalled from memory; it
    # follows from d g_tt/dr = 0 with g_tt = -(1 - 2M/r - Lambda (r^2 + a^2)/3)/Xi^2 on the equator); prograde
    # orbits are tighter than retrograde ones.
    m = model("kerr-de-sitter", ("M=1", "a=1/2", "Lambda=1/10000"))
    assert m.cosmological_horizon is not None and len(m.horizons.roots) == 3
    assert m.static_radius == pytest.approx(float(mpmath.cbrt(30000)), rel=1e-12)
    marks = m.landmarks
    assert marks["isco"]["prograde"] < 6.0691260197 < marks["isco"]["retrograde"]
    assert marks["photon_orbits"]["prograde"] < 3 < marks["photon_orbits"]["retrograde"]
    assert marks["osco"]["prograde"] is not None and marks["osco"]["retrograde"] is not None
    assert m.circular(10.0, "prograde")["exists"] and m.circular(10.0, "prograde")["bound"] is True


def test_reissner_nordstrom_de_sitter_photon_orbit():
    # The photon orbit of f = 1 - 2M/r + Q^2/r^2 - Lambda r^2/3 solves d(f/r^2)/dr = 0, where the Lambda term drops
    # out: r = (3M + sqrt(9M^2 - 8Q^2))/2 as for Reissner-Nordstrom (Chandrasekhar, The Mathematical Theory of
    # Black Holes, 1983, section 40; recalled from memory). The region is bounded by r_+ and the cosmological
    # horizon, and the inner horizon r_- is not taken as the edge.
    m = model("reissner-nordstrom-de-sitter", ("M=1", "Q=1/2", "Lambda=1/10000"))
    roots = [q.radius for q in m.horizons.roots]
    assert len(roots) == 3 and m.region == pytest.approx((roots[1], roots[2]), rel=1e-14)
    for d in orbits.DIRECTIONS:
        assert m.landmarks["photon_orbits"][d] == pytest.approx((3 + math.sqrt(9 - 2)) / 2, abs=1e-10)


def test_lambda_zero_and_negative():
    # Lambda = 0: Schwarzschild, photon orbit 3M, marginally bound 4M, ISCO 6M (Carroll 2004 sections 5.4-5.6;
    # BPT 1972 eq. 2.19 at a = 0); asymptotically flat, clocks against a static clock far away.
    flat = _kottler(("M=1", "Lambda=0"))
    assert flat.asymptotically_flat and flat.cosmological_horizon is None
    assert flat.landmarks["photon_orbits"]["prograde"] == pytest.approx(3.0, abs=1e-10)
    assert flat.landmarks["marginally_bound"]["prograde"] == pytest.approx(4.0, abs=1e-10)
    assert flat.landmarks["isco"]["prograde"] == pytest.approx(6.0, abs=1e-10)
    assert flat.clock_reference == (1.0, "a static clock far away")
    # Lambda < 0 (Schwarzschild-anti-de Sitter): one horizon, no cosmological horizon, photon orbit 3M, the ISCO
    # on the same marginal-stability curve (Stuchlik & Hledik 1999, see _marginally_stable_lambda), and every
    # circular orbit bound (the potential grows without limit outward), so no marginally bound orbit.
    ads = _kottler(("M=1", "Lambda=-1/10000"))
    assert len(ads.horizons.roots) == 1 and ads.cosmological_horizon is None and not ads.asymptotically_flat
    assert ads.static_range[1] is None and ads.static_radius is None
    isco = ads.landmarks["isco"]["prograde"]
    assert ads.landmarks["photon_orbits"]["prograde"] == pytest.approx(3.0, abs=1e-10)
    assert 5.9 < isco < 6 and float(_marginally_stable_lambda(mpmath.mpf(isco))) == pytest.approx(-1e-4, rel=1e-9)
    assert ads.landmarks["marginally_bound"]["prograde"] is None
    assert any("every circular orbit is bound" in n for n in ads.notes)
    assert ads.circular(4.0, "prograde")["bound"] is True  # unstable, E > 1, and still bound
    assert ads.circular(4.0, "prograde")["energy"] > 1
    assert "coordinate time" in ads.clock_reference[1]


def test_cli_schwarzschild_de_sitter_text_and_json(cli):
    result = cli("orbits", SDS, "--set", "M=1", "--set", "Lambda=1/10000", "--radius", "10", "--json")
    assert result.exit_code == 0, result.stderr
    rep = json.loads(result.stdout)
    assert rep["isco"]["prograde"] == pytest.approx(6.0691260197, abs=1e-9)
    assert rep["static_radius"] == pytest.approx(30000 ** (1 / 3), rel=1e-12)
    assert rep["cosmological_horizon"] == pytest.approx(172.196284589, rel=1e-11)
    assert rep["osco"]["prograde"] is not None
    assert all(c["exists"] for c in rep["circular"])
    assert rep["circular"][0]["Omega"] == pytest.approx(math.sqrt(1e-3 - 1e-4 / 3), rel=1e-12)
    text = cli("orbits", SDS, "--set", "M=1", "--set", "Lambda=1/10000", "--radius", "10")
    assert text.exit_code == 0
    assert "static observers exist for 2.00026677339 < r < 172.196284589" in text.stdout
    assert "outermost stable orbit" in text.stdout and "static radius" in text.stdout
    assert "inside the outer horizon" not in text.stdout


# --------------------------------------------------------------------------- several Killing angles


def test_five_dimensional_chart_with_two_azimuths(cli):
    # Tangherlini (1963), f = 1 - mu/r^2 in five dimensions: horizon sqrt(mu); circular orbits have
    # Omega^2 = f'/(2r) = mu/r^4, the photon orbit is at r^2 = 2 mu (d(f/r^2)/dr = 0), and there is no stable
    # circular orbit (derived here from the metric; the absence of stable orbits for D > 4 is recalled from
    # memory).
    result = cli("orbits", TANGHERLINI, "--set", "mu=2", "--radius", "3", "--json")
    assert result.exit_code == 0, result.stderr
    rep = json.loads(result.stdout)
    assert rep["coordinates"]["azimuthal"] == "phi"
    assert rep["horizons"]["radii"] == pytest.approx([math.sqrt(2)], rel=1e-14)
    assert rep["photon_orbits"]["prograde"] == pytest.approx(2.0, abs=1e-10)
    assert rep["isco"] == {"prograde": None, "retrograde": None}
    assert rep["circular"][0]["Omega"] == pytest.approx(math.sqrt(2 / 81), rel=1e-13)
    assert any("along phi only" in n and "psi" in n for n in rep["notes"])
    same = cli("orbits", TANGHERLINI, "--set", "mu=2", "--azimuth", "phi", "--json")
    assert json.loads(same.stdout)["photon_orbits"] == rep["photon_orbits"]
    axis = cli("orbits", TANGHERLINI, "--azimuth", "psi")
    assert axis.exit_code == 2 and "psi circle has zero size on the equator" in one_error_line(axis)
    wrong = cli("orbits", TANGHERLINI, "--azimuth", "r")
    assert wrong.exit_code == 2 and "--azimuth: r: not an azimuth" in one_error_line(wrong)


# --------------------------------------------------------------------------- the outward barrier of the potential


@pytest.mark.parametrize("L", [4.0, 5.0, 1000.0])
def test_barrier_is_the_maximum_of_the_schwarzschild_potential(L):
    # Timelike equatorial geodesics of Schwarzschild (M = 1) turn where E**2 = (1 - 2M/r)(1 + L**2/r**2); its
    # maximum at fixed L is the unstable circular orbit r = (L**2/2M)(1 - sqrt(1 - 12 M**2/L**2)) (S. M. Carroll,
    # Spacetime and Geometry (2004), section 5.4, circular orbits of the effective potential; form recalled from
    # memory). L = 4M is the marginally bound orbit r = 4M, E = 1 (Bardeen, Press & Teukolsky 1972); as L grows
    # the maximum moves to the photon sphere r = 3M. The barrier is that maximum (or 1, the rest energy far away,
    # when higher), whatever grid starts at the inner radius: rel 1e-13 (rounding of the float potential).
    m = model("schwarzschild", ("M=1",))
    r_max = mpmath.mpf(L) ** 2 / 2 * (1 - mpmath.sqrt(1 - 12 / mpmath.mpf(L) ** 2))
    v_max = mpmath.sqrt((1 - 2 / r_max) * (1 + mpmath.mpf(L) ** 2 / r_max**2))
    expected = max(float(v_max), 1.0)
    for radius in (2.05, 2.5, 2.9):
        assert m.barrier(radius, L) == pytest.approx(expected, rel=1e-13)
    if L > 100:
        assert float(r_max) == pytest.approx(3.0, rel=1e-5)


@pytest.mark.parametrize("L", [3.8, 4.5])
def test_barrier_with_a_cosmological_constant_is_the_exact_maximum(L):
    # Schwarzschild-de Sitter, M = 1, Lambda = 1e-4: E**2 = (1 - 2M/r - Lambda r**2/3)(1 + L**2/r**2) (Stuchlik &
    # Hledik, Phys. Rev. D 60 (1999) 044006; recalled from memory). No rest energy at infinity: the barrier is the
    # highest maximum between the radius and the cosmological horizon, found here by mpmath at 30 digits from the
    # closed form (dV/dr = 0 near the maximum of a fine sample); agreement rel 1e-13.
    import numpy as np

    lam = mpmath.mpf("1e-4")
    m = model("schwarzschild-de-sitter", ("M=1", "Lambda=1/10000"))

    def v2(r):
        return (1 - 2 / r - lam * r**2 / 3) * (1 + mpmath.mpf(L) ** 2 / r**2)

    xs = np.geomspace(3.0, m.outer_edge * 0.999, 20000)
    vs = [float(v2(mpmath.mpf(float(x)))) for x in xs]
    top = xs[int(np.argmax(vs))]
    with mpmath.workdps(30):
        r_max = mpmath.findroot(lambda r: mpmath.diff(v2, r), mpmath.mpf(float(top)))
        expected = float(mpmath.sqrt(v2(r_max)))
    assert m.barrier(3.0, L) == pytest.approx(expected, rel=1e-13)


def test_barrier_on_a_plateau_refines_all_grid_peaks_at_once():
    # The Einstein static universe has g_tt = -1: at L = 0 the potential is 1 everywhere (rounding noise makes
    # hundreds of grid 'peaks'). Every peak is refined, in one vectorised search: the number of evaluations
    # of the potential stays that of a single peak (a guard on cost without timing; no source needed).
    import numpy as np

    m = model("einstein-static", ())
    calls = []
    real = m.components_np

    def counted(r):
        calls.append(np.size(r))
        return real(r)

    m.components_np = counted
    assert m.barrier(0.3, 0.0) == pytest.approx(1.0, rel=1e-14)
    assert len(calls) <= 40, len(calls)
    assert max(calls) > 100  # many grid peaks were refined together


# --------------------------------------------------------------------------- NAME=VALUE through the one parser


def test_settings_read_as_every_other_set_option():
    # one parser (gravicat.format.assign): one text, repetitions and a mapping mean the same
    doc, spec, _ = _chart("kerr")
    one = orbits.resolve_parameters(doc, spec, ["M=1,a=0.9"])
    assert orbits.resolve_parameters(doc, spec, ["M=1", "a=0.9"]).exact == one.exact
    assert orbits.resolve_parameters(doc, spec, "M=1,a=0.9").exact == one.exact
    assert orbits.resolve_parameters(doc, spec, {"M": 1, "a": "9/10"}).exact == one.exact
    assert one.given == {"M": "1", "a": "0.9"}
    chained = orbits.resolve_parameters(doc, spec, ["M=2,a=M*9/10"])
    assert chained.exact["M"] == 2 and chained.exact["a"] == 2 * one.exact["a"]  # exact: 9/5
    with pytest.raises(InputError) as err:
        orbits.resolve_parameters(doc, spec, ["M=1", "M=2"])
    assert str(err.value) == "--set: M: given more than once"
    with pytest.raises(InputError) as err:
        orbits.resolve_parameters(doc, spec, ["M=1,a"])
    assert str(err.value).startswith("--set: 'a' is not NAME=VALUE")


def test_cli_set_takes_comma_separated_and_repeated_items(cli):
    joined = cli("orbits", KERR, "--set", "M=1,a=0.9", "--json")
    repeated = cli("orbits", KERR, "--set", "M=1", "--set", "a=0.9", "--json")
    assert joined.exit_code == 0 and repeated.exit_code == 0, joined.output + repeated.output
    assert json.loads(joined.stdout)["isco"] == json.loads(repeated.stdout)["isco"]
