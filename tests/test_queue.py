"""The verification queue on SQLite and on a real PostgreSQL server (see tests/pg.py).

Workers run as separate processes started with only the database URL, as on another
machine. Every job must be stored exactly once: none lost, none duplicated, also when a
worker is killed with SIGKILL in the middle of a job.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
import time
from collections import Counter
from pathlib import Path

import pytest
from conftest import DATA
from pg import any_url, pg_url, wait_until_blocked  # noqa: F401  (fixtures: any_url is SQLite, then PostgreSQL)
from queue_helpers import LOG_ENV, SLOW_ENV, Crasher, Tally, document, plugin_manager
from sqlalchemy import func, select, update
from sqlalchemy.orm import Session

from gravicat.api import queue
from gravicat.checks import CheckResult, Method, Status
from gravicat.engine.runner import run_verifier
from gravicat.store import db
from gravicat.store import revisions as store
from gravicat.store.models import CheckRecord, Entry, Job, JobState, Revision

HELPER = Path(__file__).parent / "queue_helpers.py"
LEASE = 6  # seconds; heartbeats every LEASE / 4, so a busy machine does not lose leases by accident


@pytest.fixture
def engine(any_url):  # noqa: F811
    eng = db.make_engine(any_url)
    db.ensure_schema(eng, may_upgrade=True, may_create=True)
    yield eng
    eng.dispose()


def _add(engine, slugs) -> None:
    with Session(engine) as session, session.begin():
        for slug in slugs:
            store.add_document(session, document(slug), author="Halcyon Reach test group")


def _enqueue(engine, verifiers, **options) -> queue.Enqueued:
    with Session(engine) as session, session.begin():
        return queue.enqueue(session, store.list_entries(session), verifiers, **options)


def _jobs(engine) -> list[Job]:
    with Session(engine) as session:
        return list(session.scalars(select(Job).order_by(Job.id)))


def _results_per_job(engine) -> Counter:
    with Session(engine) as session:
        rows = session.execute(select(CheckRecord.revision_id, CheckRecord.chart, CheckRecord.verifier,
                                      CheckRecord.verifier_version))
        return Counter(tuple(r) for r in rows)


def _spawn_workers(url, count, tmp_path, *, lease, once=True, plugins="tally", extra_env=None):
    go = tmp_path / "go"
    env = dict(os.environ, **(extra_env or {}))
    procs = []
    for i in range(count):  # output to files: a pipe nobody reads could fill up and block a worker
        out, err = (open(tmp_path / f"worker{i}.{kind}", "w") for kind in ("out", "err"))
        with out, err:
            proc = subprocess.Popen([sys.executable, str(HELPER), "worker", url, "--plugins", plugins, "--lease",
                                     str(lease), *(["--once"] if once else []), "--go", str(go)],
                                    stdout=out, stderr=err, text=True, env=env)
        proc.files = (Path(out.name), Path(err.name))
        procs.append(proc)
    go.touch()  # each worker waits for this file after start-up, so that they claim at the same time
    return procs


def _finish(procs, timeout=240):
    """(exit code, stdout, stderr) of each worker process, once it has ended."""
    outputs = []
    for proc in procs:
        try:
            proc.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            for p in procs:
                p.kill()
            raise
        outputs.append((proc.returncode, *(f.read_text() for f in proc.files)))
    return outputs


def _log_lines(path: Path) -> list[tuple[str, str, int]]:
    if not path.exists():
        return []
    return [(e, c, int(p)) for e, c, p in (line.split() for line in path.read_text().splitlines())]


# --------------------------------------------------------------------------- enqueue


def test_enqueue_records_one_job_per_revision_chart_and_verifier_version(engine):
    _add(engine, ["enq-a", "enq-b", "enq-c"])
    first = _enqueue(engine, [Tally(), Crasher()])
    assert first.to_json() == {"added": 6, "rearmed": 0, "queued": 0, "up_to_date": 0}
    again = _enqueue(engine, [Tally(), Crasher()])  # idempotent: the pending jobs are not duplicated
    assert again.to_json() == {"added": 0, "rearmed": 0, "queued": 6, "up_to_date": 0}
    jobs = _jobs(engine)
    assert {(j.chart, j.verifier, j.verifier_version, j.state) for j in jobs} == {
        ("inertial", "tally", "1", JobState.PENDING), ("inertial", "crasher", "1", JobState.PENDING)}
    assert len({(j.revision_id, j.chart, j.verifier, j.verifier_version) for j in jobs}) == 6

    # results already stored for a verifier version (e.g. by 'gravicat verify') need no job
    _add(engine, ["enq-d"])
    with Session(engine) as session, session.begin():
        rev = store.revision(session, "enq-d")
        store.save_results(session, rev, "inertial", run_verifier(Tally(), _geometry(rev)))
    step = _enqueue(engine, [Tally()])
    assert step.to_json() == {"added": 0, "rearmed": 0, "queued": 3, "up_to_date": 1}

    # a new verifier version invalidates stored results: new jobs, the old ones stay as they are
    class TallyTwo(Tally):
        version = "2"

    bumped = _enqueue(engine, [TallyTwo()])
    assert bumped.added == 4 and bumped.queued == 0

    # a new revision of an entry needs its own jobs
    with Session(engine) as session, session.begin():
        assert store.add_document(session, document("enq-a", "second"), author="t").action == "revised"
    assert _enqueue(engine, [Tally()]).added == 1


def test_two_concurrent_enqueues_record_each_job_once(engine):
    _add(engine, ["twice-a", "twice-b"])
    outcome = {}

    def second():
        with Session(engine) as session, session.begin():
            outcome["b"] = queue.enqueue(session, store.list_entries(session), [Tally()])

    with Session(engine) as first:
        first.begin()
        outcome["a"] = queue.enqueue(first, store.list_entries(first), [Tally()])
        thread = threading.Thread(target=second)
        thread.start()
        wait_until_blocked(engine, thread)  # on PostgreSQL: its insert waits on the same unique key
        first.commit()
    thread.join(30)
    assert outcome["a"].added == 2
    assert outcome["b"].to_json() == {"added": 0, "rearmed": 0, "queued": 2, "up_to_date": 0}
    assert len(_jobs(engine)) == 2


def test_charts_measured_before_are_ordered_by_their_time(engine):
    _add(engine, ["timed-a", "untimed-b"])
    with Session(engine) as session, session.begin():
        rev = store.revision(session, "timed-a")
        store.save_results(session, rev, "inertial", [  # an earlier verification, by another verifier version
            CheckResult("tally", Status.PASS, Method.SYMBOLIC, "earlier", seconds=12.5, verifier="tally",
                        version="0"),
            CheckResult("other", Status.PASS, Method.SYMBOLIC, "earlier", seconds=0.25, verifier="other",
                        version="1")])
    _enqueue(engine, [Tally()])
    with Session(engine) as session:
        found = dict(session.execute(select(Entry.slug, Job.priority).select_from(Job)
                                     .join(Revision, Job.revision_id == Revision.id)
                                     .join(Entry, Revision.entry_id == Entry.id)).all())
    assert found["timed-a"] == 12750  # milliseconds measured last time
    assert found["untimed-b"] == queue.chart_priority(document("untimed-b").data["charts"]["inertial"])
    worker = queue.Worker(engine, plugin_manager("tally"))
    assert worker.claim().slug == "timed-a"  # the costlier chart first


def _geometry(rev):
    from gravicat.engine.geometry import Geometry
    from gravicat.format.metricfile import build_chart

    return Geometry(build_chart(store.document_of(rev), "inertial"))


def test_force_rearms_finished_jobs_and_done_jobs_are_up_to_date(engine):
    _add(engine, ["force-a", "force-b"])
    _enqueue(engine, [Tally()])
    stats = queue.Worker(engine, plugin_manager("tally")).work(once=True, poll=0.01)
    assert stats.done == 2 and stats.claims == 2
    assert _enqueue(engine, [Tally()]).to_json() == {"added": 0, "rearmed": 0, "queued": 0, "up_to_date": 2}
    forced = _enqueue(engine, [Tally()], force=True)
    assert forced.to_json() == {"added": 0, "rearmed": 2, "queued": 0, "up_to_date": 0}
    assert {(j.state, j.attempts, j.token) for j in _jobs(engine)} == {(JobState.PENDING, 0, None)}
    queue.Worker(engine, plugin_manager("tally")).work(once=True, poll=0.01)
    # rows are only added: two results per job now, the newest is the one shown
    assert set(_results_per_job(engine).values()) == {2}


# --------------------------------------------------------------------------- workers in processes


def _wait_until_done(engine, count: int, procs, timeout: float = 300) -> None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        with Session(engine) as session:
            if queue.counts(session)["done"] == count:
                return
        dead = [p for p in procs if p.poll() is not None and p.returncode != -signal.SIGKILL]
        assert not dead, [(p.returncode, p.files[1].read_text()) for p in dead]
        time.sleep(0.1)
    raise AssertionError("the workers did not finish the queue")


def test_four_workers_200_jobs_exactly_once_then_one_killed_mid_job(any_url, engine, tmp_path):  # noqa: F811
    slugs = [f"halcyon-{i:03d}" for i in range(200)]
    slow = "halcyon-117"
    _add(engine, slugs)
    assert _enqueue(engine, [Tally()]).added == 200
    log = tmp_path / "executions.log"
    procs = _spawn_workers(any_url, 4, tmp_path, lease=LEASE, once=False,
                           extra_env={LOG_ENV: str(log), SLOW_ENV: slow})
    try:
        # 1. four workers over 200 jobs: every job done exactly once
        _wait_until_done(engine, 200, procs)
        jobs = _jobs(engine)
        assert len(jobs) == 200 and {j.state for j in jobs} == {JobState.DONE}
        assert {j.attempts for j in jobs} == {1}  # no lease ran out, nothing was retried
        results = _results_per_job(engine)
        assert len(results) == 200 and set(results.values()) == {1}  # none lost, none duplicated
        executions = _log_lines(log)
        assert sorted(e for e, _, _ in executions) == slugs  # each verifier ran exactly once per job
        pids = {p for _, _, p in executions}
        assert len(pids) >= 2, "the workers did not share the work"
        assert {j.worker.rsplit(":", 1)[1] for j in jobs} == {str(p) for p in pids}
        assert {p.pid for p in procs} >= pids

        # 2. the same 200 jobs again (as 'verify --all --enqueue --force'), one worker killed mid-job
        Path(str(log) + ".arm").touch()  # from now on the first run of the slow entry blocks
        with Session(engine) as session, session.begin():
            again = queue.enqueue(session, store.list_entries(session), [Tally()], force=True)
            rid = store.revision(session, slow).id
            session.execute(update(Job).where(Job.revision_id == rid).values(priority=10**6))  # claimed first
        assert again.rearmed == 200
        marker = Path(str(log) + ".slow")
        deadline = time.monotonic() + 120
        while not (marker.exists() and marker.read_text()) and time.monotonic() < deadline:
            time.sleep(0.02)
        victim = int(marker.read_text())
        with Session(engine) as session:  # mid-job: claimed and running
            job = session.scalars(select(Job).where(Job.revision_id == rid)).one()
            assert job.state == JobState.RUNNING and job.worker.endswith(f":{victim}")
        os.kill(victim, signal.SIGKILL)
        _wait_until_done(engine, 200, procs)
        jobs = _jobs(engine)
        assert {j.state for j in jobs} == {JobState.DONE}
        results = _results_per_job(engine)
        assert len(results) == 200 and set(results.values()) == {2}  # once per round, the killed job too
        slow_job = next(j for j in jobs if j.revision_id == rid)
        assert slow_job.attempts == 2 and not slow_job.worker.endswith(f":{victim}")
        second = _log_lines(log)[200:]
        runs = [p for e, _, p in second if e == slow]
        assert runs[0] == victim and len(runs) == 2 and runs[1] != victim
        assert {e for e, _, _ in second} == set(slugs)
    finally:
        for proc in procs:
            if proc.poll() is None:
                proc.send_signal(signal.SIGTERM)  # a worker stops between jobs, handing nothing back
        outputs = _finish(procs)
    assert [code for code, _, _ in outputs].count(-signal.SIGKILL) == 1
    assert all(code in (0, 128 + signal.SIGTERM) for code, _, _ in outputs if code != -signal.SIGKILL), outputs
    with Session(engine) as session:
        assert queue.counts(session) == {"pending": 0, "running": 0, "done": 200, "failed": 0}


def test_sigterm_hands_the_claimed_job_back(any_url, engine, tmp_path):  # noqa: F811
    _add(engine, ["term-a"])
    _enqueue(engine, [Tally()])
    log = tmp_path / "executions.log"
    Path(str(log) + ".arm").touch()
    (proc,) = _spawn_workers(any_url, 1, tmp_path, lease=60, extra_env={LOG_ENV: str(log), SLOW_ENV: "term-a"})
    marker = Path(str(log) + ".slow")
    deadline = time.monotonic() + 60
    while not (marker.exists() and marker.read_text()) and time.monotonic() < deadline:
        time.sleep(0.02)
    assert _jobs(engine)[0].state == JobState.RUNNING
    proc.send_signal(signal.SIGTERM)
    proc.wait(timeout=60)
    (job,) = _jobs(engine)
    assert (job.state, job.attempts, job.token, job.lease_until) == (JobState.PENDING, 0, None, None)
    assert not _results_per_job(engine)


# --------------------------------------------------------------------------- failures and leases


def test_crashing_verifier_is_failed_after_bounded_attempts(engine, any_url, cli):  # noqa: F811
    _add(engine, ["crash-a"])
    _enqueue(engine, [Tally(), Crasher()], max_attempts=2)
    worker = queue.Worker(engine, plugin_manager("tally,crash"))
    stats = worker.work(once=True, poll=0.01)
    assert (stats.done, stats.retried, stats.failed) == (1, 1, 1)
    jobs = {j.verifier: j for j in _jobs(engine)}
    assert jobs["tally"].state == JobState.DONE and jobs["tally"].attempts == 1
    crashed = jobs["crasher"]
    assert crashed.state == JobState.FAILED and crashed.attempts == 2
    assert "RuntimeError: deliberate crash in a test verifier on crash-a" in crashed.error
    with Session(engine) as session:
        rows = session.scalars(select(CheckRecord).where(CheckRecord.verifier == "crasher")).all()
        assert [(r.status, r.verifier_version) for r in rows] == [(Status.ERROR, "1")]  # stored once, at the end
        assert "deliberate crash" in rows[0].detail

    shown = cli("queue", "--json", db=any_url)
    assert shown.exit_code == 0, shown.output
    info = json.loads(shown.stdout)
    assert {k: info[k] for k in ("pending", "running", "done", "failed", "total")} == {
        "pending": 0, "running": 0, "done": 1, "failed": 1, "total": 2}
    (failed,) = info["failed_jobs"]
    assert (failed["entry"], failed["chart"], failed["verifier"], failed["version"], failed["attempts"]) == (
        "crash-a", "inertial", "crasher", "1", 2)
    assert "deliberate crash" in failed["error"]
    table = cli("queue", "--failed", db=any_url)
    assert table.exit_code == 0 and "crash-a" in table.stdout and "deliberate crash" in table.stdout
    again = cli("queue", "--retry-failed", "--json", db=any_url)
    assert again.exit_code == 0
    assert json.loads(again.stdout)["retried"] == 1 and json.loads(again.stdout)["pending"] == 1


def test_a_stale_claim_cannot_store_results(engine):
    _add(engine, ["stale-a"])
    _enqueue(engine, [Tally()])
    first, second = (queue.Worker(engine, plugin_manager("tally"), lease=60, name=n) for n in ("host-a:1", "host-b:2"))
    claim_a = first.claim()
    assert claim_a is not None and len(claim_a.jobs) == 1
    assert second.claim() is None  # held under a valid lease
    outcome_a = first.execute(claim_a)
    with Session(engine) as session, session.begin():  # worker A froze for longer than its lease
        session.execute(update(Job).values(lease_until=first.now() - queue.dt.timedelta(seconds=1)))
    claim_b = second.claim()
    assert claim_b is not None and claim_b.jobs[0].attempts == 2 and claim_b.token != claim_a.token
    first.finish(claim_a, outcome_a)  # too late: discarded
    assert first.stats.lost == 1 and first.stats.done == 0 and not _results_per_job(engine)
    second.finish(claim_b, second.execute(claim_b))
    (job,) = _jobs(engine)
    assert job.state == JobState.DONE and job.worker == "host-b:2"
    assert list(_results_per_job(engine).values()) == [1]


def test_a_live_worker_keeps_its_job_past_the_lease(engine):
    _add(engine, ["beat-a"])
    _enqueue(engine, [Tally()])
    holder, other = (queue.Worker(engine, plugin_manager("tally"), lease=1.0, name=n) for n in ("a:1", "b:2"))
    claim = holder.claim()
    first_lease = _jobs(engine)[0].lease_until
    beat = queue._Heartbeat(holder, claim)
    beat.start()
    try:
        time.sleep(2.5)  # more than twice the lease: only the heartbeat keeps the job reserved
        assert other.claim() is None
        assert (_jobs(engine)[0].lease_until - first_lease).total_seconds() > 1.0
    finally:
        beat.stop()
    assert not beat.lost
    holder.finish(claim, holder.execute(claim))
    assert holder.stats.done == 1 and _jobs(engine)[0].state == JobState.DONE


def test_a_job_lost_on_its_last_attempt_is_failed_with_a_reason(engine):
    _add(engine, ["lost-a"])
    _enqueue(engine, [Tally()], max_attempts=3)
    worker = queue.Worker(engine, plugin_manager("tally"))
    with Session(engine) as session, session.begin():  # three workers died holding it
        session.execute(update(Job).values(state=JobState.RUNNING, attempts=3, token="0" * 32, worker="gone:9",
                                           lease_until=worker.now() - queue.dt.timedelta(seconds=5)))
    stats = worker.work(once=True, poll=0.01)
    assert stats.abandoned == 1 and stats.done == 0
    (job,) = _jobs(engine)
    assert job.state == JobState.FAILED and "worker running it stopped" in job.error
    with Session(engine) as session:
        (row,) = session.scalars(select(CheckRecord)).all()
        assert row.status == Status.ERROR and "3 attempts" in row.detail


def test_worker_claims_only_verifier_versions_it_has(engine):
    _add(engine, ["version-a"])

    class Newer(Tally):
        version = "9"

    _enqueue(engine, [Newer()])
    worker = queue.Worker(engine, plugin_manager("tally"))  # has tally 1 only
    assert worker.claim() is None and worker.outstanding() == 0
    assert worker.work(once=True, poll=0.01).claims == 0
    assert _jobs(engine)[0].state == JobState.PENDING


def test_removing_an_entry_removes_its_jobs(engine):
    _add(engine, ["gone-a", "kept-b"])
    _enqueue(engine, [Tally()])
    with Session(engine) as session, session.begin():
        store.remove_entry(session, "gone-a")
    with Session(engine) as session:
        assert session.scalar(select(func.count(Job.id))) == 1
        assert session.scalar(select(Entry.slug).join(Revision).join(Job, Job.revision_id == Revision.id)) == "kept-b"


# --------------------------------------------------------------------------- the commands


def test_worker_and_queue_commands_with_the_installed_verifiers(any_url, engine, cli):  # noqa: F811
    assert cli("add", str(DATA / "rindler-demo.toml"), db=any_url).exit_code == 0
    empty = cli("queue", "--json", db=any_url)
    assert empty.exit_code == 0 and json.loads(empty.stdout)["total"] == 0
    from gravicat.registry import make_plugin_manager, verifiers

    installed = list(verifiers(make_plugin_manager()).values())
    enqueued = cli("verify", "--all", "--enqueue", "--json", db=any_url)
    assert enqueued.exit_code == 0, enqueued.output
    assert json.loads(enqueued.stdout) == {"added": len(installed), "rearmed": 0, "queued": 0, "up_to_date": 0}
    again = cli("verify", "halcyon-rindler", "--enqueue", db=any_url)
    assert again.exit_code == 0
    assert again.stdout.startswith(f"0 job(s) queued (0 new, 0 again), {len(installed)} already queued")
    table = cli("queue", db=any_url)
    assert table.exit_code == 0 and f"pending  {len(installed)}" in table.stdout

    ran = cli("worker", "--once", "--poll", "0.1", db=any_url)
    assert ran.exit_code == 0, ran.output
    assert f"{len(installed)} done, 0 failed" in ran.stdout
    info = json.loads(cli("queue", "--json", db=any_url).stdout)
    assert (info["done"], info["pending"], info["running"], info["failed"]) == (len(installed), 0, 0, 0)
    shown = json.loads(cli("show", "halcyon-rindler", "--json", db=any_url).stdout)
    assert {c["verifier"] for c in shown["checks"]} == {v.name for v in installed}
    # the Rindler chart covers a wedge of flat spacetime, so no check may fail (W. Rindler, Relativity:
    # Special, General, and Cosmological, 2nd ed., Oxford University Press (2006), ch. 3)
    assert all(c["status"] not in ("fail", "error") for c in shown["checks"]), shown["checks"]


def test_worker_with_several_processes_from_the_command_line(pg_url):  # noqa: F811
    """--jobs 2 forks two workers; on PostgreSQL, where connections must not cross the fork."""
    engine = db.make_engine(pg_url)
    db.ensure_schema(engine, may_upgrade=True, may_create=True)
    _add(engine, ["procs-a", "procs-b", "procs-c"])
    from gravicat.registry import make_plugin_manager, verifiers

    only = verifiers(make_plugin_manager())["structure"]  # the cheapest installed verifier
    _enqueue(engine, [only])
    proc = subprocess.run([sys.executable, "-m", "gravicat", "--db", pg_url, "worker", "--jobs", "2", "--once",
                           "--poll", "0.1"], capture_output=True, text=True, timeout=240)
    assert proc.returncode == 0, proc.stderr
    assert "worker finished: 3 done, 0 failed" in proc.stdout
    assert {j.state for j in _jobs(engine)} == {JobState.DONE}
    assert set(_results_per_job(engine).values()) == {1}
    engine.dispose()


def test_verify_enqueue_refuses_bad_usage(empty_catalogue):
    cli = empty_catalogue
    assert cli("add", str(DATA / "rindler-demo.toml")).exit_code == 0
    unknown = cli("verify", "no-such-entry", "--enqueue")
    assert unknown.exit_code == 2
    assert unknown.stderr.strip() == "Error: no-such-entry: no entry 'no-such-entry' in the catalogue (see 'gravicat list')"
    jobs = cli("verify", "--all", "--enqueue", "--jobs", "2")
    assert jobs.exit_code == 2
    assert jobs.stderr.strip() == "Error: --jobs: does not apply with --enqueue; give it to 'gravicat worker'"
    nothing = json.loads(cli("queue", "--json").stdout)
    assert nothing["total"] == 0  # nothing was recorded by the refused commands


def test_enqueue_entries_by_name_or_all(engine):
    _add(engine, ["named-a", "named-b"])
    with Session(engine) as session, session.begin():
        assert queue.enqueue_entries(session, ["named-b"], [Tally()]).added == 1
        assert queue.enqueue_entries(session, None, [Tally()]).to_json() == {
            "added": 1, "rearmed": 0, "queued": 1, "up_to_date": 0}
    from gravicat.errors import NotFound

    with Session(engine) as session, session.begin(), pytest.raises(NotFound, match="no entry 'named-z'"):
        queue.enqueue_entries(session, ["named-z"], [Tally()])


def test_queue_commands_report_a_broken_database_in_one_line(cli, tmp_path):
    from pg import free_port

    url = f"postgresql+psycopg://nobody@127.0.0.1:{free_port()}/nothing"
    for args in (["queue"], ["worker", "--once"]):
        result = cli(*args, db=url)
        assert result.exit_code == 2
        lines = [line for line in result.stderr.splitlines() if line.strip()]
        assert len(lines) == 1 and lines[0].startswith("Error: --db postgresql+psycopg://nobody@127.0.0.1:")
        assert "cannot open the database" in lines[0] and "Traceback" not in result.output
    missing = cli("queue", db=f"sqlite:///{tmp_path / 'none.sqlite'}")
    assert missing.exit_code == 2 and "no catalogue here yet" in missing.stderr


def test_worker_without_verifiers_is_one_clear_error(empty_catalogue, monkeypatch):
    monkeypatch.setattr("gravicat.registry.verifiers", lambda pm: {})
    result = empty_catalogue("worker", "--once")
    assert result.exit_code == 2
    assert result.stderr.strip().splitlines() == [
        "Error: plugins: no verifier is loaded: is gravicat installed (pip install -e .)?"]
