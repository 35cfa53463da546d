"""Charts checked in forked children (``check --jobs``), their CPU-time caps, and gravicat.engine.fork.

The reference for "the same results" is gravicat's own in-process path (``check_document`` with
``jobs=None``, what ``check`` did before the charts ran in children): every chart of a few
multi-chart bundled entries must give the same statuses, methods, details, counterexamples and
paths either way. The physics of those results is checked elsewhere (test_bundled_checks.py).
"""

from __future__ import annotations

import json
import os
import signal
import time
from pathlib import Path

import pytest

from gravicat import CheckResult, Method, Status
from gravicat.engine import runner as V
from gravicat.engine.fork import run_forked, run_many
from gravicat.engine.runner import bundled_documents, chart_cap, check_document, make_resolver
from gravicat.errors import InputError
from gravicat.format.metricfile import load_file
from gravicat.registry import make_plugin_manager, verifiers

BUNDLED = Path(__file__).resolve().parents[1] / "catalog" / "data" / "spacetimes"
VERIFIERS = list(verifiers(make_plugin_manager()).values())


def comparable(reports):
    """Everything of a report but the timings."""
    return [(r.chart, r.path, r.status.value,
             [(c.check, c.status.value, c.method.value, c.detail, c.counterexample, c.verifier, c.version,
               json.dumps(c.data, sort_keys=True, default=str)) for c in r.results])
            for r in reports]


def resolver_for(doc):
    return make_resolver(bundled_documents().with_document(doc))


# --------------------------------------------------------------------------- same results either way


@pytest.mark.parametrize("entry", ["minkowski", "de-sitter", "reissner-nordstrom"])
def test_forked_charts_give_the_in_process_results(entry):
    doc = load_file(BUNDLED / f"{entry}.toml")
    assert len(doc.chart_names) > 1
    here = check_document(doc, VERIFIERS, resolve=resolver_for(doc), jobs=None)
    forked = check_document(doc, VERIFIERS, resolve=resolver_for(doc), jobs=2)
    assert comparable(forked) == comparable(here)
    assert [r.chart for r in forked] == doc.chart_names  # chart order, whatever finished first
    assert all(r.seconds > 0 for r in forked)
    # one at a time (--jobs 1) is still forked, and still the same
    assert comparable(check_document(doc, VERIFIERS, resolve=resolver_for(doc), jobs=1)) == comparable(here)


def test_check_json_is_unchanged_by_the_children(cli):
    path = BUNDLED / "reissner-nordstrom.toml"
    doc = load_file(path)
    expected = [r.to_json() for r in check_document(doc, VERIFIERS, resolve=resolver_for(doc), jobs=None)]
    r = cli("check", str(path), "--json", "--jobs", "2")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert list(out) == ["metric", "status", "charts"] and out["metric"] == "reissner-nordstrom"

    def strip(charts):
        return [{k: ([{kk: vv for kk, vv in c.items() if kk != "seconds"} for c in v] if k == "checks" else v)
                 for k, v in chart.items() if k != "seconds"} for chart in charts]

    assert strip(out["charts"]) == strip(expected)
    assert [list(c) for c in out["charts"]] == [["chart", "status", "path", "seconds", "checks"]] * len(doc.chart_names)


# --------------------------------------------------------------------------- the cap


class _Spin:
    """A verifier that never ends on the chart named ``slow`` (a stand-in for a runaway computation)."""

    name, version = "spin", "1"

    def check(self, geometry):
        if geometry.spec.chart == "slow":
            while True:
                pass
        return [CheckResult("spin", Status.PASS, Method.NONE, "nothing to do on this chart")]


class _Quick:
    name, version = "quick", "2"

    def check(self, geometry):
        return [CheckResult("quick", Status.PASS, Method.NONE, f"{len(geometry.spec.coords)} coordinates")]


TWO_CHARTS = """
id = "spin-test"
title = "Two flat charts"
field-equations = "vacuum"

[charts.fast]
coordinates = ["t", "x", "y", "z"]
line-element = "-dt**2 + dx**2 + dy**2 + dz**2"

[charts.slow]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 0", "0 < theta < pi"]
line-element = "-dt**2 + dr**2 + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
"""


def test_a_chart_over_its_cap_is_inconclusive_not_hung(tmp_path, monkeypatch):
    path = tmp_path / "spin.toml"
    path.write_text(TWO_CHARTS)
    doc = load_file(path)
    monkeypatch.setattr(V, "CAP_BASE", 0.0)  # cap = budget * checks = 0.1 * 3 s, i.e. the 1 s minimum
    start = time.monotonic()
    reports = check_document(doc, [_Quick(), _Spin(), _Quick()], budget=0.1, jobs=2)
    assert time.monotonic() - start < 30
    fast, slow = reports
    assert [c.status for c in fast.results] == [Status.PASS] * 3
    assert fast.path == slow.path == "flint"
    # the first verifier reported before the spin began; the spin and the one after it did not
    assert [(c.check, c.status) for c in slow.results] == [
        ("quick", Status.PASS), ("spin", Status.INCONCLUSIVE), ("quick", Status.INCONCLUSIVE)]
    capped = slow.results[1]
    assert capped.method == Method.NONE and capped.verifier == "spin" and capped.version == "1"
    assert "time cap was reached" in capped.detail and "CPU" in capped.detail
    assert slow.status == Status.INCONCLUSIVE


def test_the_cap_grows_with_the_budget_and_the_number_of_checks(tmp_path):
    text = TWO_CHARTS + """
[charts.slow.observers.static]
t = "1"

[charts.slow.invariants.kretschmann]
value = "0"
source = "flat space (common practice, no source)"

[limits.flat-copy]
chart = "slow"
reduces-to = "minkowski:spherical"
"""
    path = tmp_path / "counted.toml"
    path.write_text(text)
    doc = load_file(path)
    # slow: 7 verifiers + 1 limit on the chart + 1 observer + 1 published invariant; fast: 7 verifiers
    assert chart_cap(doc, "slow", 7, 20.0) == V.CAP_BASE + 20.0 * 10
    assert chart_cap(doc, "fast", 7, 20.0) == V.CAP_BASE + 20.0 * 7
    assert chart_cap(doc, "fast", 7, 0.5) == V.CAP_BASE + 3.5


# --------------------------------------------------------------------------- bad input


BROKEN_SECOND = TWO_CHARTS.replace("sin(theta)**2*dphi**2)", "sin(theta)**2*dphi**3)")


def test_a_chart_that_cannot_be_built_is_the_same_one_line_error(cli, tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text(BROKEN_SECOND)
    doc = load_file(path)
    with pytest.raises(InputError) as here:
        check_document(doc, VERIFIERS, jobs=None)
    with pytest.raises(InputError) as forked:
        check_document(doc, VERIFIERS, jobs=2)
    assert str(forked.value) == str(here.value)
    assert forked.value.field == "charts.slow.line-element"
    r = cli("check", str(path))
    assert r.exit_code == 2
    assert r.stderr.strip().splitlines() == [f"Error: {here.value}"]
    assert "Traceback" not in r.output


def test_an_unknown_symbol_in_a_later_chart_is_one_line(cli, tmp_path):
    path = tmp_path / "unknown.toml"
    path.write_text(TWO_CHARTS.replace("-dt**2 + dr**2", "-dt**2 + Q*dr**2"))
    r = cli("check", str(path), "--jobs", "2")
    assert r.exit_code == 2 and "Traceback" not in r.output
    [line] = r.stderr.strip().splitlines()
    assert line.startswith(f"Error: {path}: charts.slow.line-element: ") and "Q" in line


def test_jobs_must_be_positive(cli):
    r = cli("check", str(BUNDLED / "minkowski.toml"), "--jobs", "0")
    assert r.exit_code == 2


# --------------------------------------------------------------------------- gravicat.engine.fork


def test_run_many_streams_items_in_input_order_and_rebuilds_errors():
    def ok(emit):
        emit(1)
        emit(2)
        return "done"

    def bad(emit):
        emit("partial")
        raise InputError("f.toml", "charts.x.line-element", "not quadratic")

    outs = run_many([ok, bad, ok], jobs=2)
    assert [o.items for o in outs] == [[1, 2], ["partial"], [1, 2]]
    assert [o.finished for o in outs] == [True, False, True] and outs[0].value == "done"
    exc = outs[1].exception
    assert isinstance(exc, InputError) and exc.field == "charts.x.line-element"
    assert str(exc) == "f.toml: charts.x.line-element: not quadratic"
    with pytest.raises(InputError):
        outs[1].reraise()
    # the same outcome in-process (where fork is unavailable)
    here = run_many([ok, bad], in_process=True)
    assert [o.items for o in here] == [[1, 2], ["partial"]] and not here[0].forked
    assert isinstance(here[1].exception, InputError) and here[1].finished is False


def test_cpu_cap_and_wall_watchdog_keep_what_was_sent():
    def spin(emit):
        emit("started")
        while True:
            pass

    def sleep(emit):
        emit("started")
        time.sleep(60)

    start = time.monotonic()
    capped, slept = run_many([spin, sleep], jobs=2, cpu_seconds=[0.5, None], wall_seconds=[None, 1.0])
    assert time.monotonic() - start < 20
    assert capped.limit == "cpu" and capped.items == ["started"] and capped.exitcode == -signal.SIGXCPU
    assert slept.limit == "wall" and slept.items == ["started"] and not slept.finished


def test_a_stopped_child_takes_its_grandchildren_with_it(tmp_path):
    marker = tmp_path / "grandchild.pid"

    def task(emit):
        pid = os.fork()
        if pid == 0:  # the grandchild: sleeps (no CPU), would outlive a plain kill of its parent
            time.sleep(120)
            os._exit(0)
        marker.write_text(str(pid))
        emit("forked")
        while True:
            pass

    out = run_forked(task, cpu_seconds=0.5)
    assert out.limit == "cpu"
    pid = int(marker.read_text())
    for _ in range(50):  # killed: gone, or a zombie until init reaps it
        try:
            state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
        except (FileNotFoundError, ProcessLookupError):
            break
        if state in ("Z", "X"):
            break
        time.sleep(0.1)
    else:
        os.kill(pid, signal.SIGKILL)
        pytest.fail("the grandchild survived its parent's cap")


def test_without_fork_the_charts_run_here_with_the_same_results(monkeypatch):
    import gravicat.engine.fork as F

    doc = load_file(BUNDLED / "minkowski.toml")
    here = check_document(doc, VERIFIERS, resolve=resolver_for(doc), jobs=None)
    monkeypatch.setattr(F, "fork_available", lambda: False)
    monkeypatch.setattr(F.os, "fork", None)  # nothing may fork now
    assert comparable(check_document(doc, VERIFIERS, resolve=resolver_for(doc), jobs=2)) == comparable(here)
