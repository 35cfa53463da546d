"""Per-point data of a prepared chart: the exact (or interval) values at one sample point.

:class:`PointData` is the second backend of the curvature formulas
(:class:`gravicat.engine.curvature._Curvature`): g, dg and ddg are evaluated from the symbolic
side of :class:`gravicat.engine.geometry.Geometry`; everything else is computed per point.
"""

from __future__ import annotations

from contextlib import contextmanager
from fractions import Fraction
from functools import cached_property
from typing import TYPE_CHECKING

import flint
import sympy as sp

from gravicat.engine.curvature import _Curvature, _invert
from gravicat.engine.ratfun import Elem, arb_precision
from gravicat.engine.sampling import DIGITS

if TYPE_CHECKING:
    from gravicat.engine.geometry import Geometry

__all__ = ["PointData"]

# real-variable conventions for the sympy path's floating evaluation
_MP_EXTRA = {
    "DiracDelta": lambda *a: 0,
    "Heaviside": lambda x, *a: 1 if x > 0 else 0,
    "sign": lambda x: (x > 0) - (x < 0),
}


class PointData(_Curvature):
    """Exact (or interval) values at one sample point: g, dg, ddg evaluated
    from the symbolic side; inverse, Christoffel symbols and curvature
    computed here from those numbers (same formulas as the symbolic side,
    with d Gamma from the second derivatives of g)."""

    def __init__(self, geometry: Geometry, sample, point):
        self.geometry = geometry
        self.sample = sample
        self.point = point
        self.n = geometry.n
        self.coords = geometry.coords
        self.inexact = False
        self._cache: dict = {}
        self._evc: dict = {}
        if point is not None:
            self.zero = flint.fmpq(0)
            self.one = flint.fmpq(1)
        else:
            import mpmath

            self._mp = mpmath
            self.zero = mpmath.mpf(0)
            self.one = mpmath.mpf(1)

    # evaluation of symbolic values at this point
    def ev(self, v):
        if isinstance(v, Elem):
            if not v.c:
                return self.zero
            key = id(v)
            hit = self._evc.get(key)
            if hit is None or hit[0] is not v:
                hit = (v, v.evaluate(self.point))
                self._evc[key] = hit
            return hit[1]
        return self._ev_sym(v)

    @cached_property
    def _subs_funcs(self):
        geo = self.geometry
        items = sorted(geo._sym_funcs.items(), key=lambda kv: -sum(kv[0][1]))
        return [(sym, sp.Symbol(f"_f{i}")) for i, ((_k, _a), sym) in enumerate(items)], [
            self.sample.funcs[k] for k, _ in items
        ]

    def _ev_sym(self, expr):
        mp = self._mp
        key = expr
        f = self.geometry._dcache.get(("lamb", key))
        pairs, fvals = self._subs_funcs
        syms = list(self.geometry.params) + list(self.geometry.coords) + [s for _, s in pairs]
        if f is None:
            e = sp.sympify(expr)
            for sym, s in pairs:
                e = e.subs(sym, s)
            f = sp.lambdify(syms, e, modules=[_MP_EXTRA, "mpmath"])
            self.geometry._dcache[("lamb", key)] = f
        with mp.workdps(DIGITS + 10):
            args = [self.sample.numeric[s] for s in list(self.geometry.params) + list(self.geometry.coords)]
            args += [mp.mpf(x.numerator) / x.denominator for x in fvals]
            val = f(*args)
            if isinstance(val, mp.mpc):
                if abs(val.imag) > mp.mpf(10) ** (-DIGITS):
                    raise ValueError("complex value")
                val = val.real
            if not mp.isfinite(val):
                raise ZeroDivisionError("not finite")
            return mp.mpf(val)

    @staticmethod
    def _iz(v) -> bool:
        return v == 0  # an arb ball equals 0 only when it is exactly 0

    @contextmanager
    def precision(self):
        """Context for arithmetic on these values (interval and floating values need extra digits)."""
        import mpmath

        with mpmath.workdps(DIGITS + 10), arb_precision():
            yield

    def _nf(self, v):
        return v

    def zero_test(self, v):
        """True (exactly 0), False (certainly non-zero) or None (0 within the working precision)."""
        if isinstance(v, (flint.fmpq, int, Fraction)):
            return v == 0
        if isinstance(v, flint.arb):
            return None if v.contains(0) else False
        mp = self._mp
        scale = max([mp.mpf(1)] + [abs(self.g[a][b]) for a in range(self.n) for b in range(self.n)])
        return None if abs(v) <= scale * mp.mpf(10) ** (-(DIGITS // 2)) else False

    # geometry-facing API (same names as Geometry)
    def val(self, expr):
        key = ("v", expr)
        if key not in self._cache:
            self._cache[key] = self.ev(self.geometry.val(expr))
        return self._cache[key]

    def dval(self, expr, i):
        key = ("d", expr, i)
        if key not in self._cache:
            self._cache[key] = self.ev(self.geometry.dval(expr, i))
        return self._cache[key]

    def ddval(self, expr, i, j):
        key = ("dd", expr, min(i, j), max(i, j))
        if key not in self._cache:
            self._cache[key] = self.ev(self.geometry.ddval(expr, i, j))
        return self._cache[key]

    def const(self, q):
        if self.point is not None:
            q = Fraction(q)
            return flint.fmpq(q.numerator, q.denominator)
        return self._mp.mpf(Fraction(q).numerator) / Fraction(q).denominator

    def label(self, name, *idx):
        return self.geometry.label(name, *idx)

    @cached_property
    def g(self):
        geo = self.geometry
        n = self.n
        return [[self.ev(geo.g[a][b]) for b in range(n)] for a in range(n)]

    @cached_property
    def dg(self):
        geo = self.geometry
        n = self.n
        return [[[self.ev(geo.dg[c][a][b]) for b in range(n)] for a in range(n)] for c in range(n)]

    @cached_property
    def ddg(self):
        geo = self.geometry
        n = self.n
        return [
            [[[self.ev(geo.ddg[c][d][a][b]) for b in range(n)] for a in range(n)] for d in range(n)] for c in range(n)
        ]

    def _inverse(self):
        def pick(A, cands, col):
            if self.point is None or any(isinstance(A[r][col], flint.arb) for r in cands):
                return max(
                    cands, key=lambda r: abs(float(A[r][col].mid() if isinstance(A[r][col], flint.arb) else A[r][col]))
                )
            return cands[0]

        with arb_precision():
            inv, det = _invert(self.g, self.n, self._iz, self._nf, self.one, self.zero, pick)
        if self._iz(det) or (isinstance(det, flint.arb) and det.contains(0)):
            raise ZeroDivisionError("degenerate metric at the point")
        return inv, det
