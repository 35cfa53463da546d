"""ADM mass of an asymptotically flat slice, from the surface integral at large radius.

``M = (1/(16 pi)) lim_{R->oo} oint_{|x| = R} (d_j gamma_ij - d_i gamma_jj) n^i dA`` in asymptotically
Cartesian coordinates (R. Arnowitt, S. Deser and C. W. Misner, The dynamics of general relativity,
1962; E. Gourgoulhon, 3+1 Formalism in General Relativity, 2012, eq. 8.5). A chart in spherical
coordinates ``(r, theta, phi)`` is first written in Cartesian ones. The integral is evaluated
numerically (Gauss-Legendre in theta, trapezoid in phi) at two radii ``R`` and ``2R`` and extrapolated
in ``1/R`` (``M(R) = M + c/R + ...``).

Room: ``physics`` may import ``engine``, ``format`` and the core contract.
"""

from __future__ import annotations

from gravicat.errors import InputError

__all__ = ["adm_mass"]

_RADIAL = ("r", "rho", "R")


def _cartesian(sl):
    """The spatial metric as sympy expressions of (x, y, z), with those symbols."""
    import sympy as sp

    names = [str(c) for c in sl.coords]
    gamma = sp.Matrix(sl.spatial_metric)
    if names == ["x", "y", "z"]:
        return gamma, list(sl.coords)
    if len(names) == 3 and names[0] in _RADIAL and names[1] == "theta" and names[2] == "phi":
        x, y, z = sp.symbols("x y z", real=True)
        r = sp.sqrt(x**2 + y**2 + z**2)
        q = [r, sp.acos(z / r), sp.atan2(y, x)]
        J = sp.Matrix(3, 3, lambda a, i: sp.diff(q[a], (x, y, z)[i]))
        g = gamma.subs(dict(zip(sl.coords, q, strict=True)), simultaneous=True)
        return J.T * g * J, [x, y, z]
    raise InputError("split", f"chart {sl.spec.chart}",
                     "the ADM mass needs coordinates (x, y, z) or (r, theta, phi) on the slices")


def adm_mass(sl, values: dict, *, radius: float = 400.0, nodes: int = 24) -> float:
    """The ADM mass of the slice ``sl`` (a :class:`gravicat.physics.split.Slice`) at the parameter
    values ``values`` (name -> number; the time coordinate too, default 0)."""
    import numpy as np
    import sympy as sp

    gamma, X = _cartesian(sl)
    subs = {p: values.get(str(p), 0) for p in sl.spatial_spec.params}
    gamma = gamma.subs(subs)
    integrand = []  # (d_j gamma_ij - d_i gamma_jj) for i = x, y, z
    for i in range(3):
        integrand.append(sum(sp.diff(gamma[i, j], X[j]) - sp.diff(gamma[j, j], X[i]) for j in range(3)))
    f = sp.lambdify(X, integrand, "numpy")
    u, w = np.polynomial.legendre.leggauss(nodes)  # u = cos(theta)
    phi = np.linspace(0.0, 2 * np.pi, 2 * nodes, endpoint=False)
    U, P = np.meshgrid(u, phi, indexing="ij")
    W = np.repeat(w[:, None], phi.size, axis=1) * (2 * np.pi / phi.size)
    S = np.sqrt(1 - U**2)

    def at(R):
        n = [S * np.cos(P), S * np.sin(P), U]
        vals = f(R * n[0], R * n[1], R * n[2])
        flux = sum(np.broadcast_to(np.asarray(vals[i], dtype=float), U.shape) * n[i] for i in range(3))
        return float(np.sum(flux * W) * R**2 / (16 * np.pi))

    m1, m2 = at(radius), at(2 * radius)
    return 2 * m2 - m1
