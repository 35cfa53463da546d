"""A separation constant of the geodesic equations (Carter's constant in Kerr), found from the inverse metric.

If some function Sigma(r, theta) makes every Sigma g^ab a sum A^ab(r) + B^ab(theta), with g^ab = 0 between
r and any other coordinate and between theta and any other, and the metric depends on no coordinate but r
and theta, then 2 H Sigma = A^ab p_a p_b + B^ab p_a p_b with Sigma = f(r) + h(theta), and since H = -mu^2/2
is conserved,

    K = B^ab p_a p_b + mu^2 h(theta) = -(A^ab p_a p_b + mu^2 f(r))

depends on theta alone on the left and on r alone on the right (the other momenta are conserved), so K
is conserved (B. Carter, Phys. Rev. 174 (1968) 1559: the Hamilton-Jacobi equation separates). B^ab
(between conserved momenta) and h are fixed up to constants; they are taken to vanish at theta = pi/2 (at
the start's theta where that is singular), so that in Kerr's Boyer-Lindquist chart (Sigma = r^2 +
a^2 cos^2(theta)) K is Carter's Q = p_theta^2 + cos^2(theta) (a^2 (mu^2 - E^2) + L^2/sin^2(theta)).

Sigma is found from the ratio g^rr/g^thetatheta = Delta_r(r)/Delta_theta(theta): its factors that do not
depend on theta make Delta_r, and Sigma = Delta_r/g^rr. That each Sigma g^ab (and Sigma) splits is checked
on its mixed derivative d^2/dr dtheta at generic points (zero to 1e-9 of the size of the first
derivatives); B^ab and h are Sigma g^ab and Sigma at the start's r, minus their values at the reference
theta (for B^ab only between conserved momenta). The expressions are the engine's exact inverse metric
(:class:`gravicat.export.hamiltonian.HamiltonianSystem`); nothing here derives curvature.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

CHECK_POINTS = 5
TOLERANCE = 1e-9


@dataclass
class Separation:
    """K(x, p) = B^ab p_a p_b + mu^2 h(theta); call :meth:`values` with arrays ``(n, K)``."""

    fn: Any  # lambdified K(x0..x{n-1}, p0..p{n-1}, mu2)
    n: int

    def values(self, x, p, mu2: float):
        import numpy as np

        with np.errstate(all="ignore"):
            out = self.fn(*x, *p, mu2)
        return np.broadcast_to(np.asarray(out, dtype=float), np.shape(x[0]))


def find(system, radial: int | None, polar: int | None, x0) -> Separation | None:
    """The separation constant of ``system`` in the coordinates ``radial`` and ``polar``, or None when the
    inverse metric does not separate in them (or they are not both given)."""
    import numpy as np
    import sympy

    if radial is None or polar is None:
        return None
    n = system.n
    xs = sympy.symbols(f"x0:{n}", real=True)
    ps = sympy.symbols(f"p0:{n}", real=True)
    r, th = xs[radial], xs[polar]

    def g(a, b):
        return system._ginv(a, b)

    for b in range(n):
        if (b != radial and g(radial, b) != 0) or (b != polar and g(polar, b) != 0):
            return None
    if g(radial, radial) == 0 or g(polar, polar) == 0:
        return None
    pairs = [(a, b) for a in range(n) for b in range(a, n) if radial not in (a, b) and g(a, b) != 0]
    if set().union(*(g(a, b).free_symbols for a in range(n) for b in range(n))) - {r, th}:
        return None
    ratio = sympy.factor(sympy.cancel(g(radial, radial) / g(polar, polar)))
    delta_r = sympy.Integer(1)
    for factor in sympy.Mul.make_args(ratio):
        if th not in factor.free_symbols:
            delta_r *= factor
        elif r in factor.free_symbols:
            return None
    sigma = delta_r / g(radial, radial)
    parts = [sigma * g(a, b) for a, b in pairs] + [sigma]
    checks = []
    for e in parts:
        checks += [sympy.diff(e, r, th), sympy.Abs(sympy.diff(e, r)) + sympy.Abs(sympy.diff(e, th))]
    fn = sympy.lambdify([r, th], checks, modules="numpy", cse=True)
    rng = np.random.default_rng(20261205)
    r_start = float(x0[radial])
    for _ in range(CHECK_POINTS):
        rv, tv = r_start * rng.uniform(0.9, 1.3), rng.uniform(0.35, 2.75)
        with np.errstate(all="ignore"):
            values = [complex(v) for v in fn(rv, tv)]
        if not all(np.isfinite(v) for v in values):
            return None
        for k in range(0, len(values), 2):
            if abs(values[k]) > TOLERANCE * max(abs(values[k + 1]), 1e-300):
                return None
    r0 = sympy.Float(r_start, 17)
    # B^ab and h vanish at theta_ref (pi/2, else the start's theta): in Kerr K is then Carter's Q itself
    ref = sympy.pi / 2
    at_ref = [e.subs({r: r0, th: ref}) for e in parts]
    if not all(v.is_finite for v in at_ref):
        ref = sympy.Float(float(x0[polar]), 17)
        at_ref = [e.subs({r: r0, th: ref}) for e in parts]
        if not all(v.is_finite for v in at_ref):
            return None
    mu2 = sympy.Symbol("mu2", real=True)
    shift = [0 if polar in pair else at_ref[k] for k, pair in enumerate(pairs)]  # p_theta is not conserved
    K = sum(((1 if a == b else 2) * ((sigma * g(a, b)).subs(r, r0) - shift[k]) * ps[a] * ps[b]
             for k, (a, b) in enumerate(pairs)), start=sympy.Integer(0)) + mu2 * (sigma.subs(r, r0) - at_ref[-1])
    return Separation(fn=sympy.lambdify([*xs, *ps, mu2], K, modules="numpy", cse=True), n=n)


def report(system, radial, polar, x0, xs, ps, mu2: float) -> tuple[dict[str, Any], dict[str, Any]] | None:
    """(``separation`` entry of the probe's report, its drift) over the samples ``xs``, ``ps`` (arrays
    ``(n, K)``), or None without a separation constant or when the orbit stayed at one theta (K is then
    fixed by the start and says nothing)."""
    import numpy as np

    if polar is None or np.ptp(xs[polar]) <= 1e-9 * (1.0 + abs(float(x0[polar]))):
        return None
    found = find(system, radial, polar, x0)
    if found is None:
        return None
    K = found.values(xs, ps, mu2)
    change = float(np.max(np.abs(K - K[0])))
    value = {"initial": float(K[0]),
             "definition": "K = B^ab p_a p_b + mu^2 h(theta) where Sigma g^ab = A^ab(r) + B^ab(theta), "
                           "Sigma = f(r) + h(theta), B and h zero at theta = pi/2 (Carter 1968; Kerr: K = Q)"}
    drift = {"max_abs_change": change, "max_rel_change": change / abs(K[0]) if K[0] != 0 else None}
    return value, drift
