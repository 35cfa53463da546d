"""ADM mass and angular momentum of an asymptotically flat slice, from surface integrals at large radius.

In asymptotically Cartesian coordinates, with ``n^i = x^i/R`` and ``dA`` the flat area element of the
sphere ``|x| = R``:

* mass ``M = (1/(16 pi)) lim oint (d_j gamma_ij - d_i gamma_jj) n^i dA`` (R. Arnowitt, S. Deser and
  C. W. Misner, The dynamics of general relativity, 1962; E. Gourgoulhon, 3+1 Formalism in General
  Relativity, 2012, sec. 8.3);
* angular momentum about the z axis ``J = (1/(8 pi)) lim oint (K_ij - K gamma_ij) phi^i n^j dA`` with
  the rotation generator ``phi = (-y, x, 0)`` (Gourgoulhon 2012, sec. 8.5), in the sign convention of
  :mod:`gravicat.physics.split` (``K = -nabla_a n^a``), so that Kerr has ``J = a M``.

A chart in spherical coordinates ``(r, theta, phi)`` (``r`` also spelled ``rho`` or ``R``) is first
written in Cartesian ones (``x = r sin(theta) cos(phi)``...; for Boyer-Lindquist this differs from the
flat map by ``O(a^2/r)``, which changes neither integral). The integrals are evaluated numerically
(Gauss-Legendre in ``cos(theta)``, trapezoid in ``phi``) at radii ``R`` and ``2 R`` and extrapolated in
``1/R`` (``Q(R) = Q + c/R + ...``); a third radius ``4 R`` checks that the extrapolation has settled.
The metric's derivatives in the mass integral are exact for spherical charts (sympy, in the chart's
own coordinates, combined with the Jacobian of the flat map) and fourth-order central differences
with step ``R/1000`` for Cartesian ones (error far below the tolerance; see ``_mass_integrand``).

The integrals mean something only under the ADM fall-off conditions ``gamma_ij - delta_ij = O(1/r)``
and ``K_ij = O(1/r^2)`` (Gourgoulhon 2012, sec. 8.2); :func:`adm_quantities` measures both decay rates
between ``R`` and ``2 R`` and refuses a slice that falls off too slowly (the Painleve-Gullstrand slices,
``K_ij ~ r^(-3/2)``), instead of printing a number that is not the ADM mass.

Room: ``physics`` may import ``engine``, ``format`` and the core contract.
"""

from __future__ import annotations

from gravicat.errors import InputError

__all__ = ["adm_mass", "adm_angular_momentum", "adm_quantities"]

_RADIAL = ("r", "rho", "R")
RADIUS = 400.0
NODES = 24
MASS_TOLERANCE = 1e-4  # relative: quadrature and extrapolation in 1/R (measured error ~1e-7 on Kerr)


def _cartesian(sl, tensors):
    """The sympy 3x3 ``tensors`` (covariant, in the slice's coordinates) and the scalars, written in
    Cartesian (x, y, z): (list of matrices, symbols, substitution for scalars)."""
    import sympy as sp

    names = [str(c) for c in sl.coords]
    if names == ["x", "y", "z"]:
        return [sp.Matrix(T) for T in tensors], list(sl.coords), {}
    if len(names) == 3 and names[0] in _RADIAL and names[1] == "theta" and names[2] == "phi":
        x, y, z = sp.symbols("x y z", real=True)
        r = sp.sqrt(x**2 + y**2 + z**2)
        q = [r, sp.acos(z / r), sp.atan2(y, x)]
        J = sp.Matrix(3, 3, lambda a, i: sp.diff(q[a], (x, y, z)[i]))
        sub = dict(zip(sl.coords, q, strict=True))
        return [J.T * sp.Matrix(T).subs(sub, simultaneous=True) * J for T in tensors], [x, y, z], sub
    raise InputError("split", f"chart {sl.spec.chart}",
                     "the ADM integrals need coordinates (x, y, z) or (r, theta, phi) on the slices")


def _numbers(sl, values: dict) -> dict:
    """Symbol -> number for every parameter of the slice (the time coordinate defaults to 0)."""
    out = {}
    for p in sl.spatial_spec.params:
        v = values.get(str(p))
        if v is None:
            if p == sl.time_symbol:
                v = 0
            else:
                raise InputError("--set", str(p), f"the ADM integrals need a value for {p}")
        out[p] = v
    return out


class _Sphere:
    """Quadrature on spheres |x| = R: nodes (unit normals) and weights."""

    def __init__(self, nodes: int):
        import numpy as np

        u, w = np.polynomial.legendre.leggauss(nodes)  # u = cos(theta)
        phi = np.linspace(0.0, 2 * np.pi, 2 * nodes, endpoint=False)
        U, P = np.meshgrid(u, phi, indexing="ij")
        S = np.sqrt(1 - U**2)
        self.n = [S * np.cos(P), S * np.sin(P), U]
        self.w = np.repeat(w[:, None], phi.size, axis=1) * (2 * np.pi / phi.size)
        self.shape = U.shape

    def grid(self, f, R):
        import numpy as np

        vals = f(*(R * c for c in self.n))
        return [np.broadcast_to(np.asarray(v, dtype=float), self.shape) for v in vals]

    def integral(self, values, R) -> float:
        import numpy as np

        return float(np.sum(values * self.w) * R**2)


def _numeric(X, subs, exprs):
    """A numpy function of (x, y, z) for the sympy ``exprs``, the other symbols fixed by ``subs``
    (passed as arguments rather than substituted: large expressions are printed once, with common
    subexpressions shared)."""
    import sympy as sp

    names = list(subs)
    raw = sp.lambdify([*X, *names], exprs, "numpy", cse=True, docstring_limit=0)
    values = [float(subs[k]) for k in names]
    return lambda *xyz: raw(*xyz, *values)


def _spherical(sl) -> bool:
    names = [str(c) for c in sl.coords]
    return len(names) == 3 and names[0] in _RADIAL and names[1] == "theta" and names[2] == "phi"


class _SphericalFields:
    """The Cartesian components of gamma_ij, d_k gamma_ij and K_ij, and K, of a slice in spherical
    coordinates, assembled numerically: the chart's own components (and d_c gamma_ab) are evaluated at
    ``(r, theta, phi)`` of each point and combined with the Jacobian ``J_ai = d q_a / d x_i`` and its
    derivatives (closed forms of the flat map), ``gamma_ij = J_ai J_bj gamma_ab`` and
    ``d_k gamma_ij = d_k J_ai J_bj gamma_ab + J_ai d_k J_bj gamma_ab + J_ai J_bj J_ck d_c gamma_ab``.
    The same numbers as the symbolic substitution, without printing large Cartesian expressions."""

    def __init__(self, sl, subs):
        import sympy as sp

        q = list(sl.coords)
        gamma, K = sp.Matrix(sl.spatial_metric), sp.Matrix(sl.extrinsic)
        comps = [(a, b) for a in range(3) for b in range(3)]
        self._g = _numeric(q, subs, [gamma[a, b] for a, b in comps])
        self._dg = _numeric(q, subs, [sp.diff(gamma[a, b], c) for c in q for a, b in comps])
        self._k = _numeric(q, subs, [K[a, b] for a, b in comps] + [sp.sympify(sl.trace_k)])
        x, y, z = X = sp.symbols("x y z", real=True)
        r = sp.sqrt(x**2 + y**2 + z**2)
        qx = [r, sp.acos(z / r), sp.atan2(y, x)]
        J = [[sp.diff(qx[a], X[i]) for i in range(3)] for a in range(3)]
        self._J = sp.lambdify(X, J, "numpy", cse=True, docstring_limit=0)
        self._dJ = sp.lambdify(X, [[[sp.diff(J[a][i], X[k]) for i in range(3)] for a in range(3)] for k in range(3)],
                               "numpy", cse=True, docstring_limit=0)

    @staticmethod
    def _arr(vals, shape, dims):
        import numpy as np

        return np.array([np.broadcast_to(np.asarray(v, dtype=float), shape) for v in vals]).reshape(*dims, *shape)

    def at(self, X, Y, Z):
        """(gamma (3, 3, ...), d gamma (3, 3, 3, ...) with the derivative index first, K (3, 3, ...), trace K)."""
        import numpy as np

        shape = np.shape(X)
        R = np.sqrt(X**2 + Y**2 + Z**2)
        q = (R, np.arccos(Z / R), np.arctan2(Y, X))
        J = self._arr([v for row in self._J(X, Y, Z) for v in row], shape, (3, 3))
        dJ = self._arr([v for m in self._dJ(X, Y, Z) for row in m for v in row], shape, (3, 3, 3))
        g = self._arr(self._g(*q), shape, (3, 3))
        dgq = self._arr(self._dg(*q), shape, (3, 3, 3))  # d_c gamma_ab
        kv = self._k(*q)
        Kq = self._arr(kv[:9], shape, (3, 3))
        trace = np.broadcast_to(np.asarray(kv[9], dtype=float), shape)
        gc = np.einsum("ai...,bj...,ab...->ij...", J, J, g)
        dgc = (np.einsum("kai...,bj...,ab...->kij...", dJ, J, g) + np.einsum("ai...,kbj...,ab...->kij...", J, dJ, g)
               + np.einsum("ai...,bj...,ck...,cab...->kij...", J, J, J, dgq))
        return gc, dgc, np.einsum("ai...,bj...,ab...->ij...", J, J, Kq), trace


def _mass_integrand(sl, subs):

    if _spherical(sl):
        fields = _SphericalFields(sl, subs)

        def flux(X, Y, Z):
            _g, dg, _k, _t = fields.at(X, Y, Z)
            return [sum(dg[j, i, j] - dg[i, j, j] for j in range(3)) for i in range(3)]

        def deviation(X, Y, Z):
            g = fields.at(X, Y, Z)[0]
            return [g[i, j] - (1 if i == j else 0) for i in range(3) for j in range(3)]

        return flux, deviation
    (gamma,), X, _ = _cartesian(sl, [sl.spatial_metric])
    deviation = _numeric(X, subs, [gamma[i, j] - (1 if i == j else 0) for i in range(3) for j in range(3)])

    def flux(X, Y, Z):
        # d_k gamma_ij by fourth-order central differences with step h = R/1000 (truncation ~ (h/R)^4 of
        # the derivative, rounding ~ 1e-16/h: both far below the 1e-4 tolerance), rather than printing
        # the symbolic derivatives of a large Cartesian metric (Kerr-Schild's)
        import numpy as np

        h = 1e-3 * float(np.max(np.sqrt(X**2 + Y**2 + Z**2)))
        point = [X, Y, Z]

        def dev(k, step):
            moved = [c + step if i == k else c for i, c in enumerate(point)]
            return np.array([np.broadcast_to(np.asarray(v, dtype=float), np.shape(X)) for v in deviation(*moved)])

        d = [((dev(k, -2 * h) - dev(k, 2 * h)) + 8 * (dev(k, h) - dev(k, -h))) / (12 * h) for k in range(3)]
        d = [a.reshape(3, 3, *np.shape(X)) for a in d]  # d[k][i, j] = d_k gamma_ij
        return [sum(d[j][i, j] - d[i][j, j] for j in range(3)) for i in range(3)]

    return flux, deviation


def _spin_integrand(sl, subs):
    import sympy as sp

    if _spherical(sl):
        fields = _SphericalFields(sl, subs)

        def momentum(X, Y, Z):
            g, _dg, K, trace = fields.at(X, Y, Z)
            phi = [-Y, X, 0 * X]
            return [sum((K[i, j] - trace * g[i, j]) * phi[i] for i in range(3)) for j in range(3)]

        def kcart(X, Y, Z):
            K = fields.at(X, Y, Z)[2]
            return [K[i, j] for i in range(3) for j in range(3)]

        return momentum, kcart
    (gamma, K), X, sub = _cartesian(sl, [sl.spatial_metric, sl.extrinsic])
    trace = sp.sympify(sl.trace_k)
    x, y, _z = X
    phi = [-y, x, 0]
    P = [sum((K[i, j] - trace * gamma[i, j]) * phi[i] for i in range(3)) for j in range(3)]  # P_j phi^i
    return _numeric(X, subs, P), _numeric(X, subs, [K[i, j] for i in range(3) for j in range(3)])


def _extrapolated(q):
    """Q at R, 2R, 4R -> (extrapolated value, change between the two extrapolations)."""
    a, b = 2 * q[1] - q[0], 2 * q[2] - q[1]
    return b, abs(b - a)


def adm_mass(sl, values: dict, *, radius: float = RADIUS, nodes: int = NODES) -> float:
    """The ADM mass surface integral of the slice ``sl`` (a :class:`gravicat.physics.split.Slice`) at the
    parameter values ``values`` (name -> number; the time coordinate defaults to 0), extrapolated in 1/R.
    No fall-off check here (see :func:`adm_quantities`)."""
    import numpy as np

    f, _ = _mass_integrand(sl, _numbers(sl, values))
    sphere = _Sphere(nodes)

    def at(R):
        vals = sphere.grid(f, R)
        return sphere.integral(sum(vals[i] * sphere.n[i] for i in range(3)), R) / (16 * np.pi)

    return _extrapolated([at(radius), at(2 * radius), at(4 * radius)])[0]


def adm_angular_momentum(sl, values: dict, *, radius: float = RADIUS, nodes: int = NODES) -> float:
    """The ADM angular momentum about the z axis (surface integral, extrapolated in 1/R); no fall-off
    check here (see :func:`adm_quantities`)."""
    import numpy as np

    f, _ = _spin_integrand(sl, _numbers(sl, values))
    sphere = _Sphere(nodes)

    def at(R):
        vals = sphere.grid(f, R)
        return sphere.integral(sum(vals[j] * sphere.n[j] for j in range(3)), R) / (8 * np.pi)

    return _extrapolated([at(radius), at(2 * radius), at(4 * radius)])[0]


def _decay(f, sphere, R) -> float | None:
    """The power p with max|f| ~ R^-p between R and 2R (None when f vanishes there)."""
    import numpy as np

    a = max(float(np.max(np.abs(v))) for v in sphere.grid(f, R))
    b = max(float(np.max(np.abs(v))) for v in sphere.grid(f, 2 * R))
    if a < 1e-13 and b < 1e-13:
        return None
    if b == 0:
        return float("inf")
    return float(np.log2(a / b)) if a > 0 else 0.0


def _show(v) -> str:
    return f"{float(v):.10g}"


def adm_quantities(sl, values: dict, *, asymptotically_flat: bool, radius: float = RADIUS,
                   nodes: int = NODES) -> dict:
    """The ``adm`` part of ``gravicat split``'s report: ``mass`` and ``angular_momentum`` (floats, or None
    with ``note`` saying why), each compared with the entry's parameters (``mass_check``,
    ``angular_momentum_check``: ``"matches M"``, ``"differs from a*M = ..."``...), with the values and
    the radii used. ``values``: name -> number for every parameter (the time coordinate defaults to 0).
    """
    import numpy as np

    out = {"mass": None, "angular_momentum": None, "mass_check": None, "angular_momentum_check": None,
           "parameters": {k: float(v) for k, v in values.items()}, "radii": [radius, 2 * radius, 4 * radius],
           "note": None}
    if not asymptotically_flat:
        out["note"] = "not computed: the entry is not tagged asymptotically-flat"
        return out
    names = [str(c) for c in sl.coords]
    if not (names == ["x", "y", "z"] or (len(names) == 3 and names[0] in _RADIAL and names[1:] == ["theta", "phi"])):
        out["note"] = ("not computed: the ADM integrals need slices in (x, y, z) or (r, theta, phi), "
                       f"these are in ({', '.join(names)})")
        return out
    subs = _numbers(sl, values)
    sphere = _Sphere(nodes)
    fm, dev = _mass_integrand(sl, subs)
    fj, kcart = _spin_integrand(sl, subs)
    p_gamma, p_k = _decay(dev, sphere, radius), _decay(kcart, sphere, radius)
    if p_gamma is not None and p_gamma < 0.9:
        out["note"] = (f"not computed: gamma_ij - delta_ij falls off as r^-{p_gamma:.2f}; the ADM integrals need "
                       "O(1/r) (not asymptotically flat in these coordinates)")
        return out
    if p_k is not None and p_k < 1.8:
        out["note"] = (f"not computed: K_ij falls off as r^-{p_k:.2f} on these slices; the ADM integrals need "
                       "O(1/r^2) (e.g. Painleve-Gullstrand slices: use a slice with K_ij = O(1/r^2))")
        return out
    radii = out["radii"]
    mass_vals = [sphere.integral(sum(v * n for v, n in zip(sphere.grid(fm, R), sphere.n, strict=True)), R)
                 / (16 * np.pi) for R in radii]
    spin_vals = [sphere.integral(sum(v * n for v, n in zip(sphere.grid(fj, R), sphere.n, strict=True)), R)
                 / (8 * np.pi) for R in radii]
    mass, dm = _extrapolated(mass_vals)
    spin, dj = _extrapolated(spin_vals)
    scale = max(1.0, abs(mass))
    if dm > MASS_TOLERANCE * scale or dj > MASS_TOLERANCE * scale**2:
        shown = ", ".join(_show(v) for v in mass_vals)
        out["note"] = (f"not computed: the surface integrals do not settle at large radius (mass {shown} "
                       f"at R = {', '.join(f'{R:g}' for R in radii)})")
        return out
    out["mass"], out["angular_momentum"] = mass, spin
    params = {k: float(v) for k, v in values.items()}
    mname = next((n for n in ("M", "m") if n in params), None)
    if mname is not None:
        want = params[mname]
        ok = abs(mass - want) <= MASS_TOLERANCE * max(1.0, abs(want))
        out["mass_check"] = f"matches {mname}" if ok else f"differs from {mname} = {_show(want)}"
    if "a" in params and mname is not None:
        want, label = params["a"] * params[mname], f"a*{mname}"
    elif "a" not in params:
        want, label = 0.0, "0 (the entry has no rotation parameter a)"
    else:
        want, label = None, None
    if want is not None:
        ok = abs(spin - want) <= MASS_TOLERANCE * scale**2
        short = label.split(" ")[0]
        out["angular_momentum_check"] = f"matches {label}" if ok else f"differs from {short} = {_show(want)}"
    return out
