"""Cluster benchmark: the whole bundled catalogue verified on a Dask cluster with 1 and 2 workers.

Not collected by pytest. Run by hand on an idle machine (a few minutes):

    python tests/benchmarks/bench_cluster.py [--workers 1 2]

For each worker count, a fresh SQLite catalogue (``init --no-verify``), then
``gravicat verify --all --cluster local:N --json`` in a child process (the local cluster is
started and stopped by the command, as a user would run it). Printed per row: wall seconds, the
speed-up against the 1-worker row of the same run, the mean unit time (seconds a unit spent in
its worker) and the scheduling overhead per unit ((wall - start-up - unit seconds / workers) /
units, where start-up is ``verify --cluster local:N`` with nothing to do, measured in the same
run). The load average is printed before and after: the target (1.7x with 2 workers on a
2-core machine) holds only on an idle machine.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time


def _gravicat(url: str, *args: str) -> tuple[float, dict | None]:
    env = dict(os.environ, GRAVICAT_DB=url, GRAVICAT_CONFIG=os.devnull)
    env.pop("GRAVICAT_CLUSTER", None)
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "gravicat", *args], capture_output=True, text=True, env=env)
    wall = time.perf_counter() - start
    if done.returncode not in (0, 1):
        sys.exit(f"gravicat {' '.join(args)} failed ({done.returncode}): {done.stderr.strip()}")
    try:
        return wall, json.loads(done.stdout)
    except json.JSONDecodeError:
        return wall, None


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    args = ap.parse_args(argv)
    print(f"cores: {os.cpu_count()}; load average at start: {os.getloadavg()}")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in args.workers:
            url = f"sqlite:///{tmp}/w{n}.sqlite"
            _gravicat(url, "init", "--no-verify")
            wall, out = _gravicat(url, "verify", "--all", "--cluster", f"local:{n}", "--json")
            idle, _ = _gravicat(url, "verify", "--all", "--cluster", f"local:{n}", "--json")  # start-up only
            run = out["cluster"]
            units = max(1, run["units"])
            overhead = (wall - idle - run["unit_seconds"] / n) / units
            rows.append((n, wall, run["units"], run["unit_seconds"] / units, overhead, idle, len(run["failures"])))
    base = rows[0][1]
    print(f"{'workers':>7} {'wall s':>8} {'speed-up':>8} {'units':>6} {'mean unit s':>11} "
          f"{'overhead/unit s':>15} {'start-up s':>10} {'failures':>8}")
    for n, wall, units, mean, overhead, idle, failures in rows:
        print(f"{n:>7} {wall:>8.1f} {base / wall:>7.2f}x {units:>6} {mean:>11.3f} {overhead:>15.3f} "
              f"{idle:>10.1f} {failures:>8}")
    print(f"load average at end: {os.getloadavg()}")


if __name__ == "__main__":
    main()
