"""Test-only verifiers and the process entry points of the queue and concurrency tests.

Run as a script, this module is one separate process, started the way a user on
another machine starts a worker (it needs only the database URL)::

    python tests/queue_helpers.py worker URL --plugins tally [--lease S] [--once] [--go FILE]
    python tests/queue_helpers.py add URL PREFIX COUNT [--shared N] [--go FILE]

``--go FILE`` waits until FILE exists before starting, so that several processes
really start together. The fake verifiers append one line per execution to the file
named by ``GRAVICAT_TEST_QUEUE_LOG`` ("entry chart pid").
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from functools import partial
from pathlib import Path

from gravicat import CheckResult, Method, Status, hookimpl

LOG_ENV = "GRAVICAT_TEST_QUEUE_LOG"
SLOW_ENV = "GRAVICAT_TEST_QUEUE_SLOW"  # entry whose first run blocks, once the file LOG.arm exists

# A small metric file in our own scenario (the Halcyon Reach group's flat test metric).
BASE_DOCUMENT = {
    "title": "Halcyon Reach flat test chart",
    "summary": "Flat spacetime in inertial coordinates (test fixture).",
    "field-equations": "vacuum",
    "tags": ["flat", "test-fixture"],
    "notes": "Used by the test suite only.",
    "references": [{"citation": "C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation, W. H. Freeman (1973), "
                                "ch. 6"}],
    "parameters": {"L": {"description": "length scale of the test family", "assume": ["positive"],
                         "range": "L > 0", "default": "1"}},
    "charts": {"inertial": {"coordinates": ["t", "x", "y", "z"], "domain": [],
                            "metric": [["-1", "0", "0", "0"], ["0", "1", "0", "0"], ["0", "0", "1", "0"],
                                       ["0", "0", "0", "1"]]}},
}


def document(slug: str, variant: str = ""):
    """A valid metric document with id ``slug``; a different ``variant`` gives different content."""
    from gravicat.format.metricfile import validate

    data = dict(BASE_DOCUMENT, id=slug, notes=f"Used by the test suite only. {variant}".strip())
    return validate(data, f"test:{slug}")


def _log(line: str) -> None:
    path = os.environ.get(LOG_ENV)
    if path:
        fd = os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
        try:
            os.write(fd, (line + "\n").encode())  # one short O_APPEND write: atomic between processes
        finally:
            os.close(fd)


class Tally:
    """Records each execution; checks that the metric matrix is symmetric (a real, cheap check)."""

    name, version = "tally", "1"

    def check(self, geometry):
        spec = geometry.spec
        _log(f"{spec.entry} {spec.chart} {os.getpid()}")
        if spec.entry == os.environ.get(SLOW_ENV) and os.path.exists(os.environ[LOG_ENV] + ".arm"):
            marker = os.environ[LOG_ENV] + ".slow"
            try:
                fd = os.open(marker, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                pass  # a later attempt: finish at once
            else:
                os.write(fd, str(os.getpid()).encode())
                os.close(fd)
                time.sleep(600)  # the test kills this process meanwhile
        symmetric = spec.metric == spec.metric.T
        return [CheckResult("tally", Status.PASS if symmetric else Status.FAIL, Method.SYMBOLIC,
                            f"metric matrix symmetric: {symmetric}")]


class Crasher:
    name, version = "crasher", "1"

    def check(self, geometry):
        raise RuntimeError(f"deliberate crash in a test verifier on {geometry.spec.entry}")


class TallyPlugin:
    @hookimpl
    def register_verifiers(self):
        return [Tally()]


class CrashPlugin:
    @hookimpl
    def register_verifiers(self):
        return [Crasher()]


PLUGINS = {"tally": TallyPlugin, "crash": CrashPlugin}


def plugin_manager(names: str = "tally"):
    from gravicat.registry import make_plugin_manager

    return make_plugin_manager(autoload=False, extra=[PLUGINS[n]() for n in names.split(",")])


def _wait_for(go: str | None) -> None:
    if go:
        deadline = time.monotonic() + 120
        while not Path(go).exists() and time.monotonic() < deadline:
            time.sleep(0.01)


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser()
    sub = parser.add_subparsers(dest="cmd", required=True)
    w = sub.add_parser("worker")
    w.add_argument("url")
    w.add_argument("--plugins", default="tally")
    w.add_argument("--lease", type=float, default=60.0)
    w.add_argument("--poll", type=float, default=0.05)
    w.add_argument("--once", action="store_true")
    w.add_argument("--go")
    a = sub.add_parser("add")
    a.add_argument("url")
    a.add_argument("prefix")
    a.add_argument("count", type=int)
    a.add_argument("--shared", type=int, default=0, help="every 4th round, also revise one of N shared entries")
    a.add_argument("--go")
    args = parser.parse_args(argv)

    from sqlalchemy.orm import Session

    from gravicat.api import queue
    from gravicat.store import revisions as store
    from gravicat.store.db import make_engine

    if args.cmd == "worker":
        import gravicat.engine.geometry  # noqa: F401  (the heavy imports happen before the common start)

        _wait_for(args.go)
        stats = queue.run_workers(args.url, 1, partial(plugin_manager, args.plugins), once=args.once,
                                  lease=args.lease, poll=args.poll, echo=lambda line: print(line, flush=True))
        print("stats", json.dumps(stats.to_json()), flush=True)
        return 0
    engine = make_engine(args.url)
    docs = [document(f"{args.prefix}-{i:03d}") for i in range(args.count)]
    shared = {i: document(f"shared-{i // 4 % args.shared:02d}", variant=f"{args.prefix} round {i}")
              for i in range(0, args.count, 4)} if args.shared else {}
    _wait_for(args.go)
    for i, doc in enumerate(docs):  # one transaction per entry, as 'gravicat add' does per command
        with Session(engine) as session, session.begin():
            out = store.add_document(session, doc, author=f"test {args.prefix}", message=f"round {i}")
            print("stored", out.slug, out.action, out.number, out.hash, flush=True)
        if i in shared:
            with Session(engine) as session, session.begin():
                out = store.add_document(session, shared[i], author=f"test {args.prefix}", message=f"round {i}")
                print("stored", out.slug, out.action, out.number, out.hash, flush=True)
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(Path(__file__).parent))
    sys.exit(main(sys.argv[1:]))
