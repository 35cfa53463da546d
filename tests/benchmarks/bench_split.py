"""Benchmark of the 3+1 split against `gravicat check` of the same chart, measured in the same run.

Not collected by pytest (the file name does not start with test_). Run by hand:

    python tests/benchmarks/bench_split.py [--repeat N] [--grid-points 65]

Cases (the performance claims of the issue "3+1 split and checked initial data"):

* **split + constraints**: :func:`gravicat.physics.split.split_chart` and
  :func:`~gravicat.physics.split.prove_constraints` (both constraints proved) on the bundled
  ``kerr:kerr-schild`` and ``schwarzschild:isotropic`` charts, in a forked child, CPU seconds of that
  child (``time.process_time``), file already parsed;
* **split command**: ``gravicat split FILE:CHART --json`` as a user runs it (interpreter start, the
  split, the constraints, the spatial Ricci scalar, the ADM integrals), CPU of the whole process tree;
* **grid**: ``gravicat split kerr.toml:kerr-schild --grid x=-8:8:N --grid y=-8:8:N --grid z=1:17:N -o
  FILE.h5`` (default N = 65, 274625 points), CPU of the whole process tree and wall time;
* **baseline**: ``gravicat check FILE --chart CHART`` of the same chart (every verifier), CPU of the
  whole process tree, in the same run. Every figure is printed as a ratio to it.

CPU of a command = user + system time of its process and every child it waited for
(``resource.getrusage(RUSAGE_CHILDREN)`` before and after), so a loaded machine does not turn waiting
into cost; the best of ``--repeat`` runs is shown, with the wall time beside it.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
BIN = Path(sys.executable).parent
DATA = ROOT / "catalog" / "data" / "spacetimes"
CASES = [("kerr", "kerr-schild"), ("schwarzschild", "isotropic")]


def run_command(args: list[str], env: dict) -> tuple[float, float]:
    """(CPU seconds of the command's process tree, wall seconds); the command must succeed."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    done = subprocess.run([str(BIN / "gravicat"), *args], env=env, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode != 0:
        raise SystemExit(f"gravicat {' '.join(args)} failed ({done.returncode}): {done.stderr.strip()}")
    return after.ru_utime + after.ru_stime - before.ru_utime - before.ru_stime, wall


def split_and_constraints(entry: str, chart: str) -> tuple[float, float, dict]:
    """(CPU, wall, statuses) of split_chart + prove_constraints in a forked child."""
    from gravicat.engine.fork import run_forked
    from gravicat.format.bundled import bundled_path, read_bundled
    from gravicat.format.metricfile import build_chart

    spec = build_chart(read_bundled(bundled_path(entry)), chart)

    def work(emit):
        from gravicat.physics.split import prove_constraints, split_chart

        t0 = time.process_time()
        c = prove_constraints(split_chart(spec))
        return time.process_time() - t0, {k: v["status"] for k, v in c.items()}

    t0 = time.perf_counter()
    out = run_forked(work, cpu_seconds=600)
    if not out.finished:
        out.reraise()
        raise SystemExit(f"{entry}:{chart}: the split did not finish ({out.limit or out.error})")
    cpu, statuses = out.value
    return cpu, time.perf_counter() - t0, statuses


def best(fn, repeat: int):
    runs = [fn() for _ in range(repeat)]
    return min(runs, key=lambda r: r[0])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=1)
    parser.add_argument("--grid-points", type=int, default=65)
    opts = parser.parse_args()
    # warm the imports of the parent (the children fork from it)
    import gravicat.physics.split  # noqa: F401

    with tempfile.TemporaryDirectory() as tmp:
        env = {k: v for k, v in os.environ.items() if not k.startswith("GRAVICAT_")}
        env.update(GRAVICAT_DB=f"sqlite:///{tmp}/none.sqlite", GRAVICAT_CONFIG=f"{tmp}/no-config.toml")
        rows = []
        for entry, chart in CASES:
            path = str(DATA / f"{entry}.toml")
            check_cpu, check_wall = best(lambda p=path, c=chart: run_command(["check", p, "--chart", c], env),
                                         opts.repeat)
            lib_cpu, lib_wall, statuses = best(lambda e=entry, c=chart: split_and_constraints(e, c), opts.repeat)
            cmd_cpu, cmd_wall = best(lambda p=path, c=chart: run_command(["split", f"{p}:{c}", "--json"], env),
                                     opts.repeat)
            rows.append((f"{entry}:{chart}", "check (baseline)", check_cpu, check_wall, 1.0, ""))
            rows.append((f"{entry}:{chart}", "split + both constraints", lib_cpu, lib_wall, lib_cpu / check_cpu,
                         ", ".join(f"{k} {v}" for k, v in statuses.items())))
            rows.append((f"{entry}:{chart}", "split command (with ADM)", cmd_cpu, cmd_wall, cmd_cpu / check_cpu, ""))
            if entry == "kerr":
                n = opts.grid_points
                out = f"{tmp}/grid.h5"
                grid_cpu, grid_wall = best(lambda p=path, c=chart, o=out, n=n: run_command(
                    ["split", f"{p}:{c}", "--grid", f"x=-8:8:{n}", "--grid", f"y=-8:8:{n}", "--grid", f"z=1:17:{n}",
                     "-o", o], env), opts.repeat)
                size = os.path.getsize(out) / 1e6
                rows.append((f"{entry}:{chart}", f"grid {n}^3 to HDF5 ({size:.0f} MB)", grid_cpu, grid_wall,
                             grid_cpu / check_cpu, ""))
    print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores, load {os.getloadavg()[0]:.1f}; "
          f"best of {opts.repeat}; CPU seconds of the process tree, ratio to check of the same chart")
    width = max(len(r[1]) for r in rows)
    for chart, what, cpu, wall, ratio, note in rows:
        print(f"{chart:24} {what:{width}}  cpu {cpu:7.2f} s  wall {wall:7.2f} s  ratio {ratio:5.2f}  {note}")


if __name__ == "__main__":
    main()
