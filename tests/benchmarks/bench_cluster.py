"""Cluster benchmark: the whole bundled catalogue verified on a Dask cluster with 1 and 2 workers.

Not collected by pytest. Run by hand on an idle machine (a few minutes):

    python tests/benchmarks/bench_cluster.py [--workers 1 2]

For each worker count, a fresh SQLite catalogue (``init --no-verify``), then
``gravicat verify --all --cluster local:N --json`` in a child process (the local cluster is
started and stopped by the command, as a user would run it). Printed per row: the load average
just before it, wall seconds of the command, the seconds from the first unit submitted to the last
one back (``run_seconds`` of the JSON summary: start-up, cluster start and shutdown left out),
the speed-up of both against the 1-worker row of the same run, the mean unit time (seconds a unit
spent in its worker, its forked child included) and the scheduling overhead per unit: worker time
not spent in a unit, (run seconds x workers - sum of unit seconds) / units (dispatch, transfer,
storing in the client while a worker waits, and the idle tail at the end). The target (1.7x with 2
workers on a 2-core machine) holds only on an idle machine: compare the load averages.
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
    print(f"cores: {os.cpu_count()}; load average at start: {_load()}")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in args.workers:
            url = f"sqlite:///{tmp}/w{n}.sqlite"
            _gravicat(url, "init", "--no-verify")
            load = _load()
            wall, out = _gravicat(url, "verify", "--all", "--cluster", f"local:{n}", "--json")
            if out is None or "cluster" not in out:
                sys.exit(f"verify --cluster local:{n} printed no JSON summary")
            run = out["cluster"]
            units = max(1, run["units"])
            overhead = (run["run_seconds"] * run["workers"] - run["unit_seconds"]) / units
            rows.append((n, run["workers"], load, wall, run["run_seconds"], run["units"],
                         run["unit_seconds"] / units, overhead, len(run["failures"])))
    base_wall, base_run = rows[0][3], rows[0][4]
    print(f"{'workers':>7} {'load before':>17} {'wall s':>7} {'speed-up':>8} {'run s':>7} {'speed-up':>8} "
          f"{'units':>5} {'mean unit s':>11} {'overhead/unit s':>15} {'failures':>8}")
    for n, seen, load, wall, run_s, units, mean, overhead, failures in rows:
        shown = f"{n}" if seen == n else f"{n} ({seen} seen)"
        print(f"{shown:>7} {load:>17} {wall:>7.1f} {base_wall / wall:>7.2f}x {run_s:>7.1f} {base_run / run_s:>7.2f}x "
              f"{units:>5} {mean:>11.3f} {overhead:>15.3f} {failures:>8}")
    print(f"load average at end: {_load()}")


def _load() -> str:
    return "/".join(f"{x:.2f}" for x in os.getloadavg())


if __name__ == "__main__":
    main()
