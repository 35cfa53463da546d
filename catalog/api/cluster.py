"""Verification on a Dask cluster: the units of :mod:`gravicat.api.verifying`, run by Dask workers.

The unit of work is one (revision, chart) with the verifiers that still need results for its
content, exactly as :func:`gravicat.api.verifying.units_for` describes it. A Dask worker runs a
unit with :func:`gravicat.api.verifying.run_units` (one unit, one forked child through
:mod:`gravicat.engine.fork`, under the same CPU-second cap as a local run), so the budget, the
isolation and the results of a unit that reaches its cap are the same code as ``verify --jobs``.

Results stream back as units complete (``distributed.as_completed``); the client stores each unit
in its own transaction (:func:`store_output`). Storage is idempotent on (content, chart, verifier,
verifier version): a unit whose results are already stored (an earlier, interrupted run, or another
client) adds nothing. A unique constraint cannot say this (one verifier stores several results per
chart, and ``--force`` appends newer rows), so the check is made inside the storing transaction,
after locking the revision's row (PostgreSQL ``SELECT ... FOR UPDATE``; SQLite's write transactions
are serialised already).

Faults: a worker that dies mid-unit has its unit rescheduled by the scheduler; a unit that has
killed ``allowed-failures`` workers (the scheduler's setting, 3 by default) ends with every
verifier ``error`` and a message, and is not tried again. A scheduler that cannot be reached, or
is lost mid-run, is a :class:`gravicat.errors.ClusterError` (one line, exit 2); what was stored
stays stored, and running the same command again resumes.

Addresses: ``tcp://HOST:PORT`` (or ``tls://``, ``ws://``...) names a running scheduler;
``local:N`` starts a local cluster of N worker processes (one thread each) for the command and
stops it at the end.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from gravicat.errors import CatalogError, ClusterError, InputError

CONNECT_TIMEOUT = 10.0  # seconds to reach a scheduler before giving up


@dataclass
class ClusterRun:
    """What a run on a cluster did (the ``cluster`` part of ``verify --json``)."""

    address: str
    units: int = 0  # units submitted
    done: int = 0  # units that came back (stored, or already stored)
    stored: int = 0  # units whose results this run stored
    failures: list[str] = field(default_factory=list)  # one line per unit that ended in error
    workers: int = 0  # workers seen when the run started
    seconds: float = 0.0  # elapsed, connecting included
    run_seconds: float = 0.0  # elapsed from the first unit submitted to the last one back
    unit_seconds: float = 0.0  # sum of the units' own elapsed time in the workers

    def to_json(self) -> dict[str, Any]:
        return {"address": self.address, "units": self.units, "done": self.done, "stored": self.stored,
                "failures": list(self.failures), "workers": self.workers, "seconds": round(self.seconds, 3),
                "run_seconds": round(self.run_seconds, 3), "unit_seconds": round(self.unit_seconds, 3)}


def parse_address(text: str) -> tuple[str, int | str]:
    """``("local", N)`` for ``local:N``, ``("scheduler", ADDRESS)`` for a scheduler URL; else an InputError."""
    text = text.strip()
    if text.startswith("local:"):
        count = text[len("local:"):]
        if not count.isdigit() or int(count) < 1:
            raise InputError("--cluster", None, f"'{text}': expected local:N with N >= 1 worker processes")
        return "local", int(count)
    scheme, sep, rest = text.partition("://")
    if not sep or not scheme.isalnum() or not rest or rest.startswith(":"):
        raise InputError("--cluster", None, f"'{text}': expected a Dask scheduler address such as "
                                            "tcp://host:8786, or local:N")
    return "scheduler", text


# --------------------------------------------------------------------------- worker side

_WORKER_VERIFIERS: dict[tuple[str, ...], dict[str, Any]] = {}


def work_unit(unit: dict[str, Any], docs: dict[str, Any], versions: dict[str, str]) -> dict[str, Any]:
    """Run one unit in a Dask worker (the same code as a local run: one forked child under the
    unit's CPU-second cap); ``docs`` is the catalogue's documents, sent once per run."""
    import multiprocessing
    import os
    import socket

    from gravicat.api.verifying import run_units
    from gravicat.registry import make_plugin_manager, verifiers

    start = time.perf_counter()
    key = tuple(unit["blocked"])
    if key not in _WORKER_VERIFIERS:  # the plugins once per worker process
        _WORKER_VERIFIERS[key] = verifiers(make_plugin_manager(blocked=unit["blocked"]))
    loaded = _WORKER_VERIFIERS[key]
    where = f"{socket.gethostname()}:{os.getpid()}"
    wrong = [f"{name} {versions[name]} (this worker: {loaded[name].version if name in loaded else 'none'})"
             for name in unit["verifiers"] if name not in loaded or loaded[name].version != versions[name]]
    if wrong:  # never store a result under another version than the one asked for
        return {"key": unit["key"], "chart": unit["chart"], "refused":
                f"worker {where} has other plugins than the client: {', '.join(wrong)}", "seconds": 0.0}
    chosen = [loaded[name] for name in unit["verifiers"]]
    # A worker started by a nanny is a daemonic process, and multiprocessing refuses children to
    # those; the unit's child is capped and killed with its process group by engine.fork, so it is
    # allowed here for the duration of the unit.
    me = multiprocessing.current_process()
    daemonic = me.daemon
    if daemonic:
        me.daemon = False
    try:
        out = run_units([unit | {"docs": docs}], 1, chosen)[0]
    finally:
        if daemonic:
            me.daemon = True
    out["worker"] = where
    out["seconds"] = time.perf_counter() - start
    return out


def _documents(docs: dict[str, Any]) -> dict[str, Any]:
    """The catalogue's documents as a task result, shared by every unit of a run."""
    return docs


# --------------------------------------------------------------------------- client side


def store_output(session, out: dict[str, Any], *, force: bool) -> int:
    """Store one unit's results in ``session`` (one transaction per unit); the number of results added.

    Idempotent on (content, chart, verifier, version): results already stored for this content are
    not stored again (with ``force`` only those stored by this same run are skipped: the caller gives
    each unit once). The revision's row is locked first, so two clients storing the same unit at the
    same moment store it once.
    """
    from sqlalchemy import select

    from gravicat.engine.runner import result_from_json
    from gravicat.store import revisions as store

    session.execute(select(store.Revision.id).where(store.Revision.id == out["key"]).with_for_update())
    rev = session.get(store.Revision, out["key"])
    have = set() if force else store.stored_versions(session, rev)
    results = [result_from_json(r) for r in out["results"]
               if (out["chart"], r.get("verifier", ""), r.get("version", "")) not in have]
    store.save_results(session, rev, out["chart"], results)
    return len(results)


def _killed_output(unit: dict[str, Any], versions: dict[str, str], reason: str) -> dict[str, Any]:
    """Every verifier of ``unit`` ``error``: the unit kept killing its workers."""
    from gravicat.checks import CheckResult, Method, Status

    return {"key": unit["key"], "chart": unit["chart"], "path": "", "seconds": 0.0,
            "results": [CheckResult(check=name, status=Status.ERROR, method=Method.NONE, detail=reason,
                                    verifier=name, version=versions[name]).to_json() | {"data": {}}
                        for name in unit["verifiers"]]}


def _unit_name(unit: dict[str, Any]) -> str:
    return f"{unit['source'].removeprefix('catalogue:').partition('@')[0]}:{unit['chart']}"


def verify_units(address: str, units: list[dict[str, Any]], versions: dict[str, str], *,
                 store: Callable[[dict[str, Any]], int],
                 progress: Callable[[ClusterRun], None] | None = None,
                 work: Callable[..., dict[str, Any]] = work_unit,
                 timeout: float = CONNECT_TIMEOUT) -> ClusterRun:
    """Run ``units`` on the cluster at ``address`` and ``store`` each as it completes.

    ``versions``: verifier name -> version the client expects (a worker with other plugins refuses
    the unit). ``store(output)`` stores one unit in one transaction and returns the number of results
    added. ``progress(run)`` is called after each unit. ``work`` is the function the workers run
    (:func:`work_unit`; the tests give one that kills its worker).
    """
    import logging

    import dask
    import distributed  # noqa: F401 - its import sets the levels of its loggers: before they are quietened

    kind, where = parse_address(address)
    run = ClusterRun(address=address, units=len(units))
    start = time.perf_counter()
    # the client's own warnings and tracebacks (a lost scheduler is logged at ERROR by
    # distributed.client, whose level Dask's logging config sets apart) would break the one-line
    # contract: every distributed logger is quiet for the run, and restored afterwards
    quiet = [logging.getLogger("distributed")] + [
        logging.getLogger(name) for name in list(logging.Logger.manager.loggerDict) if name.startswith("distributed.")]
    levels = [(logger, logger.level) for logger in quiet]
    for logger in quiet:
        logger.setLevel(logging.CRITICAL + 1)
    try:
        with dask.config.set({"distributed.comm.timeouts.connect": f"{timeout}s",
                              "distributed.worker.daemon": False}):
            client, cluster = _connect(kind, where, address, timeout)
            try:
                run.workers = len(client.scheduler_info(n_workers=-1).get("workers", {}))
                if units:
                    _run(client, units, versions, store, progress, work, run, address)
            finally:
                _close(client, cluster)
    finally:
        for logger, level in levels:
            logger.setLevel(level)
    run.seconds = time.perf_counter() - start
    return run


def _connect(kind: str, where, address: str, timeout: float):
    import logging

    from distributed import Client, LocalCluster

    cluster = None
    try:
        if kind == "local":
            # no dashboard; its HTTP server (always started) on a free port, not the usual 8787
            cluster = LocalCluster(n_workers=where, threads_per_worker=1, processes=True, dashboard_address=None,
                                   scheduler_kwargs={"dashboard": False, "dashboard_address": "127.0.0.1:0"},
                                   host="127.0.0.1", silence_logs=logging.CRITICAL)
            return Client(cluster, timeout=timeout), cluster
        return Client(where, timeout=timeout), None
    except (OSError, TimeoutError) as exc:
        if cluster is not None:
            cluster.close()
        reason = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise ClusterError(f"--cluster {address}: cannot reach the Dask scheduler ({reason}); "
                           "is 'dask scheduler' running there?") from None


def _close(client, cluster) -> None:
    try:
        client.close(timeout=5)
    except Exception:  # noqa: BLE001 - a lost scheduler cannot be said goodbye to
        pass
    if cluster is not None:
        cluster.close(timeout=15)


def _run(client, units, versions, store, progress, work, run: ClusterRun, address: str) -> None:
    import uuid

    from distributed import as_completed
    from distributed.client import FutureCancelledError
    from distributed.scheduler import KilledWorker

    shared = units[0].get("docs", {})
    start = time.perf_counter()
    try:
        # the catalogue's documents once per run, as a task (not scattered data): when the worker
        # holding them dies, the scheduler computes them again instead of losing every unit
        docs = client.submit(_documents, shared, key=f"gravicat-documents-{uuid.uuid4().hex[:8]}", pure=False)
        futures, by_key = [], {}
        for unit in units:
            light = {k: v for k, v in unit.items() if k != "docs"}
            fut = client.submit(work, light, docs, versions, key=f"verify-{_unit_name(unit)}-{uuid.uuid4().hex[:8]}",
                                priority=len(str(unit["document"]["charts"][unit["chart"]])), pure=False)
            futures.append(fut)
            by_key[fut.key] = unit
        for fut in as_completed(futures):
            unit = by_key[fut.key]
            try:
                out = fut.result()
            except KilledWorker as exc:
                limit = getattr(exc, "allowed_failures", None) or "the scheduler's allowed-failures"
                out = _killed_output(unit, versions, f"the unit ended its Dask worker process too often "
                                                     f"({limit} times) and was not tried again")
            except CatalogError as exc:  # e.g. a chart that cannot be built: said once, nothing stored
                run.done += 1
                run.failures.append(f"{_unit_name(unit)}: {exc}")
                _report(progress, run)
                continue
            if "refused" in out:
                run.done += 1
                run.failures.append(f"{_unit_name(unit)}: {out['refused']}")
                _report(progress, run)
                continue
            run.unit_seconds += float(out.get("seconds") or 0.0)
            if store(out):
                run.stored += 1
            run.done += 1
            if any(r["status"] == "error" for r in out["results"]) and out.get("worker") is None:
                run.failures.append(f"{_unit_name(unit)}: {out['results'][0]['detail']}")
            _report(progress, run)
            fut.release()
        run.run_seconds = time.perf_counter() - start
    except (OSError, TimeoutError, FutureCancelledError) as exc:
        if isinstance(exc, FutureCancelledError):  # the client cancels every future when its scheduler is gone
            reason = "the connection was lost" if "connection-lost" in str(exc) else "the run was cancelled"
        else:
            reason = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise ClusterError(f"--cluster {address}: lost the Dask scheduler after {run.done} of {run.units} "
                           f"unit(s) ({reason}); what was stored stays stored: run the command again to "
                           "resume") from None


def _report(progress, run: ClusterRun) -> None:
    if progress is not None:
        progress(run)
