"""Positive roots of a function of the radial coordinate: exact for rational functions, else a scanned grid.

:class:`RootSearch` is mixed into :class:`gravicat.physics.equatorial.Equatorial`; it needs the
host's ``scale`` (the length scale of the parameters), ``_exact`` (parameter symbol -> exact value)
and ``chart.radial``. Roots are bracketed on a float grid (numpy) and refined with mpmath at
:data:`DPS` digits.
"""

from __future__ import annotations

from dataclasses import dataclass

DPS = 40  # working digits of the mpmath refinement
GRID = 4000  # points of the logarithmic scan grid
FAR = 1e6  # landmarks are searched up to FAR times the length scale of the parameters
NEAR = 1e-9  # ... and from NEAR times that scale beyond the inner edge


def _mp_sqrt(x):
    import mpmath

    return mpmath.sqrt(x) if x >= 0 else mpmath.nan


def _mp_real(v):
    import mpmath

    if isinstance(v, mpmath.mpc):
        return v.real if abs(v.imag) <= mpmath.mpf(10) ** (-DPS // 2) * (1 + abs(v.real)) else mpmath.nan
    return mpmath.mpf(v)


@dataclass(frozen=True)
class Root:
    radius: float
    multiplicity: int = 1
    rising: bool | None = None  # the function goes from negative to positive outward


@dataclass
class Roots:
    """Positive roots of a function of r and how they were found."""

    roots: list[Root]
    method: str


class RootSearch:
    """Root finding along the radial coordinate (a mixin of the equatorial model)."""

    scale: float

    def _refine(self, fn_mp, a: float, b: float) -> float | None:
        """A root of ``fn_mp`` bracketed by [a, b], to DPS digits; None at a pole."""
        import mpmath

        with mpmath.workdps(DPS):
            lo, hi = mpmath.mpf(a), mpmath.mpf(b)
            flo, fhi = fn_mp(lo), fn_mp(hi)
            if not (mpmath.isfinite(flo) and mpmath.isfinite(fhi)) or flo * fhi > 0:
                return None
            try:
                x = mpmath.findroot(fn_mp, (lo, hi), solver="anderson")
                ok = lo <= x <= hi
            except (ValueError, ZeroDivisionError, TypeError):
                ok = False
            if not ok:  # bisection: slow but sure
                for _ in range(4 * DPS):
                    mid = (lo + hi) / 2
                    fm = fn_mp(mid)
                    if not mpmath.isfinite(fm):
                        return None
                    if fm * flo > 0:
                        lo, flo = mid, fm
                    else:
                        hi = mid
                x = (lo + hi) / 2
            value = fn_mp(x)
            if not mpmath.isfinite(value) or abs(value) > mpmath.mpf(10) ** (-DPS // 3) * (abs(flo) + abs(fhi)):
                return None  # a pole, not a root
            # near a root |f| shrinks towards x, near a pole it grows: compare steps of 1e-15 and 2e-15 (relative)
            step = abs(x) * mpmath.mpf(10) ** -15 if x != 0 else mpmath.mpf(10) ** -15
            for sign in (1, -1):
                near, further = fn_mp(x + sign * step), fn_mp(x + 2 * sign * step)
                if mpmath.isfinite(near) and mpmath.isfinite(further) and further != 0 and \
                        abs(near) > 1.5 * abs(further):
                    return None  # a pole, not a root
            return float(x)

    def _scan(self, fn_np, fn_mp, lo: float, hi: float) -> list[Root]:
        """Roots where ``fn`` changes sign on a logarithmic grid in (lo, hi], refined."""
        import numpy as np

        if not hi > lo:
            return []
        x = lo + np.geomspace(NEAR * self.scale, hi - lo, GRID)
        with np.errstate(all="ignore"):
            y = np.asarray(fn_np(x), dtype=float)
        found = []
        ok = np.isfinite(y)
        exact = np.nonzero(ok & (y == 0))[0]
        for i in exact:  # a grid point hits the root exactly: the neighbours tell which way it crosses
            before, after = (y[i - 1] if i > 0 else np.nan), (y[i + 1] if i + 1 < len(y) else np.nan)
            crossing = bool(np.isfinite(before) and np.isfinite(after) and before * after < 0)
            found.append(Root(float(x[i]), 1, bool(after > 0) if crossing else None))
        change = np.nonzero(ok[:-1] & ok[1:] & (np.sign(y[:-1]) * np.sign(y[1:]) < 0))[0]
        for i in change:
            root = self._refine(fn_mp, float(x[i]), float(x[i + 1]))
            if root is not None:
                found.append(Root(root, 1, bool(y[i] < 0)))
        return sorted(found, key=lambda q: q.radius)

    def _positive_roots(self, expr) -> Roots:
        """All positive roots of a function of r given exactly (parameters substituted)."""
        import sympy as sp

        r = self.chart.radial
        params = set(self._exact)
        if any(p.exp.free_symbols & params for p in expr.atoms(sp.Pow)):
            # a parameter in an exponent (r**(4*sigma), as in Levi-Civita-type metrics): exact rational powers
            # of drawn values can take sympy unbounded memory, and the numerator is no polynomial anyway; the
            # grid scan takes the values at DPS + 10 digits
            return self._scan_any(expr.subs({k: sp.Float(v, DPS + 10) for k, v in self._exact.items()}))
        expr = expr.subs(self._exact)
        try:
            together = sp.cancel(sp.together(expr))
            num, den = sp.fraction(together)
            if num.free_symbols <= {r} and num.is_polynomial(r) and den.free_symbols <= {r}:
                poly = sp.Poly(num, r)
                if poly.is_zero:
                    return Roots([], "identically zero")
                pairs = []
                if poly.get_domain().is_QQ or poly.get_domain().is_ZZ:
                    pairs = [(float(sp.N(x, DPS)), k) for x, k in sp.real_roots(poly, multiple=False)]
                    method = "exact real roots of the numerator polynomial"
                else:
                    for factor, k in poly.sqf_list()[1]:
                        for z in factor.nroots(n=DPS, maxsteps=200):
                            re_, im_ = (complex(z).real, complex(z).imag)
                            if abs(im_) <= 1e-20 * (1 + abs(re_)):
                                pairs.append((re_, k))
                    method = "real roots of the numerator polynomial (40-digit numerics)"
                roots = [Root(x, k) for x, k in pairs
                         if x > 0 and den.subs(r, x) != 0 and abs(sp.N(den.subs(r, sp.Float(x, DPS)))) > 1e-30]
                return Roots(sorted(roots, key=lambda q: q.radius), method)
        except (sp.PolynomialError, NotImplementedError, sp.polys.polyerrors.GeneratorsNeeded, ValueError,
                TypeError):
            pass
        return self._scan_any(expr)

    def _scan_any(self, expr) -> Roots:
        """Sign changes and double roots of ``expr`` (a function of r only) on a grid."""
        import mpmath
        import numpy as np
        import sympy as sp

        r = self.chart.radial
        f_np = sp.lambdify(r, expr, modules="numpy")
        f_mp = sp.lambdify(r, expr, modules="mpmath")
        d_np = sp.lambdify(r, sp.diff(expr, r), modules="numpy")
        d_mp = sp.lambdify(r, sp.diff(expr, r), modules="mpmath")

        def real_np(fn):
            def wrapped(x):
                v = np.broadcast_to(np.asarray(fn(x)), np.shape(x))
                if np.iscomplexobj(v):
                    v = np.where(np.abs(v.imag) <= 1e-12 * (1 + np.abs(v.real)), v.real, np.nan)
                return v.astype(float)
            return wrapped

        def real_mp(fn):
            return lambda x: _mp_real(fn(x))

        lo, hi = 0.0, FAR * self.scale
        roots = self._scan(real_np(f_np), real_mp(f_mp), lo, hi)
        fm = real_mp(f_mp)
        for q in self._scan(real_np(d_np), real_mp(d_mp), lo, hi):
            with mpmath.workdps(DPS):
                x = mpmath.mpf(q.radius)
                around = abs(fm(x * mpmath.mpf("0.9"))) + abs(fm(x * mpmath.mpf("1.1")))
                if abs(fm(x)) <= mpmath.mpf(10) ** (-DPS // 2) * around and all(
                        abs(p.radius - q.radius) > 1e-9 * q.radius for p in roots):
                    roots.append(Root(q.radius, 2))
        return Roots(sorted(roots, key=lambda q: q.radius),
                     f"sign changes and double roots on a {GRID}-point logarithmic grid, r in (0, {hi:.3g}]")
