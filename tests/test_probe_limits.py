"""Geodesic probe: the step and CPU-time caps and the stop on approach to a horizon.

Sources (formulas beside each check):
* C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation (1973), section 25.5: a body falling
  radially into a Schwarzschild hole reaches r = 2M at finite proper time while the Schwarzschild
  coordinate time diverges there, u^t = E/(1 - 2M/r) (recalled from memory). A fall from rest at R
  has E = sqrt(1 - 2M/R) and starts with u^t = 1/sqrt(1 - 2M/R) (section 31.4, recalled from memory).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from gravicat import InputError
from gravicat.format.metricfile import load_file
from gravicat.physics.probe import HORIZON_GROWTH, probe
from gravicat.plugins.python_export import PythonExporter
from gravicat.store import revisions as store

DOCS = {d.id: d for d in store.iter_bundled_documents()}
SPACETIMES = Path(store.bundled_files()[0]).parent
EXPORTER = PythonExporter()

# a circular orbit long enough that neither cap below can be reached by finishing first
LONG = {"params": "M=1", "start": "r=10,theta=pi/2", "orbit": "circular", "orbits": 100}


def run(entry, **kw):
    return probe(DOCS[entry], EXPORTER, **kw)


def test_step_cap_stops_after_max_steps():
    out = run("schwarzschild", **LONG, max_steps=3)
    assert out["termination"] == "step-limit"
    assert "step cap of 3 steps" in out["detail"] and "--max-steps" in out["detail"]
    assert out["steps"] == 3  # exactly the steps allowed: the solution ends at the end of the third
    assert 0 < out["tau"] and out["circular"]["orbits"] < 1  # far short of the 100 orbits asked for
    assert out["integrator"]["max_steps"] == 3
    # what was integrated is still a geodesic: the start is on the circular orbit and stays there
    assert out["drift"]["normalisation"] < 1e-12


@pytest.mark.parametrize("cap", [1, 2, 7])
def test_a_cap_of_n_steps_reports_n_steps(cap):
    out = run("schwarzschild", **LONG, max_steps=cap)
    assert out["termination"] == "step-limit" and out["steps"] == cap
    assert f"step cap of {cap} steps" in out["detail"]


def test_an_integration_that_ends_on_its_last_allowed_step_is_complete():
    whole = run("schwarzschild", params="M=1", start="r=10,theta=pi/2", orbit="circular", orbits=2)
    assert whole["termination"] == "completed"
    n = whole["steps"]
    exact = run("schwarzschild", params="M=1", start="r=10,theta=pi/2", orbit="circular", orbits=2, max_steps=n)
    assert exact["termination"] == "completed" and exact["steps"] == n
    # the same steps, so the same end point (floats compared with a tolerance of rounding, rel 1e-14)
    assert exact["tau"] == pytest.approx(whole["tau"], rel=1e-14)
    short = run("schwarzschild", params="M=1", start="r=10,theta=pi/2", orbit="circular", orbits=2,
                max_steps=n - 1)
    assert short["termination"] == "step-limit" and short["steps"] == n - 1 and short["tau"] < whole["tau"]


def test_cpu_cap_stops_the_integration():
    out = run("schwarzschild", **LONG, max_cpu=1e-9)
    assert out["termination"] == "cpu-limit"
    assert "CPU-time cap" in out["detail"] and "--max-cpu" in out["detail"]
    assert out["integrator"]["max_cpu_seconds"] == 1e-9
    assert out["drift"]["normalisation"] < 1e-12


@pytest.mark.parametrize("kw, source", [
    ({"max_steps": 0}, "--max-steps"), ({"max_steps": -5}, "--max-steps"),
    ({"max_cpu": 0.0}, "--max-cpu"), ({"max_cpu": -1.0}, "--max-cpu"), ({"max_cpu": math.inf}, "--max-cpu"),
    ({"max_cpu": math.nan}, "--max-cpu"),
])
def test_bad_caps_are_one_line_errors(kw, source):
    with pytest.raises(InputError) as err:
        run("schwarzschild", params="M=1", start="r=10,theta=pi/2", **kw)
    assert err.value.source == source and "\n" not in str(err.value)


def _schwarzschild_to_the_centre(tmp_path) -> Path:
    """The bundled Schwarzschild file with its Schwarzschild chart declared on r > 0: nothing but the
    time coordinate's horizon stops a fall at r = 2M."""
    text = (SPACETIMES / "schwarzschild.toml").read_text(encoding="utf-8")
    old = 'domain = ["r > 2*M", "0 < theta < pi"]'
    assert text.count(old) == 1
    path = tmp_path / "schwarzschild-to-the-centre.toml"
    path.write_text(text.replace(old, 'domain = ["r > 0", "0 < theta < pi"]'), encoding="utf-8")
    return path


def test_radial_plunge_stops_at_the_horizon_of_the_time_coordinate(tmp_path):
    M, R = 1.0, 10.0
    doc = load_file(_schwarzschild_to_the_centre(tmp_path))
    # --cross-horizons: not the stop 0.1% outside the horizon the orbits physics knows, the time coordinate's
    out = probe(doc, EXPORTER, chart="schwarzschild", params="M=1", start="r=10,theta=pi/2", orbit="radial",
                tau=200, cross_horizons=True)
    assert out["termination"] == "horizon", out["detail"]
    f_R = 1 - 2 * M / R
    ut0 = out["velocity"]["t"]
    assert ut0 == pytest.approx(1 / math.sqrt(f_R), rel=1e-13)
    # MTW 25.5: u^t = E/(1 - 2M/r) with E = sqrt(f_R); the stop at u^t = HORIZON_GROWTH u^t(0) is at
    # 1 - 2M/r = f_R/HORIZON_GROWTH, i.e. r - 2M = 2M (f_R/1e6)/(1 - f_R/1e6), about 1.6e-6 M. The event is
    # located on the dense output to ~1e-12 in tau, but near r = 2M u^t varies like 1/(r - 2M), so the
    # tolerance on r is taken as 1e-3 of that distance (common practice, no source), far below the 2e-6
    # that separates this stop from the horizon itself.
    r_end = out["end"]["r"]
    r_expected = 2 * M / (1 - f_R / HORIZON_GROWTH)
    assert 2 * M < r_end
    assert r_end - 2 * M == pytest.approx(r_expected - 2 * M, rel=1e-3)
    assert r_end == pytest.approx(2 * M, rel=1e-5)
    assert "approached a horizon" in out["detail"]
    assert out["energy"] == pytest.approx(math.sqrt(f_R), rel=1e-13)
    assert out["drift"]["energy"] < 1e-9


# --------------------------------------------------------------------------- command line


ARGS = ("--from", "r=10,theta=pi/2", "--orbits", "100")


@pytest.mark.parametrize("cap, words", [
    (("--max-steps", "3"), "step cap of 3 steps"),
    (("--max-cpu", "1e-9"), "CPU-time cap"),
])
def test_cli_cap_prints_the_report_then_one_error_line(cli, python_target, cap, words):
    result = cli("probe", str(SPACETIMES / "schwarzschild.toml"), *ARGS, *cap)
    assert result.exit_code == 1
    assert result.stderr.count("\n") == 1 and result.stderr.startswith("Error: ")
    assert "unfinished" in result.stderr and words in result.stderr
    # the report of what was integrated is printed first
    assert "g(u,u) + 1" in result.stdout and ("step-limit" if "step" in words else "cpu-limit") in result.stdout


def test_cli_cap_with_json_exits_1(cli, python_target):
    import json

    result = cli("probe", str(SPACETIMES / "schwarzschild.toml"), *ARGS, "--max-steps", "3", "--json")
    assert result.exit_code == 1
    assert json.loads(result.stdout)["termination"] == "step-limit"


@pytest.mark.parametrize("cap", [("--max-steps", "0"), ("--max-steps", "-1"), ("--max-cpu", "0"),
                                 ("--max-cpu", "-2")])
def test_cli_bad_cap_is_exit_2_with_one_line(cli, python_target, cap):
    result = cli("probe", str(SPACETIMES / "schwarzschild.toml"), *ARGS, *cap)
    assert result.exit_code == 2, result.stderr
    assert result.stderr.count("\n") == 1 and result.stderr.startswith("Error: ") and cap[0] in result.stderr
    assert "Traceback" not in result.stderr


@pytest.mark.parametrize("ask", [("--tau", "1e308"), ("--orbits", "1000000000")])
def test_cli_huge_tau_or_orbit_count_ends_at_the_cap(cli, python_target, ask):
    """Issue: --tau 1e308 or --orbits 1e9 must never run unbounded; they end at the step cap (exit 1,
    the report, then one line saying the integration is unfinished)."""
    result = cli("probe", str(SPACETIMES / "schwarzschild.toml"), "--from", "r=10,theta=pi/2", *ask,
                 "--max-steps", "50")
    assert result.exit_code == 1, result.stderr
    assert result.stderr.count("\n") == 1 and "unfinished" in result.stderr and "step cap of 50" in result.stderr
