"""Site benchmark: render times of the static site (gravicat.api.site) and what a rebuild rewrites.

Not collected by pytest. Run by hand (a few minutes; the machine's load average is printed, since
the 2 cores may be shared):

    python tests/benchmarks/bench_site.py [--entries 1000] [--jobs N]

Printed, each with wall seconds and CPU seconds (this process and its forked children):

* the bundled catalogue (every entry, unverified) rendered into an empty folder; the target is
  "seconds" on an idle 2-core machine;
* a rebuild with nothing changed (no entry rendered, no file written);
* a rebuild after one entry changed (a new revision of ``minkowski`` with another summary): the
  entries rendered and the files written, which must be that entry's page, its metric file and
  the index;
* a synthetic catalogue of ``--entries`` entries (1,000 by default) in a temporary SQLite
  catalogue: variants of the bundled documents under new ids, titles and summaries (so every page
  differs), rendered into an empty folder; the target is under a minute on the 2-core machine.
  The variants of one bundled metric share its computed parts (MathML, orbits: they depend on
  the charts and parameters, not on the names), so the number of computations made is printed
  beside the number of entries: a catalogue of 1,000 distinct metrics computes 1,000 times.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import sys
import tempfile
import time
from pathlib import Path


def _load() -> str:
    return "/".join(f"{x:.2f}" for x in os.getloadavg())


def _cpu() -> float:
    me, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return me.ru_utime + me.ru_stime + kids.ru_utime + kids.ru_stime


def _build(url: str, out: Path, jobs: int):
    from sqlalchemy.orm import Session

    from gravicat.api.site import build_site, collect
    from gravicat.registry import exporters, make_plugin_manager
    from gravicat.store.db import make_engine

    load, wall, cpu = _load(), time.perf_counter(), _cpu()
    engine = make_engine(url)
    with Session(engine) as session:
        entries = collect(session)
    engine.dispose()
    collected = time.perf_counter() - wall
    report = build_site(entries, out, exporters=exporters(make_plugin_manager()), jobs=jobs)
    return report, time.perf_counter() - wall, _cpu() - cpu, collected, load


def _row(what: str, report, wall: float, cpu: float, collected: float, load: str) -> None:
    print(f"{what:<44} {report.entries:>7} {report.computed:>8} {len(report.rendered):>8} {len(report.written):>7} "
          f"{wall:>8.1f} {cpu:>8.1f} {collected:>9.1f}  {load}")


def _variants(count: int) -> list[dict]:
    """``count`` metric documents: the bundled ones in turn under new ids, titles and summaries."""
    from gravicat.format.bundled import iter_bundled_documents

    bundled = sorted((doc.data for doc in iter_bundled_documents()), key=lambda d: d["id"])
    out = []
    for k in range(count):
        data = json.loads(json.dumps(bundled[k % len(bundled)]))
        base = data["id"]
        data["id"] = f"{base}-v{k:04d}"[:80]
        data["title"] = f"{data['title']} (variant {k})"
        data["summary"] = f"Variant {k} of {base} for the site benchmark. " + data.get("summary", "")
        out.append(data)
    return out


def main(argv: list[str] | None = None) -> None:
    from gravicat.api.catalogue import Catalogue
    from gravicat.engine.fork import default_jobs
    from gravicat.format.bundled import bundled_path, read_bundled
    from gravicat.format.metricfile import validate
    from gravicat.store import revisions as store

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--entries", type=int, default=1000)
    ap.add_argument("--jobs", type=int, default=default_jobs())
    args = ap.parse_args(argv)
    os.environ["GRAVICAT_CONFIG"] = os.devnull
    print(f"cores: {os.cpu_count()}; jobs: {args.jobs}; load average at start: {_load()}")
    print(f"{'':<44} {'entries':>7} {'computed':>8} {'rendered':>8} {'written':>7} {'wall s':>8} {'CPU s':>8} "
          f"{'collect s':>9}  load before")
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        url = f"sqlite:///{tmp / 'bundled.sqlite'}"
        with Catalogue(url) as cat:
            cat.init()
        out = tmp / "bundled-site"
        _row("bundled catalogue, empty folder", *_build(url, out, args.jobs))
        _row("rebuild, nothing changed", *_build(url, out, args.jobs))
        data = dict(read_bundled(bundled_path("minkowski")).data)
        data["summary"] = "Flat spacetime (summary edited for the benchmark)."
        edited = tmp / "minkowski.json"
        edited.write_text(json.dumps(data))
        with Catalogue(url) as cat:
            cat.add(edited, author="site benchmark", message="summary")
        report, *rest = _build(url, out, args.jobs)
        _row("rebuild after one entry changed", report, *rest)
        print(f"    rendered: {', '.join(report.rendered)}; written: {', '.join(report.written)}")
        expected = {"index.html", "entries/minkowski.html", "downloads/minkowski.metric.json"}
        if report.rendered != ["minkowski"] or not set(report.written) <= expected or not report.index_written:
            sys.exit("FAILED: the rebuild after one change rewrote more than that entry's pages and the index")

        url = f"sqlite:///{tmp / 'synthetic.sqlite'}"
        start = time.perf_counter()
        with Catalogue(url) as cat:
            cat.init(bundled=False)
            with cat.session() as session:
                for data in _variants(args.entries):
                    store.add_document(session, validate(data, f"synthetic:{data['id']}"), author="site benchmark",
                                       message="synthetic variant", tool_version="bench")
        print(f"    ({args.entries} synthetic entries stored in {time.perf_counter() - start:.1f} s)")
        report, wall, *rest = _build(url, tmp / "synthetic-site", args.jobs)
        _row(f"synthetic catalogue, {args.entries} entries", report, wall, *rest)
        if report.problems:
            print("    problems: " + "; ".join(report.problems[:5]))
        print(f"    target: under 60 s of wall time -> {'met' if wall < 60 else 'NOT met'} ({wall:.1f} s)")
    print(f"load average at end: {_load()}")


if __name__ == "__main__":
    main()
