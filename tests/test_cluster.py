"""verify --cluster on real Dask processes (nothing mocked): a `dask scheduler` and two `dask worker`
processes on 127.0.0.1, a real PostgreSQL catalogue (tests/pg.py) and SQLite.

What is checked (gravicat/api/cluster.py): every chart of the chosen bundled entries gets its
results stored exactly once; a worker SIGKILLed mid-run changes nothing in the outcome (the
scheduler reschedules its unit); a second run computes nothing; `--cluster local:2` stores the
same results as the local `--jobs 2`; a unit that kills every worker that runs it ends `error`
after the scheduler's allowed-failures; an unreachable scheduler is one line, exit 2, nothing lost;
a scheduler SIGKILLed mid-run is one line, exit 2, the units stored before stay stored and a run
against a new scheduler stores only the rest; the Python API's ``Catalogue.verify(cluster=...)``.

The entries are a subset of small bundled entries (the whole catalogue takes about 30 CPU seconds;
tests/benchmarks/bench_cluster.py runs it).
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest
from pg import pg_url  # noqa: F401  (fixture)
from sqlalchemy import func, select
from sqlalchemy.orm import Session

distributed = pytest.importorskip("distributed", reason="dask[distributed] is not installed: "
                                                        "verify --cluster cannot be tested (pip install -e .)")

from gravicat.api.catalogue import Catalogue  # noqa: E402
from gravicat.errors import ClusterError, InputError  # noqa: E402
from gravicat.format.bundled import bundled_path  # noqa: E402
from gravicat.store import db  # noqa: E402
from gravicat.store.models import CheckRecord, Entry, Revision  # noqa: E402

TESTS = Path(__file__).parent
BIN = Path(sys.executable).parent
# small bundled entries (one or two charts each, well under a second of proofs per chart)
ENTRIES = ["plane-wave", "kantowski-sachs", "kasner", "vaidya", "nariai", "godel"]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _dask(*args: str, log: Path, env: dict | None = None) -> subprocess.Popen:
    exe = BIN / "dask" if (BIN / "dask").exists() else shutil.which("dask")
    return subprocess.Popen([str(exe), *args], stdout=log.open("w"), stderr=subprocess.STDOUT,
                            start_new_session=True, env=env)


def _stop(proc: subprocess.Popen) -> None:
    try:
        os.killpg(proc.pid, signal.SIGTERM)
        proc.wait(15)
    except (ProcessLookupError, subprocess.TimeoutExpired):
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        proc.wait(5)


def _start_cluster(logs: Path, workers: int, procs: list[subprocess.Popen]) -> str:
    """Start a real `dask scheduler` and ``workers`` `dask worker` processes (one thread each) on
    127.0.0.1, appending them to ``procs`` (the scheduler first) as they start; the address."""
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(TESTS), os.environ.get("PYTHONPATH", "")]))
    procs.append(_dask("scheduler", "--host", "127.0.0.1", "--port", str(port), "--no-dashboard",
                       log=logs / "scheduler.log", env=env))  # env: the scheduler unpickles test functions too
    deadline = time.monotonic() + 60
    while True:
        try:
            socket.create_connection(("127.0.0.1", port), timeout=1).close()
            break
        except OSError:
            assert time.monotonic() < deadline, (logs / "scheduler.log").read_text()
            time.sleep(0.2)
    for k in range(workers):
        procs.append(_dask("worker", address, "--nthreads", "1", "--no-dashboard", "--host", "127.0.0.1",
                           "--name", f"w{k}", log=logs / f"worker{k}.log", env=env))
    with distributed.Client(address, timeout=30) as client:
        client.wait_for_workers(workers, timeout=120)
    return address


@pytest.fixture(scope="module")
def scheduler(tmp_path_factory):
    """A real `dask scheduler` and two `dask worker` processes (one thread each) on 127.0.0.1."""
    procs: list[subprocess.Popen] = []
    try:
        yield _start_cluster(tmp_path_factory.mktemp("dask"), 2, procs)
    finally:
        for proc in reversed(procs):
            _stop(proc)


def _gravicat(url: str, *args: str, timeout: float = 600) -> subprocess.CompletedProcess:
    env = dict(os.environ, GRAVICAT_DB=url, GRAVICAT_CONFIG=os.devnull)
    env.pop("GRAVICAT_CLUSTER", None)
    return subprocess.run([sys.executable, "-m", "gravicat", *args], capture_output=True, text=True, env=env,
                          timeout=timeout)


def _init(url: str) -> None:
    done = _gravicat(url, "init", "--no-verify")
    assert done.returncode == 0, done.stderr


def _stored(url: str) -> list[tuple]:
    """(entry, chart, check, verifier, version, status, method) of every stored result, sorted."""
    engine = db.make_engine(url)
    try:
        with Session(engine) as session:
            rows = session.execute(select(Entry.slug, CheckRecord.chart, CheckRecord.check, CheckRecord.verifier,
                                          CheckRecord.verifier_version, CheckRecord.status, CheckRecord.method)
                                   .join(Revision, CheckRecord.revision_id == Revision.id)
                                   .join(Entry, Revision.entry_id == Entry.id))
            return sorted((*r[:5], r[5].value, r[6].value) for r in rows)
    finally:
        engine.dispose()


def _charts(url: str, entries: list[str] = ENTRIES) -> set[tuple[str, str]]:
    engine = db.make_engine(url)
    try:
        with Session(engine) as session:
            return {(e, c) for e in entries
                    for c in session.scalars(select(Revision).join(Entry).where(Entry.slug == e)).one()
                    .document["charts"]}
    finally:
        engine.dispose()


def _count(url: str) -> int:
    engine = db.make_engine(url)
    try:
        with Session(engine) as session:
            return session.scalar(select(func.count(CheckRecord.id)))
    finally:
        engine.dispose()


def _assert_once(rows: list[tuple], charts: set[tuple[str, str]]) -> None:
    """Every chart has results, and no (entry, chart, check, verifier, version) is stored twice."""
    assert {(r[0], r[1]) for r in rows} == charts
    keys = [r[:5] for r in rows]
    assert len(keys) == len(set(keys)), "a result was stored twice"


def test_cluster_on_postgres_stores_each_unit_once_survives_a_killed_worker_and_resumes(scheduler, pg_url):  # noqa: F811
    _init(pg_url)
    charts = _charts(pg_url)
    run = subprocess.Popen([sys.executable, "-m", "gravicat", "verify", *ENTRIES, "--cluster", scheduler, "--json"],
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                           env=dict(os.environ, GRAVICAT_DB=pg_url, GRAVICAT_CONFIG=os.devnull))
    # SIGKILL one worker process while units are running (its nanny starts a new one)
    with distributed.Client(scheduler, timeout=30) as client:
        deadline = time.monotonic() + 120
        busy = []
        while not busy and time.monotonic() < deadline and run.poll() is None:
            busy = [addr for addr, keys in client.processing().items() if keys]
            time.sleep(0.05)
        assert busy, "no unit ever ran on the cluster"
        time.sleep(0.5)  # mid-unit: the unit's child is computing
        os.kill(client.run(os.getpid, workers=[busy[0]])[busy[0]], signal.SIGKILL)
    out, err = run.communicate(timeout=600)
    assert run.returncode == 0, err
    summary = json.loads(out)
    assert summary["status"] == "pass" and summary["cluster"]["failures"] == []
    assert summary["cluster"]["units"] == summary["cluster"]["done"] == len(charts)
    rows = _stored(pg_url)
    _assert_once(rows, charts)
    assert all(r[5] in ("pass", "skipped") for r in rows), [r for r in rows if r[5] not in ("pass", "skipped")]

    again = _gravicat(pg_url, "verify", *ENTRIES, "--cluster", scheduler, "--json")
    assert again.returncode == 0, again.stderr
    second = json.loads(again.stdout)
    assert second["cluster"]["units"] == 0 and all(e["computed"] == 0 for e in second["entries"])
    assert _stored(pg_url) == rows  # a second run computes and stores nothing


def test_local_cluster_gives_the_same_results_as_local_children(tmp_path):
    by_cluster, by_jobs = (f"sqlite:///{tmp_path / name}" for name in ("cluster.sqlite", "jobs.sqlite"))
    for url in (by_cluster, by_jobs):
        _init(url)
    cluster = _gravicat(by_cluster, "verify", *ENTRIES[:3], "--cluster", "local:2")
    assert cluster.returncode == 0, cluster.stderr
    local = _gravicat(by_jobs, "verify", *ENTRIES[:3], "--jobs", "2")
    assert local.returncode == 0, local.stderr
    rows = _stored(by_cluster)
    assert rows and rows == _stored(by_jobs)


def test_unreachable_scheduler_is_one_line_and_loses_nothing(tmp_path):
    url = f"sqlite:///{tmp_path / 'cat.sqlite'}"
    _init(url)
    first = _gravicat(url, "verify", "kasner")
    assert first.returncode == 0, first.stderr
    before = _stored(url)
    done = _gravicat(url, "verify", "--all", "--force", "--cluster", f"tcp://127.0.0.1:{_free_port()}")
    assert done.returncode == 2
    lines = [line for line in done.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("Error: --cluster tcp://127.0.0.1:"), done.stderr
    assert "cannot reach the Dask scheduler" in lines[0]
    assert _stored(url) == before
    bad = _gravicat(url, "verify", "kasner", "--cluster", "local:0")
    assert bad.returncode == 2 and bad.stderr.strip().count("\n") == 0 and "local:N" in bad.stderr


def kill_my_worker(unit, docs, versions):
    """A unit that kills the Dask worker process running it (for the allowed-failures test)."""
    os.kill(os.getpid(), signal.SIGKILL)


def test_a_unit_that_keeps_killing_its_worker_ends_in_error(scheduler, tmp_path):
    """The scheduler retries a unit whose worker died up to its allowed-failures (3), then gives up:
    the unit is stored as `error` with a message, and the run ends instead of looping."""
    from gravicat.api import cluster
    from gravicat.api.verifying import units_for
    from gravicat.registry import make_plugin_manager, verifiers

    url = f"sqlite:///{tmp_path / 'cat.sqlite'}"
    _init(url)
    chosen = list(verifiers(make_plugin_manager()).values())
    engine = db.make_engine(url)
    try:
        with Session(engine) as session:
            rev = session.scalars(select(Revision).join(Entry).where(Entry.slug == "kasner")).one()
            units, _ = units_for(session, [rev], chosen, force=False, budget=20.0, blocked=())

        def store(out):
            with Session(engine) as session, session.begin():
                return cluster.store_output(session, out, force=False)

        start = time.monotonic()
        run = cluster.verify_units(scheduler, units, {v.name: v.version for v in chosen}, store=store,
                                   work=kill_my_worker)
        assert time.monotonic() - start < 300
    finally:
        engine.dispose()
    assert run.done == run.units == len(units) == 1
    assert len(run.failures) == 1 and "ended its Dask worker process too often" in run.failures[0]
    rows = _stored(url)
    assert {r[5] for r in rows} == {"error"} and len(rows) == len(chosen)


def test_scheduler_lost_mid_run_is_one_line_keeps_what_was_stored_and_a_new_scheduler_resumes(tmp_path):
    """`verify --all --cluster tcp://...` whose scheduler is SIGKILLed after some units were stored:
    one line, exit 2, the stored units stay; a run against a new scheduler stores the rest, once."""
    url = f"sqlite:///{tmp_path / 'cat.sqlite'}"
    with Catalogue(url) as cat:  # a small catalogue, so that --all stays lean
        cat.init(bundled=False)
        for slug in ENTRIES:
            cat.add(bundled_path(slug), author="cluster test")
    charts = _charts(url)
    procs: list[subprocess.Popen] = []
    try:
        address = _start_cluster(tmp_path, 1, procs)  # one worker: the units come back one by one
        run = subprocess.Popen([sys.executable, "-m", "gravicat", "verify", "--all", "--cluster", address],
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                               env=dict(os.environ, GRAVICAT_DB=url, GRAVICAT_CONFIG=os.devnull))
        deadline = time.monotonic() + 300
        while _count(url) == 0 and run.poll() is None and time.monotonic() < deadline:
            time.sleep(0.05)
        assert run.poll() is None, f"the run ended before the scheduler could be lost: {run.stderr.read()}"
        os.killpg(procs[0].pid, signal.SIGKILL)  # the scheduler, mid-run
        out, err = run.communicate(timeout=300)
    finally:
        for proc in reversed(procs):
            _stop(proc)
    lines = [line for line in err.splitlines() if line.strip()]
    assert run.returncode == 2, err
    assert len(lines) == 1 and lines[0].startswith(f"Error: --cluster {address}: lost the Dask scheduler"), err
    assert "what was stored stays stored" in lines[0]
    kept = _stored(url)
    assert kept, "the units stored before the scheduler was lost were kept"
    done = {(r[0], r[1]) for r in kept}
    assert done < charts  # some, not all

    procs = []
    try:
        address = _start_cluster(tmp_path, 1, procs)
        again = _gravicat(url, "verify", "--all", "--cluster", address, "--json")
    finally:
        for proc in reversed(procs):
            _stop(proc)
    assert again.returncode == 0, again.stderr
    summary = json.loads(again.stdout)
    assert summary["cluster"]["units"] == len(charts - done)  # only what was not stored yet
    rows = _stored(url)
    _assert_once(rows, charts)
    assert set(kept) <= set(rows)


def test_python_api_verify_on_a_cluster(scheduler, tmp_path):
    """gravicat.Catalogue.verify(..., cluster=ADDRESS) stores what the command stores and reports the run."""
    url = f"sqlite:///{tmp_path / 'cat.sqlite'}"
    with Catalogue(url) as cat:
        cat.init(bundled=False)
        cat.add(bundled_path("kasner"), author="cluster test")
        with pytest.raises(InputError, match="local:N"):
            cat.verify("kasner", cluster="local:0")
        with pytest.raises(InputError, match="does not apply with cluster"):
            cat.verify("kasner", cluster=scheduler, jobs=2)
        assert _count(url) == 0
        report = cat.verify("kasner", cluster=scheduler)
        charts = {c for e, c in _charts(url, ["kasner"])}
        assert [v.id for v in report] == ["kasner"] and report[0].status == "pass"
        assert report[0].computed == len(charts) == report.cluster["units"] == report.cluster["stored"]
        assert report.cluster["failures"] == [] and report.cluster["address"] == scheduler
        assert {c["chart"] for c in report[0].checks} == charts
        again = cat.verify("kasner", cluster=scheduler)
        assert again.cluster["units"] == 0 and again[0].computed == 0
        local = cat.verify("kasner")  # no cluster given or configured: local children, nothing to do
        assert local.cluster is None and local[0].computed == 0
    _assert_once(_stored(url), {("kasner", c) for c in charts})
    with Catalogue(url) as cat, pytest.raises(ClusterError, match="cannot reach the Dask scheduler"):
        cat.verify("kasner", force=True, cluster=f"tcp://127.0.0.1:{_free_port()}")
