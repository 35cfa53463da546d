"""Curvature benchmark: the flint fast path against a careful pure-sympy baseline, in the same run.

Not collected by pytest (the file name does not start with test_). Run:

    python tests/benchmarks/bench_curvature.py [--repeat N]

The baseline is a careful pure-sympy computation: the same curvature formulas
(the engine's generic tensor code) over sympy's own exact rational-function
field (sympy.polys.fields, fractions reduced by gcd: the cancel() normal form)
on the same metrics rewritten with x = cos(theta), so that every component is
a rational function. simplify() is not used: slower, and it leaves false
non-zeros. The engine's general sympy fallback path (expressions + cancel) is
slower still and is not what is measured here.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import sympy as sp

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from _charts import M, a, chart, kerr, kerr_metric, kerr_newman, ph, r, t, th  # noqa: E402

from gravicat.geometry import Geometry, _invert  # noqa: E402
from gravicat.plugins.field_equations import residuals  # noqa: E402

X = sp.Symbol("x", real=True)


def to_x(spec, potential=None):
    """The chart with theta replaced by x = cos(theta) (dtheta = -dx / sqrt(1 - x^2)), rational throughout."""
    g = sp.Matrix(spec.metric)
    rep = {sp.sin(th) ** 2: 1 - X**2}
    g = g.applyfunc(lambda e: sp.sympify(e).subs(rep).subs(sp.cos(th), X))
    assert all(g[2, j] == 0 for j in (0, 1, 3)), "benchmark charts have no theta cross terms"
    g[2, 2] = g[2, 2] / (1 - X**2)
    pot = None
    if potential is not None:
        pot = tuple(sp.sympify(p).subs(rep).subs(sp.cos(th), X) for p in potential)
    return chart(
        (t, r, X, ph),
        g,
        spec.params,
        claim=spec.field_equations,
        potential=pot,
        domain=(X > -1, X < 1, r > 3 * M),
        ranges=spec.param_ranges,
    )


class FracGeometry(Geometry):
    """Baseline: the engine's formulas over sympy's rational-function field (pure sympy)."""

    def __init__(self, spec):
        from sympy import QQ
        from sympy.polys.fields import field

        self.spec = spec
        self.coords = tuple(spec.coords)
        self.params = tuple(spec.params)
        self.n = len(self.coords)
        self.field = None
        self.path = "sympy-frac"
        self.fallback_reason = ""
        self._dcache, self._dgam, self._dtr = {}, {}, {}
        self.K, *gens = field(list(self.coords) + list(self.params), QQ)
        self.cgens = gens[: self.n]
        self.zero, self.one = self.K.zero, self.K.one
        self.g = [[self.K.from_expr(sp.sympify(spec.metric[i, j])) for j in range(self.n)] for i in range(self.n)]

    def _iz(self, v):
        return not v

    def _nf(self, v):
        return v

    def is_zero(self, v):
        return not v

    def _diff(self, v, i):
        return v.diff(self.cgens[i])

    def val(self, expr):
        return self.K.from_expr(sp.sympify(expr))

    def _inverse(self):
        return _invert(self.g, self.n, self._iz, self._nf, self.one, self.zero)


def frac_proof(spec, fn):
    geo = FracGeometry(spec)
    return all(not v for v in fn(geo).values())


def vacuum(X_):
    return {X_.label("R", i, j): X_.ricci[i][j] for i in range(4) for j in range(i, 4)}


def kretschmann_residual(expected):
    def fn(X_):
        return {"K": X_.kretschmann - X_.val(expected)}

    return fn


def henry_kretschmann(c):
    # R. C. Henry, ApJ 535 (2000) 350, eq. 1 with Q = 0 (recalled from memory)
    S = r**2 + a**2 * c**2
    return 48 * M**2 * (r**6 - 15 * a**2 * r**4 * c**2 + 15 * a**4 * r**2 * c**4 - a**6 * c**6) / S**6


def timed(fn, repeat):
    best = None
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        dt = time.perf_counter() - t0
        best = dt if best is None else min(best, dt)
    return best, out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3, help="repetitions of the fast path (best time is shown)")
    args = ap.parse_args(argv)

    kn = kerr_newman()
    broken = kerr(kerr_metric(swap=True))
    cases = [
        ("Kerr vacuum (proof)", kerr(), vacuum, lambda s: to_x(s), vacuum),
        (
            "Kerr-Newman G = 8 pi T + Maxwell (proof)",
            kn,
            residuals(kn, "electrovacuum"),
            lambda s: to_x(s, s.potential),
            None,
        ),
        (
            "Kerr Kretschmann = closed form (proof)",
            kerr(),
            kretschmann_residual(henry_kretschmann(sp.cos(th))),
            lambda s: to_x(s),
            kretschmann_residual(henry_kretschmann(X)),
        ),
        ("broken Kerr: counterexample", broken, vacuum, lambda s: to_x(s), vacuum),
    ]
    print(f"{'case':45s} {'flint s':>9s} {'sympy s':>9s} {'ratio':>8s}  result")
    for name, spec, fn, baseline_spec, baseline_fn in cases:

        def fast(spec=spec, fn=fn):
            return Geometry(spec, samples=4).verify(fn)

        tf, out = timed(fast, args.repeat)
        bspec = baseline_spec(spec)
        bfn = baseline_fn if baseline_fn is not None else residuals(bspec, "electrovacuum")
        ts, proved = timed(lambda bspec=bspec, bfn=bfn: frac_proof(bspec, bfn), 1)
        print(
            f"{name:45s} {tf:9.3f} {ts:9.3f} {ts / tf:8.1f}  flint {out.status}/{out.method}, "
            f"sympy {'identically zero' if proved else 'non-zero residual'}"
        )
        sys.stdout.flush()


if __name__ == "__main__":
    main()
