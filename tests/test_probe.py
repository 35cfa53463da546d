"""Geodesic probe: orbits integrated with the exported Python code against published results.

Sources (formulas beside each check):
* J. M. Bardeen, W. H. Press and S. A. Teukolsky, Rotating black holes: locally nonrotating
  frames, energy extraction, and scalar synchrotron radiation, ApJ 178 (1972) 347: circular
  equatorial Kerr orbits, Omega = +-M^(1/2)/(r^(3/2) +- a M^(1/2)) (eq. 2.16), and
  E, L, u^t over r^(3/4) (r^(3/2) - 3 M r^(1/2) +- 2 a M^(1/2))^(1/2) (eqs. 2.12-2.13; the
  equation numbers are recalled from memory). a = 0 gives Schwarzschild: u^t = 1/sqrt(1 - 3M/r),
  Omega^2 = M/r^3.
* C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation (1973), section 31.4: radial fall
  from rest at R, r = R (1 + cos eta)/2, tau = sqrt(R^3/(8M)) (eta + sin eta), E = sqrt(1 - 2M/R)
  (recalled from memory).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from gravicat import InputError, NotFound
from gravicat.physics.probe import probe
from gravicat.plugins.python_export import PythonExporter
from gravicat.store import revisions as store

DOCS = {d.id: d for d in store.iter_bundled_documents()}
SPACETIMES = Path(store.bundled_files()[0]).parent
EXPORTER = PythonExporter()


def run(entry, **kw):
    return probe(DOCS[entry], EXPORTER, **kw)


def test_schwarzschild_circular_orbit_at_10M():
    M, r = 1.0, 10.0
    out = run("schwarzschild", params="M=1", start="r=10,theta=pi/2", orbit="circular", orbits=5)
    assert out["termination"] == "completed" and out["code"].startswith("exporter python 2")
    c = out["circular"]
    # Bardeen, Press & Teukolsky (1972) with a = 0: u^t = 1/sqrt(1 - 3M/r), Omega = sqrt(M/r^3)
    assert c["u^t"] == pytest.approx(1 / math.sqrt(1 - 3 * M / r), rel=1e-13)
    assert c["Omega"] == pytest.approx(math.sqrt(M / r**3), rel=1e-13)
    assert c["u^phi"] == pytest.approx(c["Omega"] * c["u^t"], rel=1e-14)
    assert out["energy"] == pytest.approx((1 - 2 * M / r) / math.sqrt(1 - 3 * M / r), rel=1e-13)
    assert out["angular_momentum"] == pytest.approx(math.sqrt(M * r) / math.sqrt(1 - 3 * M / r), rel=1e-13)
    # the issue: r stays within 1e-8 over several orbits
    assert out["drift"]["coordinates"]["r"] < 1e-8
    assert c["orbits"] == pytest.approx(5, rel=1e-9)
    assert c["Omega_measured"] == pytest.approx(c["Omega"], rel=1e-9)
    assert out["drift"]["normalisation"] < 1e-12


@pytest.mark.parametrize("direction, sign", [("prograde", 1), ("retrograde", -1)])
def test_kerr_equatorial_circular_orbit(direction, sign):
    M, a, r = 1.0, 0.9, 7.0
    out = run("kerr", params="M=1,a=0.9", start="r=7,theta=pi/2", orbit="circular", direction=direction,
              orbits=3)
    c = out["circular"]
    # Bardeen, Press & Teukolsky (1972), eq. 2.16
    assert c["Omega"] == pytest.approx(sign * math.sqrt(M) / (r**1.5 + sign * a * math.sqrt(M)), rel=1e-12)
    den = r**0.75 * math.sqrt(r**1.5 - 3 * M * math.sqrt(r) + sign * 2 * a * math.sqrt(M))
    # eqs. 2.12-2.13 (recalled from memory): E, L and u^t
    assert out["energy"] == pytest.approx((r**1.5 - 2 * M * math.sqrt(r) + sign * a * math.sqrt(M)) / den,
                                          rel=1e-12)
    assert out["angular_momentum"] == pytest.approx(
        sign * math.sqrt(M) * (r**2 - sign * 2 * a * math.sqrt(M * r) + a**2) / den, rel=1e-12)
    assert c["u^t"] == pytest.approx((r**1.5 + sign * a * math.sqrt(M)) / den, rel=1e-12)
    assert out["drift"]["coordinates"]["r"] < 1e-8


def test_norm_drift_over_100_orbits():
    """The issue: g(u,u) + 1 drifts less than 1e-10 over 100 orbits (Kerr, a = 0.9 M, r = 10 M)."""
    out = run("kerr", params="M=1,a=0.9", start="r=10,theta=pi/2", orbit="circular", orbits=100)
    assert out["termination"] == "completed"
    assert out["circular"]["orbits"] == pytest.approx(100, rel=1e-9)
    drift = out["drift"]
    assert drift["normalisation"] < 1e-10
    assert drift["energy"] < 1e-10 and drift["angular_momentum"] < 1e-10
    assert drift["coordinates"]["r"] < 1e-8
    assert out["samples"] >= 64 * 100


def test_radial_fall_reaches_the_horizon_at_the_cycloid_time():
    R, M = 10.0, 1.0
    # by default the fall stops 0.1% outside the horizon the orbits physics finds (r = 2M)
    stopped = run("schwarzschild", params="M=1", start="r=10,theta=pi/2", orbit="radial")
    assert stopped["termination"] == "horizon" and stopped["horizons"] == [pytest.approx(2 * M, rel=1e-12)]
    assert stopped["end"]["r"] == pytest.approx(2 * M * 1.001, rel=1e-10)
    eta = math.acos(2 * stopped["end"]["r"] / R - 1)
    assert stopped["tau"] == pytest.approx(math.sqrt(R**3 / (8 * M)) * (eta + math.sin(eta)), rel=1e-9)
    # with --cross-horizons it runs on to the edge of the static chart's domain
    out = run("schwarzschild", params="M=1", start="r=10,theta=pi/2", orbit="radial", cross_horizons=True)
    assert out["termination"] == "domain-edge" and "r > 2*M" in out["detail"]
    r_end = out["end"]["r"]
    assert 2 * M < r_end < 2 * M * (1 + 1e-4)
    # MTW section 31.4: r = R (1 + cos eta)/2, tau = sqrt(R^3/(8M)) (eta + sin eta)
    eta = math.acos(2 * r_end / R - 1)
    assert out["tau"] == pytest.approx(math.sqrt(R**3 / (8 * M)) * (eta + math.sin(eta)), rel=1e-9)
    assert out["energy"] == pytest.approx(math.sqrt(1 - 2 * M / R), rel=1e-13)
    assert out["drift"]["energy"] < 1e-9


def test_custom_bound_orbit_turns_at_the_effective_potential_roots():
    """Start at periapsis r = 10M with u^phi = 0.04 (faster than circular, 0.0378): E and L are
    conserved, and r oscillates between the roots of E^2 = (1 - 2M/r)(1 + L^2/r^2) (the
    Schwarzschild effective potential, Carroll, Spacetime and Geometry (2004), section 5.4;
    recalled from memory). The extent is read from samples, hence 1e-3."""
    import numpy as np

    out = run("schwarzschild", params="M=1", start="r=10,theta=pi/2", orbit="custom", velocity="phi=0.04",
              tau=3000)
    E, L = out["energy"], out["angular_momentum"]
    assert L == pytest.approx(100 * 0.04, rel=1e-14)
    # (E^2 - 1) r^3 + 2 M r^2 - L^2 r + 2 M L^2 = 0
    roots = sorted(x.real for x in np.roots([E**2 - 1, 2, -L**2, 2 * L**2]) if abs(x.imag) < 1e-9 and x.real > 2)
    assert out["extent"]["r"][0] == pytest.approx(10, rel=1e-9) == roots[-2]
    assert out["extent"]["r"][1] == pytest.approx(roots[-1], rel=1e-3)
    assert out["drift"]["normalisation"] < 1e-10 and out["drift"]["energy"] < 1e-10
    assert out["drift"]["angular_momentum"] < 1e-10


@pytest.mark.parametrize("entry, kw, field, words", [
    ("schwarzschild", {"start": "r=10"}, "theta", "give a value for theta"),
    ("schwarzschild", {"start": "r=10,theta=pi/2,psi=1"}, "psi", "not a coordinate of this chart"),
    ("schwarzschild", {"start": "r=1,theta=pi/2"}, None, "outside the domain"),
    ("schwarzschild", {"start": "r=2.5,theta=pi/2"}, None, "no timelike prograde circular geodesic"),
    ("schwarzschild", {"start": "r=10,theta=pi/2", "orbit": "custom", "velocity": "t=2"}, "t",
     "not a spatial coordinate"),
    # inside the ergoregion (r < 2M on the equator) nothing can stay at rest: g_tt > 0
    ("kerr", {"start": "r=1.8,theta=pi/2", "orbit": "radial"}, None, "no future-directed timelike"),
    ("schwarzschild", {"start": "r=10,theta=pi/2", "orbit": "elliptic"}, None, "not one of"),
    ("schwarzschild", {"start": "r=10,theta=pi/2", "orbit": "radial", "orbits": 3}, None, "give --tau"),
    ("schwarzschild", {"start": "r=10,theta=pi/2", "params": "M=-1"}, "M", "declared positive"),
    ("kasner", {"start": "t=1"}, None, "independent of t"),
    ("flrw-flat", {"start": "t=1"}, "charts.comoving-spherical.functions", "arbitrary function"),
])
def test_bad_probe_input_is_one_line_error(entry, kw, field, words):
    with pytest.raises(InputError) as err:
        run(entry, **kw)
    assert err.value.field == field and words in str(err.value) and "\n" not in str(err.value)


# --------------------------------------------------------------------------- command line


def test_cli_probe_file_json(cli, python_target):
    path = SPACETIMES / "kerr.toml"
    result = cli("probe", str(path), "--set", "M=1", "--set", "a=0.9", "--from", "r=10,theta=pi/2", "--orbits", "3",
                 "--json")
    assert result.exit_code == 0, result.stderr
    out = json.loads(result.stdout)
    assert set(out) >= {"metric", "chart", "revision", "status", "code", "parameters", "orbit", "start", "velocity",
                        "circular", "tau", "termination", "drift", "integrator", "energy", "angular_momentum"}
    assert out["metric"] == "kerr" and out["status"] == "unverified" and out["parameters"] == {"M": 1.0, "a": 0.9}
    assert out["circular"]["Omega"] == pytest.approx(1 / (10**1.5 + 0.9), rel=1e-12)


def test_cli_probe_old_params_spelling_still_works(cli, python_target):
    path = SPACETIMES / "kerr.toml"
    result = cli("probe", str(path), "--params", "M=1,a=0.9", "--from", "r=10,theta=pi/2", "--orbits", "1", "--json")
    assert result.exit_code == 0, result.stderr
    assert json.loads(result.stdout)["parameters"] == {"M": 1.0, "a": 0.9}
    assert "deprecated" in result.stderr


def test_cli_probe_entry_text_and_errors(empty_catalogue, python_target):
    cli = empty_catalogue
    assert cli("add", str(SPACETIMES / "schwarzschild.toml")).exit_code == 0
    result = cli("probe", "schwarzschild", "--from", "r=10,theta=pi/2", "--orbit", "radial", "--cross-horizons")
    assert result.exit_code == 0, result.stderr
    assert "domain-edge" in result.stdout and "energy E = -p_t" in result.stdout
    bad = cli("probe", "schwarzschild", "--from", "r=10")
    assert bad.exit_code == 2 and bad.stderr.strip() == (
        "Error: --from: theta: give a value for theta (the metric depends on it)")
    missing = cli("probe", "no-such-entry", "--from", "r=10")
    assert missing.exit_code == 2 and missing.stderr.count("\n") == 1
    strict = cli("probe", "schwarzschild", "--from", "r=10,theta=pi/2", "--orbit", "custom", "--velocity",
                 "phi=0.04", "--tau", "500", "--max-drift", "1e-30")
    assert strict.exit_code == 1 and "exceeds --max-drift" in strict.stderr


def test_cli_probe_without_the_python_target(cli, monkeypatch):
    monkeypatch.setattr("gravicat.registry.exporters", lambda pm: {})
    result = cli("probe", str(SPACETIMES / "schwarzschild.toml"), "--from", "r=10,theta=pi/2")
    assert result.exit_code == 2 and "'python' export target" in result.stderr
    assert NotFound.exit_code == 2


def test_parameters_as_repeated_set_items_or_one_text_are_the_same():
    # one NAME=VALUE parser: ["M=1", "a=0.9"] (repetitions of --set), "M=1,a=0.9" and a mapping agree exactly
    kw = {"start": "r=10,theta=pi/2", "orbit": "circular", "orbits": 1}
    one = run("kerr", params="M=1,a=0.9", **kw)
    assert run("kerr", params=["M=1", "a=0.9"], **kw)["parameters"] == one["parameters"]
    assert run("kerr", params={"M": 1, "a": "9/10"}, **kw)["parameters"] == one["parameters"]
    with pytest.raises(InputError) as err:
        run("kerr", params=["M=1", "M=2"], **kw)
    assert str(err.value).startswith("--set: M: given more than once")

