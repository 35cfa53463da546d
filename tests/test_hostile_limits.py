"""The memory cap as a setting, the one wording of a limit, and `invariants` under the caps
(issue 14 item 3): whatever stops a child (its CPU-time cap, the memory cap) is named as such by
every caller of gravicat.engine.fork, and `gravicat invariants` on a hostile file ends with one line.

The hostile files are tests/data/hostile (see test_hostile_budget.py). Bounds and caps:
docs/limits.md and docs/configuration.md (our own limits; no outside source applies).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest
from typer.testing import CliRunner

from gravicat.cli import app
from gravicat.config import load_settings, parse_memory_cap
from gravicat.engine import fork
from gravicat.errors import CatalogError, InputError

HOSTILE = Path(__file__).parent / "data" / "hostile"
SLOW = HOSTILE / "slow-but-small.toml"
MiB = 1024**2
pytestmark = pytest.mark.skipif(not fork.fork_available(), reason="no fork on this platform")


@pytest.fixture(autouse=True)
def _restore_cap(monkeypatch):
    monkeypatch.delenv("GRAVICAT_MEMORY_CAP", raising=False)
    old = fork.MEMORY_CAP_BYTES
    yield
    fork.set_memory_cap(old)


def gravicat(tmp_path: Path, *args: str, cap: str | None = None) -> subprocess.CompletedProcess:
    env = {**os.environ, "GRAVICAT_DB": f"sqlite:///{tmp_path / 'c.sqlite'}",
           "GRAVICAT_CONFIG": str(tmp_path / "none.toml")}
    env.pop("GRAVICAT_MEMORY_CAP", None)
    if cap is not None:
        env["GRAVICAT_MEMORY_CAP"] = cap
    return subprocess.run([sys.executable, "-m", "gravicat", *args], capture_output=True, text=True, env=env,
                          timeout=600)


def one_line(stderr: str) -> str:
    lines = [line for line in stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and "Traceback" not in stderr, stderr
    return lines[0]


# --------------------------------------------------------------------------- the setting


@pytest.mark.parametrize(("text", "size"), [("3GiB", 3 * 1024**3), ("512MiB", 512 * MiB), ("512 mib", 512 * MiB),
                                            ("1.5GiB", 1536 * MiB), ("2GB", 2 * 10**9), ("none", 0),
                                            (3 * 1024**3, 3 * 1024**3)])
def test_memory_cap_values(text, size):
    assert parse_memory_cap(text, "config.toml") == size


@pytest.mark.parametrize("text", ["lots", "3 parsecs", "-1GiB", "", "1MiB", True, 1.5])
def test_a_bad_memory_cap_names_the_setting(text):
    with pytest.raises(InputError, match="memory-cap"):
        parse_memory_cap(text, "GRAVICAT_MEMORY_CAP")


def test_the_setting_from_the_environment_and_the_file(tmp_path, monkeypatch):
    assert load_settings(database="sqlite://").memory_cap is None  # unset: the runner's default
    config = tmp_path / "config.toml"
    config.write_text('memory-cap = "1GiB"\n', encoding="utf-8")
    monkeypatch.setenv("GRAVICAT_CONFIG", str(config))
    assert load_settings(database="sqlite://").memory_cap == 1024 * MiB
    monkeypatch.setenv("GRAVICAT_MEMORY_CAP", "256MiB")  # the variable before the file
    assert load_settings(database="sqlite://").memory_cap == 256 * MiB
    monkeypatch.delenv("GRAVICAT_MEMORY_CAP")
    config.write_text('memory-cap = "a lot"\n', encoding="utf-8")
    with pytest.raises(InputError) as err:
        load_settings(database="sqlite://")
    assert str(err.value).startswith(f"{config}: memory-cap: 'a lot' must be a size")


def test_the_cli_applies_the_setting_and_refuses_a_bad_one(tmp_path, monkeypatch):
    url = f"sqlite:///{tmp_path / 'c.sqlite'}"
    monkeypatch.setenv("GRAVICAT_MEMORY_CAP", "512MiB")
    assert CliRunner().invoke(app, ["--db", url, "init", "--empty"]).exit_code == 0
    assert fork.MEMORY_CAP_BYTES == 512 * MiB
    monkeypatch.setenv("GRAVICAT_MEMORY_CAP", "none")
    assert CliRunner().invoke(app, ["--db", url, "list"]).exit_code == 0
    assert fork.MEMORY_CAP_BYTES is None
    monkeypatch.delenv("GRAVICAT_MEMORY_CAP")
    assert CliRunner().invoke(app, ["--db", url, "list"]).exit_code == 0
    assert fork.MEMORY_CAP_BYTES == fork.DEFAULT_MEMORY_CAP_BYTES
    monkeypatch.setenv("GRAVICAT_MEMORY_CAP", "lots")
    bad = CliRunner().invoke(app, ["--db", url, "list"])
    assert bad.exit_code == 2
    assert one_line(bad.stderr).startswith("Error: GRAVICAT_MEMORY_CAP: memory-cap: 'lots' must be a size")


def test_the_python_api_applies_the_setting(tmp_path, monkeypatch):
    from gravicat import Catalogue

    url = f"sqlite:///{tmp_path / 'c.sqlite'}"
    monkeypatch.setenv("GRAVICAT_MEMORY_CAP", "768MiB")
    Catalogue(url)
    assert fork.MEMORY_CAP_BYTES == 768 * MiB
    Catalogue(url, memory_cap="1GiB")  # the argument before the variable
    assert fork.MEMORY_CAP_BYTES == 1024 * MiB
    with pytest.raises(InputError, match="memory-cap"):
        Catalogue(url, memory_cap="plenty")


def test_a_tiny_cap_ends_a_heavy_check_with_the_memory_wording(tmp_path):
    """slow-but-small under a 64 MiB cap: its chart reaches the memory cap, the unfinished checks are
    inconclusive saying so, nothing else reaches stdout (flint's own message before it aborts)."""
    done = gravicat(tmp_path, "check", str(SLOW), "--budget", "5", "--json", cap="64MiB")
    assert "Traceback" not in done.stderr
    report = json.loads(done.stdout)  # stdout is the JSON document alone
    details = [c["detail"] for chart in report["charts"] for c in chart["checks"] if c["status"] == "inconclusive"]
    assert any("memory cap reached" in d and "64 MiB" in d for d in details), details
    assert done.returncode in (0, 1)


# --------------------------------------------------------------------------- one wording


def test_describe_limit_names_the_limit_that_was_reached():
    fork.set_memory_cap(512 * MiB)
    assert fork.describe_limit(fork.Outcome(limit="memory")) == "memory cap (512 MiB) reached"
    fork.set_memory_cap(3 * 1024**3)
    assert fork.describe_limit(fork.Outcome(limit="memory"), 20) == "memory cap (3 GiB) reached"
    fork.set_memory_cap(None)
    assert fork.describe_limit(fork.Outcome(limit="memory")) == "memory cap (no cap) reached"
    assert fork.describe_limit(fork.Outcome(limit="cpu"), 20) == "CPU-time cap of 20 s reached"
    assert fork.describe_limit(fork.Outcome(limit="cpu")) == "CPU-time cap reached"
    assert fork.describe_limit(fork.Outcome(limit="wall"), 2, 38) == "elapsed-time cap of 38 s reached"
    assert fork.describe_limit(fork.Outcome(error="ValueError: x")) == "ValueError: x"
    assert "exit code 9" in fork.describe_limit(fork.Outcome(died=True, exitcode=9))


def _hog(emit=None):
    return bytearray(2 * 10**9)


def _spin(emit=None):
    end = time.process_time() + 60
    while time.process_time() < end:
        pass


def test_the_engine_proof_runner_says_memory_or_budget():
    from gravicat.engine.geometry import _run_limited

    fork.set_memory_cap(200 * MiB)
    assert _run_limited(_hog, 10) == ({}, "memory cap (200 MiB) reached")
    assert _run_limited(_spin, 0.5) == ({}, "budget")  # the callers' "did not finish within B s"


def test_the_christoffel_export_says_memory_or_time(monkeypatch):
    import gravicat.engine.geometry as geometry
    from gravicat.export.codegen import christoffel_symbols
    from gravicat.format.metricfile import build_chart, load_file

    spec = build_chart(load_file(Path(__file__).parent / "data" / "rindler-demo.toml"), "rindler")
    fork.set_memory_cap(200 * MiB)
    monkeypatch.setattr(geometry, "Geometry", lambda spec: _hog())  # inherited by the forked child
    with pytest.raises(CatalogError, match=r"did not reduce: memory cap \(200 MiB\) reached"):
        christoffel_symbols(spec, budget=10)
    monkeypatch.setattr(geometry, "Geometry", lambda spec: _spin())
    with pytest.raises(CatalogError, match=r"within 0.3 s \(CPU-time cap of 0.3 s reached\)"):
        christoffel_symbols(spec, budget=0.3)


def test_the_repair_workers_say_memory_or_time():
    from gravicat.repair.search import _why

    fork.set_memory_cap(1024 * MiB)
    assert _why(fork.Outcome(limit="memory"), 30) == "memory cap (1 GiB) reached"
    assert _why(fork.Outcome(limit="cpu"), 30) == "CPU-time cap of 30 s reached"
    assert _why(fork.Outcome(limit="wall"), 30, 30) == "elapsed-time cap of 30 s reached"
    assert _why(fork.Outcome(died=True, exitcode=1)) == "the worker process ended without a result"


def test_what_a_child_prints_on_stdout_stays_out_of_the_output(capfd):
    out = fork.run_forked(lambda emit: os.write(1, b"FLINT exception (General error)\n") and 7, cpu_seconds=10)
    assert out.finished and out.value == 7
    assert capfd.readouterr().out == ""


# --------------------------------------------------------------------------- invariants under the caps


@pytest.mark.parametrize("path", sorted(HOSTILE.glob("*.toml")), ids=lambda p: p.stem)
def test_invariants_of_every_hostile_file_end_with_one_line(path, tmp_path):
    start = time.monotonic()
    done = gravicat(tmp_path, "invariants", str(path), "--budget", "2", "--json")
    line = one_line(done.stderr)
    assert done.stdout == ""  # nothing printed half
    assert time.monotonic() - start < 120  # 2 CPU s plus start-up, on a loaded machine
    if path.stem == "slow-but-small":  # passes the parse-time limits: stopped by its CPU-time cap
        assert done.returncode == 1
        assert line == ("Error: hostile-slow-but-small:cartesian: the invariants were not computed "
                        "(CPU-time cap of 2 s reached); nothing printed; give a larger --budget")
    else:  # refused at parse time, naming the field
        assert done.returncode == 2 and "exceed" in line and "docs/limits.md" in line


def test_invariants_under_a_tiny_memory_cap(tmp_path):
    done = gravicat(tmp_path, "invariants", str(SLOW), "--budget", "60", cap="64MiB")
    assert done.returncode == 1 and done.stdout == ""
    assert one_line(done.stderr) == ("Error: hostile-slow-but-small:cartesian: the invariants were not computed "
                                     "(memory cap (64 MiB) reached); nothing printed")


def test_invariants_still_print_the_closed_forms(tmp_path):
    """The Rindler chart covers a wedge of Minkowski space, so both scalars vanish (recalled from
    memory: W. Rindler, Relativity: Special, General, and Cosmological, 2nd ed., 2006, on uniformly
    accelerated frames)."""
    done = CliRunner().invoke(app, ["--db", f"sqlite:///{tmp_path / 'c.sqlite'}", "invariants",
                                    str(Path(__file__).parent / "data" / "rindler-demo.toml"), "--json"])
    assert done.exit_code == 0, done.output
    (chart,) = json.loads(done.stdout)["charts"]
    assert chart["ricci_scalar"] == "0" and chart["kretschmann"] == "0"


# --------------------------------------------------------------------------- export and probe under the caps


@pytest.mark.parametrize("target", ["python", "c", "geodesic-numpy", "initial-data-numpy"])
def test_export_of_a_slow_file_ends_with_one_line(target, tmp_path):
    """Exporters work on file content in a child under the CPU-time and memory caps (issue 14 item 3):
    slow-but-small passes the parse-time limits and would take minutes to differentiate."""
    out = tmp_path / "out.txt"
    out.write_text("kept\n")
    start = time.monotonic()
    done = gravicat(tmp_path, "export", str(SLOW), "--to", target, "--allow-unverified", "--budget", "2",
                    "-o", str(out))
    assert time.monotonic() - start < 120  # 2 CPU s plus start-up, on a loaded machine
    assert done.returncode == 1
    assert one_line(done.stderr) == (f"Error: hostile-slow-but-small: export --to {target} stopped (CPU-time cap "
                                     "of 2 s reached); nothing written; give a larger --budget, or setting "
                                     "memory-cap for memory (see docs/limits.md)")
    assert out.read_text() == "kept\n"  # the earlier file is untouched


def test_export_under_a_tiny_memory_cap(tmp_path):
    done = gravicat(tmp_path, "export", str(SLOW), "--to", "python", "--allow-unverified", cap="64MiB")
    assert done.returncode == 1 and done.stdout == ""
    assert "memory cap (64 MiB) reached" in one_line(done.stderr)


def test_probe_of_a_slow_file_ends_with_one_line(tmp_path):
    start = time.monotonic()
    done = gravicat(tmp_path, "probe", str(SLOW), "--orbit", "radial", "--from", "t=0,x=0.1,y=0.1,z=0.1",
                    "--budget", "1", "--max-cpu", "1")
    assert time.monotonic() - start < 120
    assert done.returncode == 1 and done.stdout == ""
    assert one_line(done.stderr) == ("Error: hostile-slow-but-small: probe stopped (CPU-time cap of 2 s reached); "
                                     "nothing written; give a larger --budget, or setting memory-cap for memory "
                                     "(see docs/limits.md)")


def test_export_and_probe_still_work_in_their_child(tmp_path):
    """The child's result reaches the parent whole: the Schwarzschild export defines the metric, and the
    probe's circular orbit at r = 10 M has Omega = sqrt(M / r^3) (Schwarzschild's Kepler law; recalled
    from memory: Misner, Thorne & Wheeler, Gravitation, 1973, section 25.5)."""
    from gravicat.format.bundled import bundled_path

    path = bundled_path("schwarzschild")
    done = gravicat(tmp_path, "export", str(path), "--to", "python", "--allow-unverified")
    assert done.returncode == 0, done.stderr
    assert "def metric(" in done.stdout
    done = gravicat(tmp_path, "probe", str(path), "--from", "r=10,theta=pi/2", "--set", "M=1", "--json",
                    "--orbits", "1")
    assert done.returncode == 0, done.stderr
    assert abs(json.loads(done.stdout)["circular"]["Omega"] - 10 ** -1.5) < 1e-12
