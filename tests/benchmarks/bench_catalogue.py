"""Catalogue benchmark: one table with the proof cases, the whole-process commands and every bundled chart.

Not collected by pytest. Run by hand (about 12 minutes with the textbook baseline, 3 without):

    python tests/benchmarks/bench_catalogue.py [--no-textbook] [--textbook-cap S] [--repeat N] [--jobs N]

Rows:

* the four proof cases of ``bench_curvature.py`` (Kerr vacuum, Kerr-Newman electrovacuum, Kerr
  Kretschmann, broken Kerr), with their ratios to the careful pure-sympy, textbook and sympy
  fraction-field baselines measured in this run;
* whole processes (wall seconds, CPU of the process tree, peak memory of the largest process
  from ``wait4``; best of ``--repeat`` runs): ``gravicat --help`` against ``python -c "import
  sympy"`` (what the help would cost if the CLI imported sympy at start); ``gravicat check
  kerr.toml`` and ``gravicat check kerr-newman.toml`` (every check of both charts; the charts run
  in forked children, ``--jobs`` at a time) against the start-up floor ``python -c "import sympy,
  flint"`` measured in the same run (and the careful pure-sympy Kerr vacuum proof alone, when the
  proof cases run); ``gravicat verify --all --jobs N`` on a fresh SQLite catalogue (CPU limit 40 s, printed beside the
  figure of the 58-chart catalogue before it grew), and a second
  run with nothing changed (stored results reused) against the first;
* every bundled chart: every verifier on that chart in a forked child (what ``verify`` does per
  chart), with the path taken (``flint`` or ``sympy``), CPU seconds, wall seconds, its overall
  status and the child's peak resident memory.

Times of in-process rows are CPU seconds of that child (``time.process_time``), robust on a
loaded machine; the machine line shows the load average at the start and at the end, and whether
Python may write bytecode caches (``PYTHONDONTWRITEBYTECODE`` set: every gravicat module is
compiled again at each start, about 0.1 s more per command than an installed copy).

``--commands-only`` measures the whole-process rows alone (about a minute).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_curvature as bc  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
KERR = ROOT / "catalog" / "data" / "spacetimes" / "kerr.toml"
KERR_NEWMAN = ROOT / "catalog" / "data" / "spacetimes" / "kerr-newman.toml"
BIN = Path(sys.executable).parent
GRAVICAT = BIN / "gravicat"


def run_process(argv, env=None):
    """Run a command: dict with wall, cpu (process tree), rss (MB, largest process), code, out."""
    w0 = time.perf_counter()
    with tempfile.TemporaryFile() as out:
        proc = subprocess.Popen(argv, stdout=out, stderr=subprocess.STDOUT, env=env)
        _pid, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - w0
        proc.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        text = out.read().decode(errors="replace")
    return {
        "wall": wall,
        "cpu": usage.ru_utime + usage.ru_stime,
        "rss": usage.ru_maxrss / 1024,
        "code": proc.returncode,
        "out": text,
    }


def best_process(argv, repeat, env=None):
    runs = [run_process(argv, env) for _ in range(max(1, repeat))]
    return min(runs, key=lambda r: r["wall"])


def chart_job(doc_id, chart):
    def run():
        from gravicat.engine.runner import bundled_documents, check_chart, make_resolver
        from gravicat.registry import make_plugin_manager, verifiers

        docs = bundled_documents()
        resolve = make_resolver(docs)
        chosen = list(verifiers(make_plugin_manager()).values())
        t0 = time.process_time()
        rep = check_chart(docs[doc_id], chart, chosen, resolve=resolve)
        bad = [f"{r.check}: {r.status.value}" for r in rep.results if r.status.value not in ("pass", "skipped")]
        return {"path": rep.path, "status": rep.status.value, "bad": bad, "cpu": time.process_time() - t0}

    return run


def bundled_charts():
    from gravicat.engine.runner import bundled_documents

    return [(doc_id, c) for doc_id, doc in sorted(bundled_documents().items()) for c in doc.chart_names]


# issue 20: verify --all on the grown catalogue stays under 40 CPU seconds on the 2-core machine
VERIFY_ALL_CPU_LIMIT = 40.0
# the figure before the catalogue grew (docs/benchmarks.md, same machine, measured then)
BASELINE_58 = {"entries": 31, "charts": 58, "cpu": 12.7, "wall": 7.5}


def catalogue_size():
    """'N entries, M charts' of the bundled catalogue (validated the way init reads it)."""
    from gravicat.format.bundled import iter_bundled_documents

    docs = list(iter_bundled_documents())
    return f"{len(docs)} entries, {sum(len(d.chart_names) for d in docs)} charts"


def row(case, path, cpu, wall, target, ratios, rss, result):
    return {
        "case": case,
        "path": path,
        "cpu": cpu,
        "wall": wall,
        "target": target,
        "ratios": ratios,
        "rss": rss,
        "result": result,
    }


def fmt(v, spec):
    return "-" if v is None else format(v, spec)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3, help="runs of each fast case and short command (best shown)")
    ap.add_argument("--textbook-cap", type=float, default=120.0, help="CPU seconds before a textbook run stops")
    ap.add_argument("--no-textbook", action="store_true", help="skip the textbook baseline (saves ~8 minutes)")
    ap.add_argument("--jobs", type=int, default=2, help="worker processes of verify --all and check")
    ap.add_argument("--commands-only", action="store_true", help="only the whole-process rows")
    args = ap.parse_args(argv)
    start_machine = bc.machine()
    bytecode = "off (PYTHONDONTWRITEBYTECODE)" if os.environ.get("PYTHONDONTWRITEBYTECODE") else "on"
    print(f"machine: {start_machine}; bytecode caches {bytecode}", flush=True)
    rows = []

    # -- the proof cases, with the three baselines
    cases = [] if args.commands_only else bc.run_cases(args.repeat, args.textbook_cap, not args.no_textbook)
    careful_kerr = None
    for c in cases:
        f, v = c["fast"], c["fast"]["value"] or {}
        tb = c["textbook"]
        ratios = {
            "careful sympy": bc.fmt_ratio(c["careful"]["cpu"], f["cpu"]),
            "textbook": bc.fmt_ratio(tb["cpu"], f["cpu"], tb["error"] == "cap") if tb else "-",
            "sympy field": bc.fmt_ratio(c["frac"]["cpu"], f["cpu"]) if c["frac"] else "-",
        }
        res = f"{v.get('status')}/{v.get('method')}" + (f" at {v['cex']['component']}" if v.get("cex") else "")
        rows.append(
            row(c["case"], v.get("path", "?"), f["cpu"], f["wall"], bc.TARGETS[c["key"]], ratios, f["rss"], res)
        )
        if c["key"] == "kerr":
            careful_kerr = c["careful"]["cpu"]

    # -- whole processes
    print("  measuring whole processes", file=sys.stderr, flush=True)
    py = str(BIN / "python")
    imp = best_process([py, "-c", "import sympy"], args.repeat)
    hlp = best_process([str(GRAVICAT), "--help"], args.repeat)
    rows.append(
        row(
            "gravicat --help",
            "-",
            hlp["cpu"],
            hlp["wall"],
            0.3,
            {"other": f"{imp['wall'] / hlp['wall']:.1f}x vs import sympy ({imp['wall']:.2f} s)"},
            hlp["rss"],
            f"exit {hlp['code']}",
        )
    )
    floor = best_process([py, "-c", "import sympy, flint"], args.repeat)
    # an older gravicat (measured for comparison) has no check --jobs
    has_jobs = "--jobs" in run_process([str(GRAVICAT), "check", "--help"])["out"]
    jobs = ["--jobs", str(args.jobs)] if has_jobs else []
    for label, path in (("kerr.toml", KERR), ("kerr-newman.toml", KERR_NEWMAN)):
        chk = best_process([str(GRAVICAT), "check", str(path), *jobs], args.repeat)
        last = chk["out"].strip().splitlines()[-1] if chk["out"].strip() else ""
        ratios = {"other": f"{chk['wall'] / floor['wall']:.1f}x the import floor ({floor['wall']:.2f} s)"}
        if careful_kerr is not None and path == KERR:
            ratios["careful sympy"] = bc.fmt_ratio(careful_kerr, chk["wall"])
        rows.append(
            row(
                f"gravicat check {label} (every check, 2 charts)",
                "flint",
                chk["cpu"],
                chk["wall"],
                2.0 if path == KERR else None,
                ratios,
                chk["rss"],
                f"exit {chk['code']}: {last}",
            )
        )
    size = catalogue_size()
    with tempfile.TemporaryDirectory() as tmp:
        env = dict(os.environ, GRAVICAT_DB=f"sqlite:///{tmp}/catalogue.db")
        # init verifies what it loads (stored results would make verify --all a reuse): load only
        no_verify = ["--no-verify"] if "--no-verify" in run_process([str(GRAVICAT), "init", "--help"])["out"] else []
        init = run_process([str(GRAVICAT), "init", *no_verify], env)
        if init["code"] != 0:
            raise SystemExit(f"gravicat init failed: {init['out']}")
        first = run_process([str(GRAVICAT), "verify", "--all", "--jobs", str(args.jobs)], env)
        second = run_process([str(GRAVICAT), "verify", "--all", "--jobs", str(args.jobs)], env)
    rows.append(
        row(
            f"gravicat verify --all --jobs {args.jobs} (fresh catalogue)",
            "-",
            first["cpu"],
            first["wall"],
            VERIFY_ALL_CPU_LIMIT,
            {"other": f"{size}; the {BASELINE_58['charts']}-chart catalogue of {BASELINE_58['entries']} entries "
                      f"took {BASELINE_58['cpu']} CPU s ({BASELINE_58['wall']} s wall)"},
            first["rss"],
            f"exit {first['code']}",
        )
    )
    rows.append(
        row(
            "gravicat verify --all, nothing changed (reused)",
            "-",
            second["cpu"],
            second["wall"],
            2.0,
            {"other": f"{first['wall'] / second['wall']:.0f}x vs the first run"},
            second["rss"],
            f"exit {second['code']}",
        )
    )

    # -- every bundled chart
    worst_rss = 0.0
    total_cpu = 0.0
    if not args.commands_only:
        print("  measuring every bundled chart", file=sys.stderr, flush=True)
    for doc_id, chart in [] if args.commands_only else bundled_charts():
        out = bc.in_child(chart_job(doc_id, chart))
        v = out["value"] or {}
        res = v.get("status", out["error"])
        if v.get("bad"):
            res += " (" + "; ".join(v["bad"]) + ")"
        rows.append(row(f"{doc_id}:{chart}", v.get("path", "?"), v.get("cpu"), out["wall"], None, {}, out["rss"], res))
        worst_rss = max(worst_rss, out["rss"] or 0)
        total_cpu += v.get("cpu") or 0

    # -- the table
    head = (
        f"{'case':56s} {'path':6s} {'seconds':>8s} {'wall':>7s} {'target':>7s} {'vs careful':>11s} "
        f"{'vs textbook':>11s} {'vs sympy field':>14s} {'peak MB':>8s}  result / other baseline"
    )
    print()
    print(head)
    print("-" * len(head))
    for rw in rows:
        r = rw["ratios"]
        other = r.get("other", "")
        target = "-" if rw["target"] is None else "<=" + format(rw["target"], "g")
        print(
            f"{rw['case']:56s} {rw['path']:6s} {fmt(rw['cpu'], '8.3f'):>8s} {fmt(rw['wall'], '7.3f'):>7s} "
            f"{target:>7s} {r.get('careful sympy', '-'):>11s} {r.get('textbook', '-'):>11s} "
            f"{r.get('sympy field', '-'):>14s} {fmt(rw['rss'], '8.0f'):>8s}  {rw['result']}"
            + (f"; {other}" if other else "")
        )
    print()
    for c in cases:
        cf, fr, tb = c["careful"], c["frac"], c["textbook"]
        parts = [f"careful sympy {cf['cpu']:.2f} s ({cf['value'] or cf['error']})"]
        if tb:
            capped = tb["error"] == "cap"
            parts.append(f"textbook > {args.textbook_cap:g} s (stopped)" if capped else f"textbook {tb['cpu']:.1f} s")
        if fr:
            parts.append(f"sympy fraction field {fr['cpu']:.2f} s")
        print(f"baselines, {c['case']}: " + "; ".join(parts))
    if not args.commands_only:
        print(
            f"bundled charts: {len(rows) - len(cases) - 5}, CPU seconds in all {total_cpu:.1f}, "
            f"largest peak memory {worst_rss:.0f} MB (target <= 500 MB)"
        )
    print("seconds = CPU seconds (process tree for the commands); wall = elapsed; ratios = baseline / this row")
    print(f"machine at the end: {bc.machine()}")


if __name__ == "__main__":
    main()
