"""Many geodesics at once: an adaptive Runge-Kutta integrator over the Hamiltonian right-hand side.

The right-hand side is :class:`gravicat.export.hamiltonian.HamiltonianSystem` (g^ab from the engine,
its derivatives from sympy); here it is only integrated. Every ray carries its own step size in an
embedded explicit Runge-Kutta pair of orders 8(5,3) (Dormand and Prince; the coefficients are the
ones of scipy's ``DOP853`` class, read from it, with the same error norm), and all rays still running
are advanced together, so each stage is one vectorised call of the right-hand side.

A step is rejected (and retried with a quarter of its size) when it leaves the chart's domain or
gives a non-finite value; a ray whose step collapses there ends at the ``edge``. After each accepted
step the stopping events of :class:`Stops` are tested: approach to a horizon (the radial coordinate
at or below ``inner``, or |dx^0/dl| grown ``time_growth`` times: the time coordinate of a horizon),
``escape`` beyond ``outer`` while moving outwards, a thin ``disk`` in the equatorial plane (the
crossing of cos(theta) = 0, interpolated linearly inside the step), a coordinate ``range``, and the
end of the affine parameter ``lam_max``. Nothing runs unbounded: ``max_steps`` caps the iterations
and ``max_cpu`` the CPU seconds; rays still running then end as ``step-limit`` or ``cpu-limit``.

The drift of every ray is max |H(l) - H(0)| over its accepted steps, H = 1/2 g^ab p_a p_b.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from gravicat.errors import InputError

ENDS = ("running", "horizon", "escape", "disk", "edge", "range", "step-limit", "cpu-limit", "failed", "complete")
RUNNING, HORIZON, ESCAPE, DISK, EDGE, RANGE, STEP_LIMIT, CPU_LIMIT, FAILED, COMPLETE = range(len(ENDS))
MAX_STEPS = 20_000
MAX_CPU = 120.0
TIME_GROWTH = 1e8


@dataclass
class Stops:
    """Stopping events (see the module docstring); ``radial`` and ``polar`` are coordinate indices."""

    radial: int | None = None
    inner: float | None = None
    outer: float | None = None
    polar: int | None = None
    disk: tuple[float, float] | None = None  # (r_in, r_out) in the plane cos(x^polar) = 0
    ranges: dict[int, tuple[float, float]] = field(default_factory=dict)
    time_growth: float | None = TIME_GROWTH


@dataclass
class Rays:
    """End state of a bundle of rays: arrays with one row per ray."""

    x: Any  # (N, n) positions at the end (at the disk crossing for ``disk``)
    p: Any  # (N, n) covariant momenta there
    end: Any  # (N,) indices into ENDS
    lam: Any  # (N,) affine parameter reached
    steps: Any  # (N,) accepted steps
    h0: Any  # (N,) H at the start
    drift: Any  # (N,) max |H - H(0)| over the accepted steps
    iterations: int = 0
    evaluations: int = 0
    cpu_seconds: float = 0.0

    def count(self, name: str) -> int:
        return int((self.end == ENDS.index(name)).sum())

    @property
    def limited(self) -> int:
        return self.count("step-limit") + self.count("cpu-limit")


def _tableau():
    from scipy.integrate import DOP853

    s = DOP853.n_stages
    return s, DOP853.A[:s, :s], DOP853.B, DOP853.C, DOP853.E3, DOP853.E5


def integrate(system, x0, p0, stops: Stops | None = None, *, lam_max: float = math.inf, rtol: float = 1e-10,
              atol: float = 1e-12, h_start=None, max_steps: int = MAX_STEPS, max_cpu: float = MAX_CPU,
              progress: Callable[[int, int], None] | None = None,
              observer: Callable[[Any, Any], None] | None = None) -> Rays:
    """Integrate the rays starting at ``x0`` with momenta ``p0`` (arrays ``(N, n)``).

    ``h_start``: first step per ray (default: 1e-2 |y|/|dy/dl|); ``progress(done, total)`` is called
    after every iteration; ``observer(indices, y)`` receives the accepted states (``y`` of shape
    ``(2n, k)``, positions then momenta) of the rays ``indices``. Raises :class:`InputError` for a
    non-positive cap or tolerance."""
    import numpy as np

    if not (isinstance(max_steps, int) and max_steps >= 1):
        raise InputError("--max-steps", None, f"{max_steps} is not a positive number of steps")
    if not (max_cpu > 0 and math.isfinite(max_cpu)):
        raise InputError("--max-cpu", None, f"{max_cpu} is not a positive number of CPU seconds")
    if not (0 < rtol < 1 and 0 < atol < 1):
        raise InputError("tolerance", None, "rtol and atol must lie between 0 and 1")
    stops = stops or Stops()
    n = system.n
    cpu0 = time.process_time()
    Y = np.ascontiguousarray(np.hstack([np.atleast_2d(x0), np.atleast_2d(p0)]).T.astype(float))  # (2n, N)
    N = Y.shape[1]
    evaluations = 0

    def f(y):
        nonlocal evaluations
        evaluations += y.shape[1]
        dx, dp = system.rhs(y[:n], y[n:])
        return np.vstack([dx, dp])

    def inside(y):
        if not system.domain_exprs:
            return np.ones(y.shape[1], dtype=bool)
        with np.errstate(all="ignore"):
            m = system.domain_margins(y[:n])
        return np.all(m > 0, axis=0)

    end = np.zeros(N, dtype=np.int8)
    lam = np.zeros(N)
    steps = np.zeros(N, dtype=np.int64)
    with np.errstate(all="ignore"):
        F = f(Y)
        h_zero = system.hamiltonian(Y[:n], Y[n:])
    drift = np.zeros(N)
    bad0 = ~np.all(np.isfinite(F), axis=0) | ~inside(Y)
    end[bad0] = FAILED
    if h_start is None:
        with np.errstate(all="ignore"):
            H = 1e-2 * np.linalg.norm(Y, axis=0) / np.maximum(np.linalg.norm(F, axis=0), 1e-300)
        H = np.where(np.isfinite(H) & (H > 0), H, 1e-3)
    else:
        H = np.broadcast_to(np.asarray(h_start, dtype=float), (N,)).copy()
    h_floor = 1e-12 * H
    t_speed0 = np.abs(F[0]) if stops.time_growth else None
    S, A, B, C, E3, E5 = _tableau()
    iterations = 0
    while True:
        act = np.flatnonzero(end == RUNNING)
        if progress is not None:
            progress(N - act.size, N)
        if act.size == 0:
            break
        if iterations >= max_steps:
            end[act] = STEP_LIMIT
            break
        if time.process_time() - cpu0 > max_cpu:
            end[act] = CPU_LIMIT
            break
        iterations += 1
        y, h = Y[:, act], np.minimum(H[act], lam_max - lam[act])
        K = np.empty((S + 1, 2 * n, act.size))
        K[0] = F[:, act]
        with np.errstate(all="ignore"):
            for s in range(1, S):
                K[s] = f(y + h * np.tensordot(A[s, :s], K[:s], axes=1))
            y_new = y + h * np.tensordot(B, K[:S], axes=1)
            f_new = f(y_new)
            K[S] = f_new
            scale = atol + rtol * np.maximum(np.abs(y), np.abs(y_new))
            e5 = np.sum((np.tensordot(E5, K, axes=1) / scale) ** 2, axis=0)
            e3 = np.sum((np.tensordot(E3, K, axes=1) / scale) ** 2, axis=0)
            denom = e5 + 0.01 * e3
            err = np.where(denom > 0, np.abs(h) * e5 / np.sqrt(np.where(denom > 0, denom, 1) * 2 * n), 0.0)
        bad = ~np.isfinite(err) | ~np.all(np.isfinite(y_new), axis=0) | ~np.all(np.isfinite(f_new), axis=0)
        bad |= ~inside(np.where(bad, y, y_new))
        ok = ~bad & (err <= 1)
        with np.errstate(all="ignore"):
            grow = np.where(err == 0, 10.0, np.clip(0.9 * err ** (-1 / 8), 0.2, 10.0))
        grow = np.where(ok, grow, np.minimum(grow, 1.0))
        grow = np.where(bad, 0.25, grow)
        H[act] = h * grow
        collapsed = ~ok & (H[act] < h_floor[act])
        end[act[collapsed]] = EDGE
        if not ok.any():
            continue
        idx, yn, fn = act[ok], y_new[:, ok], f_new[:, ok]
        y_old = y[:, ok]
        Y[:, idx], F[:, idx] = yn, fn
        lam[idx] += h[ok]
        steps[idx] += 1
        with np.errstate(all="ignore"):
            hv = system.hamiltonian(yn[:n], yn[n:])
        drift[idx] = np.maximum(drift[idx], np.abs(hv - h_zero[idx]))
        if observer is not None:
            observer(idx, yn)
        _events(stops, idx, y_old, yn, fn, end, Y, t_speed0, lam, lam_max, n)
    X = Y[:n].T.copy()
    P = Y[n:].T.copy()
    return Rays(x=X, p=P, end=end, lam=lam, steps=steps, h0=h_zero, drift=drift, iterations=iterations,
                evaluations=evaluations, cpu_seconds=time.process_time() - cpu0)


def _events(stops: Stops, idx, y_old, y_new, f_new, end, Y, t_speed0, lam, lam_max, n) -> None:
    import numpy as np

    done = np.zeros(idx.size, dtype=bool)

    def mark(mask, code):
        nonlocal done
        mask = mask & ~done
        end[idx[mask]] = code
        done |= mask

    r = stops.radial
    if stops.disk is not None and stops.polar is not None and r is not None:
        c0, c1 = np.cos(y_old[stops.polar]), np.cos(y_new[stops.polar])
        crossed = (c0 * c1 <= 0) & (c0 != c1)
        if crossed.any():
            frac = np.where(crossed, c0 / np.where(crossed, c0 - c1, 1), 0)
            y_hit = y_old + frac * (y_new - y_old)
            hit = crossed & (y_hit[r] >= stops.disk[0]) & (y_hit[r] <= stops.disk[1])
            if hit.any():
                Y[:, idx[hit]] = y_hit[:, hit]
                mark(hit, DISK)
    if r is not None and stops.inner is not None:
        mark(y_new[r] <= stops.inner, HORIZON)
    if t_speed0 is not None and stops.time_growth:
        mark(np.abs(f_new[0]) > stops.time_growth * np.maximum(t_speed0[idx], 1e-300), HORIZON)
    if r is not None and stops.outer is not None:
        mark((y_new[r] >= stops.outer) & (f_new[r] > 0), ESCAPE)
    for i, (lo, hi) in stops.ranges.items():
        mark((y_new[i] < lo) | (y_new[i] > hi), RANGE)
    if math.isfinite(lam_max):
        mark(lam[idx] >= lam_max * (1 - 1e-14), COMPLETE)
