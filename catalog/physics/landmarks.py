"""Landmarks of circular equatorial orbits: photon orbit, marginally bound orbit, ISCO, outermost stable orbit.

:class:`LandmarkSearch` is mixed into :class:`gravicat.physics.equatorial.Equatorial` (it uses the
host's circular-orbit quantities, its root search and its region). Where there is no rest energy at
infinity (a cosmological horizon, anti-de Sitter), "bound" means below the outward barrier of the
effective potential at the same angular momentum; :meth:`LandmarkSearch.barrier` finds that barrier
as the maximum of the potential, searched without reference to the grid that brackets it.
"""

from __future__ import annotations

import math
from functools import cached_property

from gravicat.physics.roots import DPS, NEAR

DIRECTIONS = ("prograde", "retrograde")
EDGE = 1e-6  # a root closer than this (relative) to the horizon is taken to coincide with it


class LandmarkSearch:
    """The effective potential, its outward barrier and the landmarks (a mixin of the equatorial model)."""

    scale: float
    notes: list[str]

    def _fns(self, direction: str, key: str, shift: float = 0.0):
        return (lambda x: self.orbit_np(x, direction)[key] - shift,
                lambda x: self.orbit_mp(x, direction)[key] - shift)

    def potential_np(self, r, L):
        """The energy E at which a particle of angular momentum L turns at r on the equator (the effective
        potential): g^tt E**2 - 2 g^tphi E L + g^phiphi L**2 = -1, future root, E = (-B L + sqrt(D (L**2 + C)))/C."""
        import numpy as np

        A, B, C = self.components_np(r)
        with np.errstate(all="ignore"):
            D = B * B - A * C
            return (-B * L + np.sqrt(D * (L * L + C))) / C

    def barrier(self, radius: float, L: float) -> float:
        """The highest value of the effective potential for angular momentum L between ``radius`` and the outer
        edge: a particle with less energy cannot escape outward. 1 (the rest energy far away) in an
        asymptotically flat region; infinite when the potential grows without limit (anti-de Sitter)."""
        import numpy as np

        hi = self.outer_edge
        if not hi > radius:
            return math.nan
        x = radius + np.geomspace(1e-7 * radius, hi - radius, 800)[:-1]
        v = self.potential_np(x, L)
        ok = np.isfinite(v)
        if not ok.any():
            return math.nan
        w = np.where(ok, v, -np.inf)
        best = float(np.max(w))
        if self.cosmological_horizon is None and self.domain_bounds[1] is None and not self.asymptotically_flat \
                and ok[-1] and ok[-2] and v[-1] > v[-2]:
            return math.inf  # still rising far out: the potential grows without limit (anti-de Sitter)
        # every interior local maximum of the grid is refined (at a marginally bound orbit the inner maximum, at r
        # itself, and the outer one are nearly equal, so the grid alone cannot tell which is higher); all of them
        # at once, so a plateau of rounding noise (a potential constant in r, as in the Einstein static universe)
        # costs no more than one peak, and no peak is dropped for looking like another. The value at a maximum
        # changes quadratically with the radius, so r to 1e-9 (relative) fixes it to rounding.
        peaks = np.nonzero((w[1:-1] >= w[:-2]) & (w[1:-1] >= w[2:]) & ok[1:-1])[0] + 1
        if len(peaks):
            best = max(best, _golden_max(lambda y: self.potential_np(y, L), x[peaks - 1], x[peaks + 1],
                                         1e-9 * x[peaks]))
        if self.asymptotically_flat:
            best = max(best, 1.0)
        return best

    def _is_bound(self, radius: float, energy: float, L: float) -> bool:
        if self.asymptotically_flat:
            return energy < 1
        b = self.barrier(radius, L)
        return bool(energy < b) if not math.isnan(b) else False

    def _bound_root(self, d: str, lo: float, hi: float) -> list[float]:
        """Radii where E of the circular orbit equals the outer barrier of the potential at its L (becoming bound
        outward), found on a grid and refined by Brent's method."""
        import numpy as np
        from scipy.optimize import brentq

        if not hi > lo:
            return []

        def f(x):
            o = self.orbit_np(np.array([x]), d)
            e, L = float(o["energy"][0]), float(o["L"][0])
            if not (math.isfinite(e) and math.isfinite(L)):
                return math.nan
            b = self.barrier(x, L)
            return e - b if math.isfinite(b) else -1.0

        xs = lo + np.geomspace(NEAR * self.scale, hi - lo, 160)
        ys = np.array([f(float(x)) for x in xs])
        out = []
        for k in range(len(xs) - 1):
            if np.isfinite(ys[k]) and np.isfinite(ys[k + 1]) and ys[k] > 0 > ys[k + 1]:
                out.append(float(brentq(f, float(xs[k]), float(xs[k + 1]), xtol=1e-14 * float(xs[k]), rtol=1e-15)))
        return out

    @cached_property
    def landmarks(self) -> dict[str, dict[str, float | None]]:
        """Photon orbit, marginally bound orbit, ISCO and (where stable orbits end outward, as with a positive
        cosmological constant) the outermost stable circular orbit, for each direction (None when absent)."""
        import mpmath
        import numpy as np

        out: dict[str, dict[str, float | None]] = {"photon_orbits": {}, "marginally_bound": {}, "isco": {},
                                                   "osco": {}}
        lo, hi = self.inner_edge, self.outer_edge
        degenerate = any(q.multiplicity > 1 and abs(q.radius - lo) <= 1e-12 * max(1.0, lo)
                         for q in self.horizons.roots)
        for d in DIRECTIONS:
            photon = [q for q in self._scan(*self._fns(d, "norm"), lo, hi) if q.rising is False]
            merged = lo > 0 and any(q.radius <= lo * (1 + EDGE) for q in photon)
            photon = [q for q in photon if q.radius > lo * (1 + EDGE)]
            ph = photon[-1].radius if photon else None
            at_edge = False
            if ph is None and lo > 0 and degenerate:
                # the degenerate limit (extremal Kerr in Boyer-Lindquist r): circular orbits exist down to the
                # degenerate horizon and become null there, so the photon orbit sits on it
                with mpmath.workdps(DPS):
                    near = [self.orbit_mp(mpmath.mpf(lo) * (1 + mpmath.mpf(10) ** -k), d)["norm"] for k in (10, 6)]
                if all(mpmath.isfinite(v) and v < 0 for v in near) and abs(near[0]) < abs(near[1]):
                    at_edge, ph = True, lo
            elif merged:
                self.notes.append(f"{d}: the photon orbit merges with the inner edge r = {lo:.10g}")
            start = ph if ph is not None else lo
            stable_in = [q for q in self._scan(*self._fns(d, "dE"), start, hi) if q.rising is True]
            stable_out = [q for q in self._scan(*self._fns(d, "dE"), start, hi) if q.rising is False]
            isco = stable_in[0].radius if stable_in else None
            if at_edge and isco is None:
                with mpmath.workdps(DPS):
                    near = [self.orbit_mp(mpmath.mpf(lo) * (1 + mpmath.mpf(10) ** -k), d)["dE"] for k in (10, 6, 4)]
                if all(mpmath.isfinite(v) and v > 0 for v in near):
                    isco = lo
            osco = None
            if isco is not None:
                later = [q.radius for q in stable_out if q.radius > isco]
                osco = later[0] if later else None
            if self.asymptotically_flat:
                bound = [q.radius for q in self._scan(*self._fns(d, "energy", 1.0), start, hi) if q.rising is False]
            else:
                bound = self._bound_root(d, start, isco if isco not in (None, lo) else hi)
            mb = bound[0] if bound else None
            if at_edge and mb is None:
                o = self.orbit_np(np.array([lo * (1 + 1e-6)]), d)
                if self._is_bound(lo * (1 + 1e-6), float(o["energy"][0]), float(o["L"][0])):
                    mb = lo
            out["photon_orbits"][d] = ph
            out["marginally_bound"][d] = mb
            out["isco"][d] = isco
            out["osco"][d] = osco
            if at_edge:
                same = [k for k, v in (("photon orbit", ph), ("marginally bound orbit", mb), ("ISCO", isco))
                        if v == lo]
                self.notes.append(
                    f"{d}: degenerate limit: {', '.join(same)} at the degenerate horizon r = {lo:.10g} in these "
                    "coordinates; they are distinct orbits, at different proper distances from each other "
                    "(Bardeen, Press & Teukolsky 1972 for extremal Kerr)")
            if len(photon) > 1:
                self.notes.append(f"{d}: {len(photon)} photon orbits found; reporting the outermost")
            if len(bound) > 1:
                self.notes.append(f"{d}: {len(bound)} marginally bound radii; reporting the innermost")
            if len(stable_in) > 1:
                self.notes.append(f"{d}: {len(stable_in)} inner edges of stable regions; reporting the innermost")
            absent = [key for key, value in (("photon orbit", ph), ("marginally bound orbit", mb),
                                             ("ISCO", isco)) if value is None]
            if absent and mb is None and isco is not None and not self.asymptotically_flat and \
                    self.cosmological_horizon is None:
                self.notes.append(f"{d}: every circular orbit is bound (the potential grows without limit "
                                  "outward): no marginally bound orbit")
                absent = [a for a in absent if a != "marginally bound orbit"]
            if absent:
                listed = absent[0] if len(absent) == 1 else ", ".join(absent[:-1]) + " or " + absent[-1]
                self.notes.append(f"{d}: no {listed} found for r in ({lo:.6g}, {hi:.6g})")
        return out


GOLDEN = (math.sqrt(5) - 1) / 2


def _golden_max(fn, a, b, tol, max_iter: int = 200) -> float:
    """The highest value of ``fn`` near a local maximum in every bracket [a_i, b_i], all at once.

    ``fn`` is vectorised (one call per iteration evaluates one new point in each bracket). Each
    bracket shrinks by the golden ratio per iteration, towards a local maximum of ``fn`` inside
    it (a grid point above both bracket ends guarantees one), until it is narrower than ``tol_i``
    or 1e-5 of its position; a parabolic step then lands on the maximum. Values that are not
    finite count as -infinity. Returns -inf if none is finite.
    """
    import numpy as np

    def f(y):
        with np.errstate(all="ignore"):
            v = np.asarray(fn(y), dtype=float)
        return np.where(np.isfinite(v), v, -np.inf)

    a, b, tol = (np.array(v, dtype=float) for v in (a, b, tol))
    c, d = b - GOLDEN * (b - a), a + GOLDEN * (b - a)
    fc, fd = f(c), f(d)
    best = float(max(np.max(fc), np.max(fd)))
    coarse = np.maximum(tol, 1e-5 * (np.abs(a) + np.abs(b)))
    for _ in range(max_iter):
        if np.all(b - a <= coarse):
            break
        left = fc >= fd  # a maximum lies in [a, d]: d becomes the right end, c the new upper point
        a, b = np.where(left, a, c), np.where(left, d, b)
        new = np.where(left, b - GOLDEN * (b - a), a + GOLDEN * (b - a))
        value = f(new)
        c, d, fc, fd = (np.where(left, new, d), np.where(left, c, new),
                        np.where(left, value, fd), np.where(left, fc, value))
        best = max(best, float(np.max(value)))
    # then one parabola through three points of each narrow bracket: its vertex is within O(h**2) of the
    # maximum, where the value is off by O(h**4), far below rounding; the value there is evaluated, not
    # extrapolated, so the result never exceeds a value the function takes
    m, h = (a + b) / 2, (b - a) / 4
    n = len(m)
    values = f(np.concatenate([m - h, m, m + h]))
    lo, mid, up = values[:n], values[n:2 * n], values[2 * n:]
    best = max(best, float(np.max(values)))
    with np.errstate(all="ignore"):
        curve = up - 2 * mid + lo
        shift = np.where(curve < 0, -h * (up - lo) / (2 * curve), 0.0)
    vertex = m + np.clip(np.nan_to_num(shift), -2 * h, 2 * h)
    return max(best, float(np.max(f(vertex))))
