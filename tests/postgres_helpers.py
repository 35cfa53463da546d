"""Test documents and the writer process of the concurrency tests (tests/test_postgres.py).

Run as a script, this module is one separate writer process (it needs only the database URL)::

    python tests/postgres_helpers.py add URL PREFIX COUNT [--shared N] [--go FILE]

``--go FILE`` waits until FILE exists before starting, so that several processes really
start together.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

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


def _wait_for(go: str | None) -> None:
    if go:
        deadline = time.monotonic() + 120
        while not Path(go).exists() and time.monotonic() < deadline:
            time.sleep(0.01)


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser()
    sub = parser.add_subparsers(dest="cmd", required=True)
    a = sub.add_parser("add")
    a.add_argument("url")
    a.add_argument("prefix")
    a.add_argument("count", type=int)
    a.add_argument("--shared", type=int, default=0, help="every 4th round, also revise one of N shared entries")
    a.add_argument("--go")
    args = parser.parse_args(argv)

    from sqlalchemy.orm import Session

    from gravicat.store import revisions as store
    from gravicat.store.db import make_engine

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
