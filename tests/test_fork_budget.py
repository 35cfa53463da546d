"""CPU budgets of engine.fork below the kernel's whole-second granularity (a profiling timer)."""

from __future__ import annotations

import signal
import time

import pytest

from gravicat.engine.fork import fork_available, run_forked

pytestmark = pytest.mark.skipif(not fork_available(), reason="no fork on this platform")


def test_a_fractional_cpu_budget_is_kept_to_the_fraction():
    def spin(emit):
        last = 0.0
        while True:  # CPU work in the interpreter; the child's own CPU clock reported every 20 ms
            now = time.process_time()
            if now - last >= 0.02:
                emit(now)
                last = now

    out = run_forked(spin, cpu_seconds=0.2, wall_seconds=30)
    assert out.limit == "cpu" and out.exitcode == -signal.SIGXCPU
    # the kernel's cap alone (RLIMIT_CPU, whole seconds) would let it reach 1 s of CPU; the timer
    # stops it at 0.2 s. The margin to 0.6 s covers the reporting interval and the interpreter's
    # next check (common practice, no source).
    assert out.items and max(out.items) < 0.6, max(out.items or [0])


def test_work_within_the_budget_is_untouched():
    out = run_forked(lambda emit: sum(range(1000)), cpu_seconds=0.5)
    assert out.finished and out.value == 499500 and out.limit is None
