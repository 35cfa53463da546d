"""The verification queue: jobs kept in the catalogue database, run by workers.

The database is both the shared store and the work queue (PostgreSQL for a group,
SQLite on one machine); there is no server or queue of our own. A job is one
verifier version on one chart of one revision (the key is unique). ``gravicat
verify --enqueue`` records the jobs that need work (:func:`enqueue`), ``gravicat
worker`` runs them (:class:`Worker`, :func:`run_workers`), ``gravicat queue``
counts them (:func:`summary`).

Life of a job::

    pending --claim--> running --results stored--> done
       ^                  |-- a verifier crashed, attempts left ------------> pending
       |                  |-- a verifier crashed on the last attempt -------> failed
       '------------------'-- lease expired (worker killed or frozen): claimable again;
                              after the last attempt -> failed

Claims. A worker takes the claimable job that has been tried least, then the one
with the largest ``priority`` (the chart's cost, measured at its last verification or
else estimated, see :func:`chart_priority`: long charts start first, so that several
workers finish together), then the oldest, with ``SELECT ... FOR UPDATE SKIP LOCKED``,
together with the other claimable jobs of the same chart of the same revision: the
verifiers of one chart share one prepared :class:`gravicat.engine.geometry.Geometry`, as in
``gravicat verify``. On PostgreSQL the claim is one ``UPDATE ... RETURNING`` over the
locked rows. On SQLite the same selection runs without the ``FOR UPDATE`` clause, and
the ``BEGIN IMMEDIATE`` of every write transaction (see :mod:`gravicat.store.db`)
serialises the claims: several workers on one machine never share a job either.

Exactly once. A claim writes a fresh ``token`` and a lease (``lease_until``) on its
jobs; the worker renews the lease from a heartbeat thread while it computes. The
results are stored in the same transaction that marks the job done (and claims the
worker's next jobs: one commit per job), and only if the job still carries the
worker's token: a worker whose lease ran out (killed, or frozen for longer than the
lease) can never store a result twice, and its job is claimed again by another
worker once the lease has expired.

Failures. A verifier that crashes gives an ``error`` result (see
:func:`gravicat.engine.runner.run_verifier`); such a job goes back to the queue (behind the
untried jobs) until it has been tried ``max_attempts`` times, and is then ``failed``
with the error result stored and its message in ``Job.error``. A job whose lease
expired on its last attempt is failed the same way ("the worker stopped").

Time. Leases are compared with the database server's clock: on PostgreSQL a worker
measures the offset between its own clock and the server's ``clock_timestamp()`` at
start, so machines with unsynchronised clocks still agree on expiry.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import socket
import threading
import time
import uuid
from collections.abc import Callable, Iterable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from sqlalchemy import and_, bindparam, func, or_, select, tuple_, update
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from gravicat.checks import CheckResult, Method, Status
from gravicat.store import revisions as store
from gravicat.store.models import CheckRecord, Entry, Job, JobState, Revision

if TYPE_CHECKING:
    import pluggy
    from sqlalchemy.engine import Engine

DEFAULT_LEASE = 120.0  # seconds a claim stays valid without a heartbeat
DEFAULT_MAX_ATTEMPTS = 3
DEFAULT_POLL = 2.0  # seconds between looks at an empty queue
STATES = tuple(s.value for s in JobState)


def _utcnow() -> dt.datetime:
    return dt.datetime.now(dt.UTC)


def _message(exc: BaseException) -> str:
    """One line naming the exception (a CatalogError's text is already a full message)."""
    from gravicat.errors import CatalogError

    text = str(exc) if isinstance(exc, CatalogError) else f"{type(exc).__name__}: {exc}"
    return " ".join(text.split())[:2000]


# --------------------------------------------------------------------------- enqueue


@dataclass
class Enqueued:
    """What :func:`enqueue` did, counted in jobs (one per chart and verifier version)."""

    added: int = 0  # new jobs
    rearmed: int = 0  # finished jobs put back in the queue (``force``)
    queued: int = 0  # already pending or running
    up_to_date: int = 0  # results stored already for this verifier version

    def __iadd__(self, other: Enqueued) -> Enqueued:
        for name in ("added", "rearmed", "queued", "up_to_date"):
            setattr(self, name, getattr(self, name) + getattr(other, name))
        return self

    def to_json(self) -> dict[str, int]:
        return {"added": self.added, "rearmed": self.rearmed, "queued": self.queued, "up_to_date": self.up_to_date}

    def describe(self) -> str:
        """One line for ``verify --enqueue``."""
        return (f"{self.added + self.rearmed} job(s) queued ({self.added} new, {self.rearmed} again), "
                f"{self.queued} already queued, {self.up_to_date} up to date; "
                "run 'gravicat worker' (on any machine with the same URL) to process them")


def chart_priority(chart: Mapping[str, Any], measured_seconds: float | None = None) -> int:
    """Estimated cost of verifying a chart, in milliseconds; workers take the costliest first.

    ``measured_seconds`` is what the chart took at its last verification (the usual case when
    re-verifying after a verifier changed): it is used as it is. Without it, the size of the
    chart's canonical text stands in: a rough guess (most bundled charts have 300 to 1400
    characters and take 0.3 to 2 s, measured with tests/benchmarks/bench_queue.py), which
    cannot see that a short chart may still be costly.
    """
    if measured_seconds is not None:
        return max(1, round(measured_seconds * 1000))
    return len(json.dumps(chart, sort_keys=True))


def measured_seconds(session: Session, rev: Revision) -> dict[str, float]:
    """Seconds each chart of ``rev``'s entry took at its last verification (any revision of the
    entry, chart by name): the sum over checks of their newest stored result."""
    rows = session.execute(select(CheckRecord.chart, CheckRecord.check, CheckRecord.seconds)
                           .join(Revision, CheckRecord.revision_id == Revision.id)
                           .where(Revision.entry_id == rev.entry_id).order_by(CheckRecord.id))
    newest: dict[tuple[str, str], float] = {}
    for chart, check, seconds in rows:
        newest[(chart, check)] = seconds
    out: dict[str, float] = {}
    for (chart, _), seconds in newest.items():
        out[chart] = out.get(chart, 0.0) + seconds
    return out


def enqueue(session: Session, revisions: Iterable[Revision], verifiers: Iterable[Any], *, force: bool = False,
            budget: float | None = None, max_attempts: int = DEFAULT_MAX_ATTEMPTS) -> Enqueued:
    """Record one job per (revision, chart, verifier version) that needs work.

    A key needs work when no result of that verifier version is stored for the chart
    and no job for it exists yet; ``force`` also puts finished (done or failed) jobs
    back in the queue. Pending and running jobs are left alone. Safe against a
    concurrent enqueue of the same revisions (the unique key decides; the loser
    re-reads and counts the other's jobs as queued).
    """
    from gravicat.engine.runner import DEFAULT_BUDGET

    chosen = [(v.name, v.version) for v in verifiers]
    total = Enqueued()
    for rev in revisions:
        for attempt in range(3):
            try:
                with session.begin_nested():
                    part = _enqueue_revision(session, rev, chosen, force=force,
                                             budget=DEFAULT_BUDGET if budget is None else budget,
                                             max_attempts=max_attempts)
                break
            except IntegrityError:  # another enqueue inserted the same key first: read it and go on
                if attempt == 2:
                    raise
        total += part
    return total


def enqueue_entries(session: Session, entries: Iterable[str] | None, verifiers: Iterable[Any], *,
                    force: bool = False, budget: float | None = None,
                    max_attempts: int = DEFAULT_MAX_ATTEMPTS) -> Enqueued:
    """:func:`enqueue` for the latest revision of each named entry (every entry when None or empty).

    This is ``gravicat verify [ID...|--all] --enqueue``; an unknown id raises NotFound.
    """
    names = list(entries or ())
    revisions = [store.revision(session, name) for name in names] if names else store.list_entries(session)
    return enqueue(session, revisions, verifiers, force=force, budget=budget, max_attempts=max_attempts)


def _enqueue_revision(session: Session, rev: Revision, chosen: list[tuple[str, str]], *, force: bool,
                      budget: float, max_attempts: int) -> Enqueued:
    out = Enqueued()
    stored = set() if force else store.stored_versions(session, rev)
    existing = {(j.chart, j.verifier, j.verifier_version): j
                for j in session.scalars(select(Job).where(Job.revision_id == rev.id))}
    timings = measured_seconds(session, rev)
    for chart, body in rev.document["charts"].items():
        priority = chart_priority(body, timings.get(chart))
        for name, version in chosen:
            key = (chart, name, version)
            job = existing.get(key)
            if job is not None and job.state in (JobState.PENDING, JobState.RUNNING):
                out.queued += 1
            elif not force and (job is not None or key in stored):
                out.up_to_date += 1
            elif job is not None:
                job.state, job.attempts, job.max_attempts, job.budget, job.priority = (
                    JobState.PENDING, 0, max_attempts, budget, priority)
                job.token = job.lease_until = job.error = job.finished_at = job.started_at = None
                out.rearmed += 1
            else:
                session.add(Job(revision_id=rev.id, chart=chart, verifier=name, verifier_version=version,
                                state=JobState.PENDING, priority=priority, budget=budget, attempts=0,
                                max_attempts=max_attempts))
                out.added += 1
    session.flush()
    return out


# --------------------------------------------------------------------------- status


def _clock_offset(engine: Engine) -> dt.timedelta:
    """Server clock minus this machine's clock (zero for SQLite, which is on this machine)."""
    if engine.dialect.name != "postgresql":
        return dt.timedelta(0)
    with engine.connect() as conn:
        before = _utcnow()
        server = conn.execute(select(func.clock_timestamp())).scalar_one()
        after = _utcnow()
    return server - (before + (after - before) / 2)


def _job_json(job: Job, slug: str, digest: str, now: dt.datetime) -> dict[str, Any]:
    return {"id": job.id, "entry": slug, "revision": digest, "chart": job.chart, "verifier": job.verifier,
            "version": job.verifier_version, "state": job.state.value, "attempts": job.attempts,
            "max_attempts": job.max_attempts, "worker": job.worker,
            "lease_until": job.lease_until.isoformat() if job.lease_until else None,
            "lease_expired": bool(job.state == JobState.RUNNING and job.lease_until is not None
                                  and job.lease_until < now),
            "error": job.error}


def counts(session: Session) -> dict[str, int]:
    """Number of jobs in each state (every state present, zero when none)."""
    found = dict(session.execute(select(Job.state, func.count(Job.id)).group_by(Job.state)).all())
    return {s.value: int(found.get(s, 0)) for s in JobState}


def summary(session: Session) -> dict[str, Any]:
    """Counts by state, plus the running and the failed jobs (the JSON of ``gravicat queue --json``)."""
    now = _utcnow() + _clock_offset(session.get_bind())
    out: dict[str, Any] = counts(session)
    out["total"] = sum(out[s] for s in STATES)
    listed = {}
    for state in (JobState.RUNNING, JobState.FAILED):
        rows = session.execute(select(Job, Entry.slug, Revision.hash).join(Revision, Job.revision_id == Revision.id)
                               .join(Entry, Revision.entry_id == Entry.id).where(Job.state == state)
                               .order_by(Entry.slug, Job.chart, Job.verifier)).all()
        listed[state] = [_job_json(job, slug, digest, now) for job, slug, digest in rows]
    out["expired"] = sum(1 for j in listed[JobState.RUNNING] if j["lease_expired"])
    out["running_jobs"] = listed[JobState.RUNNING]
    out["failed_jobs"] = listed[JobState.FAILED]
    return out


def retry_failed(session: Session) -> int:
    """Put every failed job back in the queue with fresh attempts; returns how many."""
    result = session.execute(update(Job).where(Job.state == JobState.FAILED)
                             .values(state=JobState.PENDING, attempts=0, token=None, lease_until=None,
                                     finished_at=None)
                             .execution_options(synchronize_session=False))
    return result.rowcount or 0


# --------------------------------------------------------------------------- worker


@dataclass(frozen=True)
class ClaimedJob:
    id: int
    verifier: str
    version: str
    attempts: int  # including this claim
    max_attempts: int


@dataclass
class Claim:
    """Jobs of one chart of one revision, held by one worker under one token."""

    token: str
    revision_id: int
    slug: str
    hash: str
    document: dict[str, Any]
    chart: str
    budget: float
    jobs: list[ClaimedJob] = field(default_factory=list)


@dataclass
class WorkerStats:
    """What a worker did: jobs ``done``, ``failed``, ``retried`` (crashed, back in the queue),
    ``abandoned`` (failed after their lease expired on the last attempt), ``lost`` (our lease ran
    out and the result was discarded) and ``claims`` (chart groups claimed)."""

    done: int = 0
    failed: int = 0
    retried: int = 0
    abandoned: int = 0
    lost: int = 0
    claims: int = 0

    def add(self, other: WorkerStats | Mapping[str, int]) -> None:
        values = other if isinstance(other, Mapping) else other.to_json()
        for name, value in values.items():
            setattr(self, name, getattr(self, name) + value)

    def to_json(self) -> dict[str, int]:
        return {"done": self.done, "failed": self.failed, "retried": self.retried, "abandoned": self.abandoned,
                "lost": self.lost, "claims": self.claims}


class _TakenOver(Exception):
    """Internal: a job of the claim is no longer held by it."""


def _revision_ref(claim: Claim) -> Revision:
    """A transient stand-in for the claimed revision: :func:`gravicat.store.revisions.save_results` needs
    only its id, and loading the row (with its whole document) again would cost a round trip."""
    return Revision(id=claim.revision_id)


class _CatalogueDocs(Mapping):
    """The latest revision of each entry, read on demand (for ``reduces-to`` limits)."""

    def __init__(self, engine: Engine, own):
        self.engine, self.own, self.cache = engine, own, {own.id: own}

    def get(self, slug, default=None):
        if slug not in self.cache:
            from gravicat.format.metricfile import MetricDocument

            with Session(self.engine) as session:
                rev = store.head(session, slug)
                self.cache[slug] = (MetricDocument(rev.document, f"catalogue:{slug}@{rev.hash[:12]}")
                                    if rev is not None else None)
        return self.cache[slug] if self.cache[slug] is not None else default

    def __getitem__(self, slug):
        found = self.get(slug)
        if found is None:
            raise KeyError(slug)
        return found

    def __iter__(self) -> Iterator[str]:
        return iter([k for k, v in self.cache.items() if v is not None])

    def __len__(self) -> int:
        return sum(1 for v in self.cache.values() if v is not None)


class _Heartbeat(threading.Thread):
    """Renews the lease of a claim until stopped; notes when the claim was taken away."""

    def __init__(self, worker: Worker, claim: Claim):
        super().__init__(name=f"lease-{claim.token[:8]}", daemon=True)
        self.worker, self.token, self.stopped, self.lost = worker, claim.token, threading.Event(), False

    def run(self) -> None:
        interval = max(0.05, self.worker.lease / 4)
        while not self.stopped.wait(interval):
            try:
                with self.worker.engine.begin() as conn:
                    renewed = conn.execute(self.worker.sql.renew, {
                        "claim_token": self.token, "lease_end": self.worker.now() + self.worker.lease_delta}).rowcount
            except Exception:  # a passing database failure: the next beat tries again before the lease ends
                continue
            if not renewed:
                self.lost = True
                return

    def stop(self) -> None:
        self.stopped.set()
        self.join()


class _Statements:
    """A worker's statements, built once: building SQLAlchemy expressions costs more than
    running them, and a claim should cost a few round trips and nothing else."""

    def __init__(self, keys: list[tuple[str, str]]):
        now = bindparam("now_", type_=Job.lease_until.type)
        ids = bindparam("ids", expanding=True)
        token = bindparam("claim_token")
        running = Job.state == JobState.RUNNING
        mine = tuple_(Job.verifier, Job.verifier_version).in_(keys)
        claimable = and_(or_(Job.state == JobState.PENDING, and_(running, Job.lease_until < now)), mine)
        self.first = (select(Job.revision_id, Job.chart, Job.budget, Revision.document, Revision.hash, Entry.slug)
                      .join(Revision, Job.revision_id == Revision.id).join(Entry, Revision.entry_id == Entry.id)
                      .where(claimable).order_by(Job.attempts, Job.priority.desc(), Job.id).limit(1)
                      .with_for_update(skip_locked=True, of=Job))
        self.group = (select(Job.id, Job.verifier, Job.verifier_version, Job.state, Job.attempts, Job.max_attempts)
                      .where(claimable, Job.revision_id == bindparam("rid"), Job.chart == bindparam("chart_"),
                             Job.budget == bindparam("budget_"))
                      .order_by(Job.id).with_for_update(skip_locked=True))
        # PostgreSQL: the whole claim in one statement (two fewer round trips per claim)
        top = (select(Job.revision_id, Job.chart, Job.budget).where(claimable)
               .order_by(Job.attempts, Job.priority.desc(), Job.id).limit(1)
               .with_for_update(skip_locked=True).cte("first_job"))
        group = (select(Job.id).join(top, and_(Job.revision_id == top.c.revision_id, Job.chart == top.c.chart,
                                               Job.budget == top.c.budget))
                 .where(claimable).with_for_update(skip_locked=True, of=Job).cte("claimed"))
        self.claim_returning = (
            update(Job).where(Job.id == group.c.id, Revision.id == Job.revision_id, Entry.id == Revision.entry_id)
            .values(state=JobState.RUNNING, attempts=Job.attempts + 1, token=token,
                    worker=bindparam("worker_name"), lease_until=bindparam("lease_end"), started_at=now)
            .returning(Job.id, Job.verifier, Job.verifier_version, Job.attempts, Job.max_attempts,
                       Job.revision_id, Job.chart, Job.budget, Revision.document, Revision.hash, Entry.slug))
        self.take = (update(Job).where(Job.id.in_(ids))
                     .values(state=JobState.RUNNING, attempts=Job.attempts + 1, token=token,
                             worker=bindparam("worker_name"), lease_until=bindparam("lease_end"), started_at=now))
        self.settle = (update(Job).where(Job.id.in_(ids), Job.token == token, running)
                       .values(state=bindparam("new_state"), token=None, lease_until=None,
                               error=bindparam("new_error"), finished_at=bindparam("finish_time")))
        self.renew = update(Job).where(Job.token == token, running).values(lease_until=bindparam("lease_end"))
        self.release = (update(Job).where(Job.token == token, running)
                        .values(state=JobState.PENDING, attempts=Job.attempts - 1, token=None, lease_until=None))
        self.held = select(Job.id).where(Job.id.in_(ids), Job.token == token, running)
        self.outstanding = select(func.count(Job.id)).where(Job.state.in_([JobState.PENDING, JobState.RUNNING]),
                                                             mine)


class Worker:
    """Claims and runs jobs from the catalogue at ``engine`` with the verifiers of ``plugins``.

    The worker only claims jobs whose verifier name and version it has, so machines with
    different plugin versions can share one queue. ``echo`` receives one line per finished
    chart group.
    """

    def __init__(self, engine: Engine, plugins: pluggy.PluginManager, *, lease: float = DEFAULT_LEASE,
                 name: str | None = None, echo: Callable[[str], None] | None = None):
        from gravicat.registry import verifiers

        if lease <= 0:
            raise ValueError("lease must be positive")
        self.engine = engine
        self.verifiers = verifiers(plugins)
        self.keys = [(key, v.version) for key, v in self.verifiers.items()]
        self.sql = _Statements(self.keys)
        self.lease = float(lease)
        self.lease_delta = dt.timedelta(seconds=self.lease)
        self.name = name or f"{socket.gethostname()}:{os.getpid()}"
        self.echo = echo or (lambda line: None)
        self.offset = _clock_offset(engine)
        self.stats = WorkerStats()

    def now(self) -> dt.datetime:
        """The database server's time."""
        return _utcnow() + self.offset

    # ---- one claim

    def claim(self) -> Claim | None:
        """Claim the next group of jobs (None when nothing is claimable now)."""
        if not self.keys:
            return None
        with self.engine.begin() as conn:  # Core, not the ORM: a claim is a few plain statements
            return self._claim_on(conn, self.now())

    def _claim_on(self, conn, now: dt.datetime) -> Claim | None:
        """The claim, on ``conn`` inside its transaction (which the caller commits)."""
        token = uuid.uuid4().hex
        if conn.dialect.name == "postgresql":
            rows = conn.execute(self.sql.claim_returning, {
                "now_": now, "claim_token": token, "worker_name": self.name,
                "lease_end": now + self.lease_delta}).all()
            if not rows:
                return None
            head = rows[0]
            claimed = [ClaimedJob(r.id, r.verifier, r.verifier_version, r.attempts, r.max_attempts)
                       for r in sorted(rows, key=lambda r: r.id)]
        else:  # the same in three statements; BEGIN IMMEDIATE makes them one claim at a time
            head = conn.execute(self.sql.first, {"now_": now}).first()
            if head is None:
                return None
            rows = conn.execute(self.sql.group, {"now_": now, "rid": head.revision_id, "chart_": head.chart,
                                                 "budget_": head.budget}).all()
            conn.execute(self.sql.take, {"ids": [r.id for r in rows], "claim_token": token,
                                         "worker_name": self.name, "lease_end": now + self.lease_delta,
                                         "now_": now})
            claimed = [ClaimedJob(r.id, r.verifier, r.verifier_version, r.attempts + 1, r.max_attempts)
                       for r in rows]
        claim = Claim(token=token, revision_id=head.revision_id, slug=head.slug, hash=head.hash,
                      document=head.document, chart=head.chart, budget=head.budget)
        # a job claimed again after its lease expired on its last attempt: its workers keep dying
        abandoned = [job for job in claimed if job.attempts > job.max_attempts]
        if abandoned:
            with Session(bind=conn) as session:  # joins this transaction; committed with it
                for job in abandoned:
                    message = (f"the worker running it stopped (killed, crashed or out of memory) on each of "
                               f"{job.max_attempts} attempts; the last lease expired")
                    store.save_results(session, _revision_ref(claim), claim.chart, [CheckResult(
                        check=job.verifier, status=Status.ERROR, method=Method.NONE, detail=message,
                        verifier=job.verifier, version=job.version)])
                    conn.execute(update(Job).where(Job.id == job.id).values(
                        state=JobState.FAILED, attempts=job.max_attempts, error=message, token=None,
                        lease_until=None, finished_at=now))
            self.stats.abandoned += len(abandoned)
        claim.jobs = [job for job in claimed if job not in abandoned]
        self.stats.claims += 1
        return claim

    def execute(self, claim: Claim) -> dict[int, list[CheckResult]]:
        """Run the claimed verifiers on the chart (one shared Geometry); results by job id."""
        from gravicat.engine.runner import BundledDocuments, check_chart, make_resolver
        from gravicat.format.metricfile import MetricDocument

        doc = MetricDocument(claim.document, f"catalogue:{claim.slug}@{claim.hash[:12]}")
        by_name = {job.verifier: job for job in claim.jobs}
        out: dict[int, list[CheckResult]] = {job.id: [] for job in claim.jobs}
        try:
            # targets: the document itself, the user's catalogue, then the bundled catalogue (as check does)
            targets = BundledDocuments([doc], _CatalogueDocs(self.engine, doc))
            report = check_chart(doc, claim.chart, [self.verifiers[job.verifier] for job in claim.jobs],
                                 resolve=make_resolver(targets), budget=claim.budget)
        except Exception as exc:  # the chart itself could not be prepared: every job of it crashed
            message = f"the chart could not be prepared: {_message(exc)}"
            for job in claim.jobs:
                out[job.id] = [CheckResult(check=job.verifier, status=Status.ERROR, method=Method.NONE,
                                           detail=message, verifier=job.verifier, version=job.version)]
            return out
        for result in report.results:
            out[by_name[result.verifier].id].append(result)
        return out

    def finish(self, claim: Claim, outcome: dict[int, list[CheckResult]], *,
               claim_next: bool = False) -> Claim | None:
        """Store results and mark jobs done, retried or failed, for the jobs this claim still holds.

        One UPDATE per outcome guarded by the claim's token, then the results, in one
        transaction; if a job was taken over meanwhile (our lease ran out), the transaction
        is rolled back and redone for the jobs still held only. With ``claim_next`` the
        next claim is made in the same transaction (one commit per job instead of two)
        and returned.
        """
        now = self.now()
        plan: dict[tuple[JobState, str | None], list[ClaimedJob]] = {}
        for job in claim.jobs:
            crashes = [r.detail for r in outcome[job.id] if Status(r.status) == Status.ERROR]
            error = "; ".join(crashes)[:2000] if crashes else None
            if crashes and job.attempts < job.max_attempts:
                state = JobState.PENDING
            else:
                state = JobState.FAILED if crashes else JobState.DONE
            plan.setdefault((state, error), []).append(job)
        held, following = self._settle(claim, outcome, plan, now, None, claim_next)
        for _ in range(3):
            if held is not None:
                break
            # some job was taken over: find out which, then settle those we still hold
            with self.engine.connect() as conn:
                still = set(conn.scalars(self.sql.held, {"ids": [j.id for j in claim.jobs],
                                                         "claim_token": claim.token}))
            held, _ = self._settle(claim, outcome, plan, now, still, False)
        held = held or set()
        for (state, _), jobs in plan.items():
            kept = sum(1 for job in jobs if job.id in held)
            self.stats.lost += len(jobs) - kept
            if state == JobState.PENDING:
                self.stats.retried += kept
            elif state == JobState.FAILED:
                self.stats.failed += kept
            else:
                self.stats.done += kept
        return following

    def _settle(self, claim: Claim, outcome, plan, now: dt.datetime, only: set[int] | None,
                claim_next: bool) -> tuple[set[int] | None, Claim | None]:
        """One transaction: mark the planned jobs (restricted to ``only``), store their results and,
        with ``claim_next``, claim the next jobs. Returns (settled job ids, next claim), or
        (None, None) with nothing written when a job was no longer ours."""
        settled: set[int] = set()
        following = None
        try:
            with Session(self.engine) as session, session.begin():
                conn = session.connection()
                keep: list[CheckResult] = []
                for (state, error), jobs in plan.items():
                    ids = [job.id for job in jobs if only is None or job.id in only]
                    if not ids:
                        continue
                    if state != JobState.PENDING:
                        keep.extend(r for job in jobs if job.id in ids for r in outcome[job.id])
                    marked = conn.execute(self.sql.settle, {
                        "ids": ids, "claim_token": claim.token, "new_state": state, "new_error": error,
                        "finish_time": None if state == JobState.PENDING else now}).rowcount
                    if marked != len(ids):
                        raise _TakenOver
                    settled.update(ids)
                if keep:
                    store.save_results(session, _revision_ref(claim), claim.chart, keep)
                if claim_next:
                    session.flush()
                    following = self._claim_on(conn, now)
        except _TakenOver:  # rolled back: nothing of this attempt was written
            return None, None
        return settled, following

    def release(self, claim: Claim) -> None:
        """Give the claimed jobs back untried (the worker is stopping)."""
        with self.engine.begin() as conn:
            conn.execute(self.sql.release, {"claim_token": claim.token})

    def run(self, claim: Claim, *, claim_next: bool = False) -> Claim | None:
        """Execute a claim under a heartbeat and store its outcome; with ``claim_next``, return the
        next claim, made in the same transaction."""
        start = time.perf_counter()
        beat = _Heartbeat(self, claim)
        beat.start()
        try:
            outcome = self.execute(claim)
        except BaseException:  # KeyboardInterrupt or SystemExit (SIGTERM): hand the jobs back
            beat.stop()
            self.release(claim)
            raise
        beat.stop()
        before = self.stats.to_json()
        try:
            following = self.finish(claim, outcome, claim_next=claim_next)
        except BaseException:  # interrupted while storing: the transaction was rolled back
            self.release(claim)
            raise
        after = self.stats.to_json()
        change = ", ".join(f"{after[k] - before[k]} {k}" for k in ("done", "retried", "failed", "lost")
                           if after[k] != before[k])
        self.echo(f"{self.name}: {claim.slug}/{claim.chart}: {change or 'nothing'} "
                  f"({len(claim.jobs)} verifier(s), {time.perf_counter() - start:.1f} s)")
        return following

    # ---- the loop

    def outstanding(self) -> int:
        """Pending or running jobs this worker could run."""
        if not self.keys:
            return 0
        with self.engine.connect() as conn:
            return conn.scalar(self.sql.outstanding) or 0

    def work(self, *, once: bool = False, poll: float = DEFAULT_POLL,
             stop: threading.Event | None = None) -> WorkerStats:
        """Claim and run jobs until ``stop`` is set; with ``once``, until no job is pending or running.

        With ``once`` the worker also waits for jobs other workers are running, so a job whose
        worker dies is still finished (after its lease expires) before the command returns.
        """
        stop = stop or threading.Event()
        claim = None
        try:
            while not stop.is_set():
                claim = claim or self.claim()
                if claim is None:
                    if once and not self.outstanding():
                        break
                    stop.wait(poll)
                    continue
                current, claim = claim, None
                if current.jobs:
                    claim = self.run(current, claim_next=True)
        finally:
            if claim is not None and claim.jobs:  # claimed with the last results but not started
                self.release(claim)
        return self.stats


@contextmanager
def _sigterm_stops() -> Iterator[None]:
    """SIGTERM raises SystemExit in the main thread (so claimed jobs are handed back), then is restored."""
    import signal

    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def handler(signum, frame):  # noqa: ARG001
        raise SystemExit(128 + signum)

    previous = signal.signal(signal.SIGTERM, handler)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _child(url: str, plugins: Callable[[], pluggy.PluginManager], options: dict[str, Any], results) -> None:
    import sys

    from sqlalchemy.exc import OperationalError

    from gravicat.errors import CatalogError
    from gravicat.store.db import make_engine

    engine = None
    try:
        with _sigterm_stops():
            engine = make_engine(url)
            worker = Worker(engine, plugins(), lease=options["lease"], echo=options["echo"])
            stats = worker.work(once=options["once"], poll=options["poll"])
        results.put(("ok", stats.to_json()))
    except (CatalogError, OperationalError) as exc:  # reported by the parent as one line
        results.put(("error", _message(getattr(exc, "orig", None) or exc)))
        sys.exit(1)
    except KeyboardInterrupt:
        sys.exit(130)
    finally:
        if engine is not None:
            engine.dispose()


def run_workers(url: str, count: int, plugins: Callable[[], pluggy.PluginManager], *, once: bool = False,
                lease: float = DEFAULT_LEASE, poll: float = DEFAULT_POLL,
                echo: Callable[[str], None] | None = None, engine: Engine | None = None) -> WorkerStats:
    """Run ``count`` workers on this machine (1: in this process; more: forked processes).

    ``plugins`` makes the plugin manager in each worker. SIGTERM or Ctrl-C stops the
    workers; the jobs they hold go back to the queue untried.
    """
    from gravicat.errors import CatalogError
    from gravicat.store.db import make_engine

    if count == 1:
        own = engine is None
        engine = engine or make_engine(url)
        try:
            with _sigterm_stops():
                return Worker(engine, plugins(), lease=lease, echo=echo).work(once=once, poll=poll)
        finally:
            if own:
                engine.dispose()
    import multiprocessing

    if engine is not None:
        engine.dispose()  # connections must not be shared with forked children
    context = multiprocessing.get_context("fork")
    results = context.SimpleQueue()
    options = {"once": once, "lease": lease, "poll": poll, "echo": echo}
    children = [context.Process(target=_child, args=(url, plugins, options, results), name=f"worker-{i}")
                for i in range(count)]
    for child in children:
        child.start()
    try:
        for child in children:
            child.join()
    except BaseException:
        for child in children:
            if child.is_alive():
                child.terminate()  # SIGTERM: the child hands its jobs back
        for child in children:
            child.join()
        raise
    total, errors = WorkerStats(), []
    while not results.empty():
        kind, value = results.get()
        if kind == "ok":
            total.add(value)
        else:
            errors.append(value)
    failed = [child for child in children if child.exitcode]
    if errors or failed:
        reason = errors[0] if errors else f"exit code {failed[0].exitcode}"
        raise CatalogError(f"{len(failed) or len(errors)} of {count} worker processes stopped: {reason}")
    return total
