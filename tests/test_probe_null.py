"""Geodesic probe: light, charged particles, inclined orbits and stopping events, against published results.

Sources (beside each check as well):
* Photon sphere r = 3M of Schwarzschild, b = 3 sqrt(3) M, unstable: C. W. Misner, K. S. Thorne and
  J. A. Wheeler, Gravitation (1973), section 25.6 and Fig. 25.7 (section number recalled from memory);
  J. B. Hartle, Gravity (2003), section 9.3.
* Light bending 4M/b: A. Einstein (1916), Ann. Phys. 49, 769; S. Weinberg, Gravitation and Cosmology
  (1972), section 8.5, eq. 8.5.8 (equation number recalled from memory); next order 15 pi M^2/(4 b^2)
  (recalled from memory).
* Kerr equatorial circular photon orbits r_ph = 2M {1 + cos[2/3 arccos(-+a/M)]} (upper sign prograde):
  J. M. Bardeen, W. H. Press and S. A. Teukolsky, ApJ 178 (1972) 347, eq. 2.18.
* Carter's constant Q = p_theta^2 + cos^2(theta) (a^2 (mu^2 - E^2) + L^2/sin^2(theta)):
  B. Carter, Phys. Rev. 174 (1968) 1559 (the form as in MTW eq. 33.31, recalled from memory).
* A charged particle in Reissner-Nordstrom (A = -Q/r dt): the canonical energy E = -(p_t) = -(P_t + q A_t)
  is conserved, so radial motion obeys (dr/dtau)^2 = (E - q Q/r)^2 - f(r), f = 1 - 2M/r + Q^2/r^2, and
  turns where (E - qQ/r)^2 = f(r) (S. Chandrasekhar, The Mathematical Theory of Black Holes, 1983,
  chapter 5; derived here from the Hamiltonian, section number not checked).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from gravicat import InputError
from gravicat.physics.probe import probe
from gravicat.plugins.python_export import PythonExporter
from gravicat.store import revisions as store

DOCS = {d.id: d for d in store.iter_bundled_documents()}
EXPORTER = PythonExporter()
SPACETIMES = Path(store.bundled_files()[0]).parent
TIGHT = {"rtol": 1e-13, "atol": 1e-14}


def run(entry, **kw):
    return probe(DOCS[entry], EXPORTER, **kw)


# --------------------------------------------------------------------------- light


def test_schwarzschild_photon_orbit_followed_several_orbits_then_departs():
    # The circular photon orbit r = 3M, b = 3 sqrt(3) M (MTW 1973 sec. 25.6) is unstable: a ray sent tangentially
    # 1e-12 M outside it circles several times, then departs (a deviation grows about e^(2 pi) per orbit, so
    # 1e-12 reaches 1e-3 after about 3.3 orbits: common practice, no source). Band r = 3M +- 1e-3 M.
    out = run("schwarzschild", params="M=1", start="r=3+1e-12,theta=pi/2", orbit="null", velocity="phi=1",
              tau=500, stop_below=["r=3-1e-3"], stop_above=["r=3+1e-3"], **TIGHT)
    assert out["kind"] == "null" and out["velocity"]["r"] == 0.0
    assert out["termination"] == "range"  # it departs ...
    assert out["turns"] > 3  # ... after several orbits within 1e-3 M of r = 3M
    assert out["drift"]["hamiltonian"] < 1e-10  # H = 0 for light; drift below 1e-10 (the issue)
    assert out["energy"] == pytest.approx(1.0, rel=1e-15)
    assert out["angular_momentum"] == pytest.approx(3 * math.sqrt(3), rel=1e-11)
    # --impact 3 sqrt(3) at r = 3M: H = 0 has its double root there, so the ray starts with dr/dl = 0
    exact = run("schwarzschild", params="M=1", start="r=3,theta=pi/2", orbit="null", impact=3 * math.sqrt(3),
                tau=20, **TIGHT)
    assert exact["velocity"]["r"] == 0.0 and exact["extent"]["r"] == [pytest.approx(3.0, abs=1e-9)] * 2


def test_weak_field_deflection_4M_over_b():
    # Einstein (1916), Weinberg (1972) eq. 8.5.8: deflection 4M/b (+ 15 pi M^2/(4 b^2), recalled), b = 1e4 M.
    # From r0 = 1e7 M to r1 = 2e7 M the straight line sweeps pi - asin(b/r0) - asin(b/r1); bending outside
    # those radii is of order 2M/r0 = 2e-7 (of the 4e-4 measured): tolerance 2e-3 relative.
    b = 1e4
    out = run("schwarzschild", params="M=1", start="r=1e7,theta=pi/2", orbit="null", impact=b, tau=1e9,
              escape_radius=2e7, rtol=1e-12, atol=1e-12)
    assert out["termination"] == "escape" and out["end"]["r"] == pytest.approx(2e7, rel=1e-12)
    straight = math.pi - math.asin(b / 1e7) - math.asin(b / 2e7)
    bending = out["end"]["phi"] - straight
    assert bending == pytest.approx(4 / b + 15 * math.pi / (4 * b * b), rel=2e-3)
    assert bending == pytest.approx(4 / b, rel=5e-3)
    assert [p["coordinate"] for p in out["turning_points"]["points"]] == ["r"]  # one periapsis
    assert out["turning_points"]["points"][0]["value"] == pytest.approx(b, rel=1e-3)  # r_min ~ b - 2M


@pytest.mark.parametrize("direction", [1, -1])
def test_kerr_equatorial_photon_orbit_radii(direction):
    # Bardeen, Press & Teukolsky (1972) eq. 2.18: r_ph = 2M {1 + cos[2/3 arccos(-direction a/M)]}.
    M, a = 1.0, 0.9
    r_ph = 2 * M * (1 + math.cos(2 / 3 * math.acos(-direction * a / M)))
    common = dict(params="M=1,a=0.9", orbit="null", velocity=f"phi={direction}", tau=300,
                  stop_below=[f"r={r_ph - 1e-2}"], stop_above=[f"r={r_ph + 1e-2}"], **TIGHT)
    on = run("kerr", start=f"r={r_ph!r},theta=pi/2", **common)
    off = run("kerr", start=f"r={r_ph + 2e-3!r},theta=pi/2", **common)
    # a ray sent tangentially at r_ph circles for several turns; 2e-3 M away it leaves the band within about one
    assert on["termination"] == off["termination"] == "range"
    assert on["turns"] > 2.5 and off["turns"] < on["turns"] / 2
    assert on["drift"]["hamiltonian"] < 1e-10
    assert math.copysign(1, on["angular_momentum"]) == direction


def _carter(out, a, mu2, at="start"):
    """Carter's Q (Carter 1968) from a probe report: mu2 = -g(u,u) (1 timelike, 0 light)."""
    p = out["momentum" if at == "start" else "end_momentum"]
    th = out[at if at == "start" else "end"]["theta"]
    E, L = -p["t"], p["phi"]
    return p["theta"] ** 2 + math.cos(th) ** 2 * (a * a * (mu2 - E * E) + L * L / math.sin(th) ** 2)


def _polar_turn(Q, E, L, a, mu2):
    """cos^2(theta) where Carter's Theta = Q - z (a^2 (mu2 - E^2) + L^2/(1 - z)) vanishes (z = cos^2 theta)."""
    from scipy.optimize import brentq

    def theta_fn(z):
        return Q - z * (a * a * (mu2 - E * E) + L * L / (1 - z))

    return brentq(theta_fn, 0.0, 1 - 1e-12, xtol=1e-15, rtol=1e-15)


def test_kerr_inclined_timelike_orbit_keeps_carters_constant():
    # Carter (1968): Q conserved; the polar turning points are the roots of Theta(theta) = 0.
    a = 0.9
    out = run("kerr", params="M=1,a=0.9", start="r=10,theta=pi/2", orbit="custom",
              velocity="theta=0.012,phi=0.033", tau=1500)
    assert out["termination"] == "completed", out["detail"]
    q0, q1 = _carter(out, a, 1.0), _carter(out, a, 1.0, at="end")
    assert q0 > 1e-3 and q1 == pytest.approx(q0, rel=1e-9)
    # the probe finds the separation constant from the inverse metric itself: in Kerr it is Carter's Q
    assert out["separation"]["initial"] == pytest.approx(q0, rel=1e-12)
    assert out["drift"]["separation"]["max_rel_change"] < 1e-9
    polar = [p for p in out["turning_points"]["points"] if p["coordinate"] == "theta"]
    assert len(polar) >= 4 and {p["kind"] for p in polar} == {"minimum", "maximum"}
    z = _polar_turn(q0, out["energy"], out["angular_momentum"], a, 1.0)
    for p in polar:
        assert math.cos(p["value"]) ** 2 == pytest.approx(z, rel=1e-7)


def test_kerr_inclined_light_ray_from_impact_parameters():
    # With E = 1 in the equatorial plane, --theta-impact q gives Carter's Q = q^2 (Carter 1968).
    a, q = 0.9, 4.0
    out = run("kerr", params="M=1,a=0.9", start="r=40,theta=pi/2", orbit="null", impact=5.0, theta_impact=q,
              tau=400, escape_radius=50, **TIGHT)
    assert out["termination"] == "escape"
    assert _carter(out, a, 0.0) == pytest.approx(q * q, rel=1e-13)
    assert _carter(out, a, 0.0, at="end") == pytest.approx(q * q, rel=1e-9)
    polar = [p for p in out["turning_points"]["points"] if p["coordinate"] == "theta"]
    z = _polar_turn(q * q, 1.0, 5.0, a, 0.0)
    assert polar and all(math.cos(p["value"]) ** 2 == pytest.approx(z, rel=1e-7) for p in polar)
    assert out["drift"]["hamiltonian"] < 1e-10
    assert out["separation"]["initial"] == pytest.approx(q * q, rel=1e-12)


@pytest.mark.parametrize("entry", ["kerr-de-sitter", "kerr-anti-de-sitter"])
def test_separation_constant_with_a_cosmological_constant_of_either_sign(entry):
    # Carter (1968) separates the Hamilton-Jacobi equation with a cosmological constant as well: the constant
    # the probe finds from the inverse metric is conserved along an inclined light ray (tolerance: common
    # practice, no source)
    out = run(entry, start="r=10,theta=pi/2", orbit="null", impact=5.0, theta_impact=4.0, tau=60, **TIGHT)
    assert out["drift"]["separation"]["max_rel_change"] < 1e-9
    # none for an equatorial ray (theta never moves), none in a chart that does not separate (Kerr-Schild)
    assert "separation" not in run(entry, start="r=10,theta=pi/2", orbit="null", impact=5.0, tau=10)
    ks = run("kerr", chart="kerr-schild", start="x=10,y=0,z=1", orbit="null", velocity="x=-1,z=0.1", tau=5)
    assert "separation" not in ks


# --------------------------------------------------------------------------- charged particles


def test_charged_particle_in_reissner_nordstrom_turns_at_the_effective_potential():
    from scipy.optimize import brentq

    M, Q, q, r0, ur0 = 1.0, 0.5, 3.0, 10.0, -0.3
    out = run("reissner-nordstrom", params="M=1,Q=0.5", start="r=10,theta=pi/2", orbit="radial",
              velocity=f"r={ur0}", charge=q, tau=100)
    assert out["charge"] == q and out["termination"] == "completed"

    def f(r):
        return 1 - 2 * M / r + Q * Q / r**2

    # u^t from g(u,u) = -1, then E = f u^t + q Q/r0 (A_t = -Q/r)
    ut = math.sqrt(f(r0) + ur0**2) / f(r0)
    E = f(r0) * ut + q * Q / r0
    assert out["energy"] == pytest.approx(E, rel=1e-13)
    assert out["drift"]["energy"] < 1e-12 and out["drift"]["normalisation"] < 1e-10
    r_plus = M + math.sqrt(M * M - Q * Q)
    def v(r):  # (dr/dtau)^2
        return (E - q * Q / r) ** 2 - f(r)

    grid = [r0 - k * 1e-3 * (r0 - r_plus) for k in range(1000)]  # the first root below r0 (scanning inwards)
    hi, lo = next((a, b) for a, b in zip(grid, grid[1:], strict=False) if v(a) > 0 >= v(b))
    r_turn = brentq(v, lo, hi, xtol=1e-15, rtol=1e-15)
    points = out["turning_points"]["points"]
    assert [p["kind"] for p in points] == ["minimum"]
    assert points[0]["value"] == pytest.approx(r_turn, rel=1e-10)
    assert out["end_velocity"]["r"] > 0  # repelled: moving out again
    # an uncharged particle from the same start falls in (the Lorentz force makes the difference)
    neutral = run("reissner-nordstrom", params="M=1,Q=0.5", start="r=10,theta=pi/2", orbit="radial",
                  velocity=f"r={ur0}", tau=100)
    assert neutral["termination"] == "horizon"


def test_charge_refusals():
    with pytest.raises(InputError, match=r"charts\.boyer-lindquist\.potential: the chart declares no"):
        run("kerr", start="r=10,theta=pi/2", orbit="radial", charge=1.0)
    with pytest.raises(InputError, match="radial or custom orbit"):
        run("reissner-nordstrom", start="r=10,theta=pi/2", orbit="circular", charge=1.0)
    with pytest.raises(InputError, match="radial or custom orbit"):
        run("reissner-nordstrom", start="r=10,theta=pi/2", orbit="null", velocity="r=-1", charge=1.0)
    with pytest.raises(InputError, match="finite charge"):
        run("reissner-nordstrom", start="r=10,theta=pi/2", orbit="radial", charge=math.inf)


# --------------------------------------------------------------------------- stopping events and caps


def test_each_stopping_event_fires():
    base = dict(params="M=1", start="r=10,theta=pi/2")
    inner = run("schwarzschild", **base, orbit="radial", stop_radius=5.0)
    assert inner["termination"] == "stop-radius" and inner["end"]["r"] == pytest.approx(5.0, rel=1e-12)
    assert "--stop-radius 5" in inner["detail"]
    out = run("schwarzschild", **base, orbit="null", impact=8.0, outgoing=True, tau=1e4, escape_radius=30)
    assert out["termination"] == "escape" and out["end"]["r"] == pytest.approx(30.0, rel=1e-12)
    ranged = run("schwarzschild", **base, orbit="custom", velocity="theta=0.01,phi=0.03", tau=1000,
                 stop_above=["theta=pi/2+0.1"])
    assert ranged["termination"] == "range" and ranged["end"]["theta"] == pytest.approx(math.pi / 2 + 0.1, rel=1e-12)
    fall = run("schwarzschild", **base, orbit="null", velocity="r=-1")
    assert fall["termination"] == "horizon" and fall["end"]["r"] == pytest.approx(2.002, rel=1e-12)
    assert fall["horizons"] == [pytest.approx(2.0, rel=1e-12)]
    edge = run("schwarzschild", **base, orbit="null", velocity="r=-1", cross_horizons=True)
    assert edge["termination"] == "domain-edge" and edge["end"]["r"] < 2.002
    # a cosmological horizon above the start (Schwarzschild-de Sitter) stops an outgoing ray 0.1% inside it
    sds = DOCS.get("schwarzschild-de-sitter")
    if sds is not None:
        out = probe(sds, EXPORTER, start="r=5,theta=pi/2", orbit="null", velocity="r=1")
        assert out["termination"] == "horizon" and len(out["horizons"]) == 2
        assert out["end"]["r"] == pytest.approx(max(out["horizons"]) * (1 - 1e-3), rel=1e-12)


@pytest.mark.parametrize("mode", [dict(orbit="null", impact=20.0), dict(orbit="radial", charge=0.5)])
def test_step_and_cpu_caps_apply_to_every_new_mode(mode):
    entry = "reissner-nordstrom"
    out = run(entry, start="r=1e4,theta=pi/2", tau=1e9, max_steps=5, **mode)
    assert out["termination"] == "step-limit" and out["steps"] == 5 and "--max-steps" in out["detail"]
    out = run(entry, start="r=1e4,theta=pi/2", tau=1e9, max_cpu=1e-9, **mode)
    assert out["termination"] == "cpu-limit" and "--max-cpu" in out["detail"]


def test_stop_and_null_refusals():
    base = dict(params="M=1", start="r=10,theta=pi/2")
    with pytest.raises(InputError, match="--escape-radius: 5 is not above the start r = 10"):
        run("schwarzschild", **base, orbit="radial", escape_radius=5.0)
    with pytest.raises(InputError, match="--stop-below: theta: 2 is not below the start"):
        run("schwarzschild", **base, orbit="radial", stop_below=["theta=2"])
    with pytest.raises(InputError, match="--stop-radius: this chart has no radial coordinate"):
        run("kerr", params="M=1,a=0.5", chart="kerr-schild", start="x=10,y=0,z=1", orbit="radial", stop_radius=3.0)
    with pytest.raises(InputError, match="no null ray with impact 8 passes here"):
        run("schwarzschild", params="M=1", start="r=2.5,theta=pi/2", orbit="null", impact=8.0, outgoing=True)
    with pytest.raises(InputError, match="--impact or --velocity, not both"):
        run("schwarzschild", **base, orbit="null", impact=2.0, velocity="r=-1")
    with pytest.raises(InputError, match="needs a direction"):
        run("schwarzschild", **base, orbit="null")
    with pytest.raises(InputError, match="--impact: only for a null geodesic"):
        run("schwarzschild", **base, orbit="radial", impact=2.0)
    with pytest.raises(InputError, match="--theta-impact: only with --impact"):
        run("schwarzschild", **base, orbit="null", velocity="r=-1", theta_impact=1.0)


# --------------------------------------------------------------------------- command line


def test_cli_null_probe_json_and_text(cli, python_target):
    args = ["probe", str(SPACETIMES / "schwarzschild.toml"), "--from", "r=10,theta=pi/2", "--orbit", "null",
            "--impact", "8", "--outgoing", "--escape-radius", "30", "--tau", "1000"]
    result = cli(*args, "--json")
    assert result.exit_code == 0, result.stderr
    out = json.loads(result.stdout)
    assert out["termination"] == "escape" and out["impact"] == {"b": 8.0, "theta": 0.0, "direction": "outgoing"}
    text = cli(*args)
    assert text.exit_code == 0 and "escape: escaped to r = 30 (--escape-radius 30)" in text.stdout
    assert "H = g(k,k)/2" in text.stdout
    capped = cli(*args, "--max-steps", "3")
    assert capped.exit_code == 1 and capped.stderr.count("\n") == 1 and "step cap of 3 steps" in capped.stderr
    refused = cli("probe", str(SPACETIMES / "kerr.toml"), "--from", "r=10,theta=pi/2", "--orbit", "radial",
                  "--charge", "1")
    assert refused.exit_code == 2 and refused.stderr.count("\n") == 1 and "potential" in refused.stderr
