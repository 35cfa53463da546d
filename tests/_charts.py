"""Small ChartSpec builders for the engine and verifier tests (not collected: no test_ prefix).

Each function returns a ChartSpec built directly from sympy objects, as
:func:`gravicat.format.metricfile.build_chart` would. The metrics are standard
textbook forms; the source of each is given beside it.
"""

from __future__ import annotations

import sympy as sp

from gravicat.format.chartspec import ChartSpec, Fluid, Invariant, Limit, NullDust

t, r, th, ph = sp.symbols("t r theta phi", real=True)
x, y, z, u, v = sp.symbols("x y z u v", real=True)
M = sp.Symbol("M", positive=True)
Q = sp.Symbol("Q", real=True)
a = sp.Symbol("a", real=True)  # Kerr spin: range 0 <= a < M
k = sp.Symbol("k", integer=True)
Lam = sp.Symbol("Lambda", positive=True)


def chart(coords, metric, params=(), *, entry="test", name="main", claim="vacuum", domain=(), ranges=(), **kw):
    """A ChartSpec from a sympy matrix (or a dict of line-element terms)."""
    n = len(coords)
    if isinstance(metric, dict):
        m = sp.zeros(n)
        for (i, j), val in metric.items():
            m[i, j] = val
            m[j, i] = val
        metric = m
    return ChartSpec(
        entry=entry,
        chart=name,
        field_equations=claim,
        coords=tuple(coords),
        params=tuple(params),
        metric=sp.ImmutableMatrix(metric),
        domain=tuple(domain),
        param_ranges=tuple(ranges),
        **kw,
    )


def sph(f_tt, f_rr, R2=None):
    """Static spherically symmetric diag(f_tt, f_rr, R2, R2 sin^2)."""
    R2 = r**2 if R2 is None else R2
    return sp.diag(f_tt, f_rr, R2, R2 * sp.sin(th) ** 2)


def schwarzschild(**kw):
    # Misner, Thorne & Wheeler, Gravitation (1973), eq. 31.1
    f = 1 - 2 * M / r
    return chart((t, r, th, ph), sph(-f, 1 / f), (M,), domain=(r > 2 * M, th > 0, th < sp.pi), ranges=(M > 0,), **kw)


def reissner_nordstrom(**kw):
    # Misner, Thorne & Wheeler (1973), eq. 31.49 (geometrized Gaussian units, A = -Q/r dt)
    f = 1 - 2 * M / r + Q**2 / r**2
    return chart(
        (t, r, th, ph),
        sph(-f, 1 / f),
        (M, Q),
        claim=kw.pop("claim", "electrovacuum"),
        domain=(r > M + sp.sqrt(M**2 - Q**2), th > 0, th < sp.pi),
        ranges=(M > 0, Q > -M, Q < M),
        potential=kw.pop("potential", (-Q / r, 0, 0, 0)),
        **kw,
    )


def kerr_metric(mass=M, spin=a, charge=0, swap=False):
    # Boyer-Lindquist form: Misner, Thorne & Wheeler (1973), eq. 33.2 (Kerr-Newman with charge)
    S = r**2 + spin**2 * sp.cos(th) ** 2
    D = r**2 - 2 * mass * r + spin**2 + charge**2
    s2 = sp.sin(th) ** 2
    g = sp.zeros(4)
    g[0, 0] = -(D - spin**2 * s2) / S
    g[0, 3] = g[3, 0] = -spin * s2 * (r**2 + spin**2 - D) / S
    g[1, 1] = S / D if not swap else D / S
    g[2, 2] = S
    g[3, 3] = ((r**2 + spin**2) ** 2 - D * spin**2 * s2) * s2 / S
    return g


def kerr(metric=None, **kw):
    return chart(
        (t, r, th, ph),
        kerr_metric() if metric is None else metric,
        (M, a),
        domain=(r > M + sp.sqrt(M**2 - a**2), th > 0, th < sp.pi),
        ranges=(M > 0, a >= 0, a < M),
        **kw,
    )


def kerr_newman(**kw):
    # potential A = -Q r / Sigma (dt - a sin^2 dphi): MTW (1973), eq. 33.5
    S = r**2 + a**2 * sp.cos(th) ** 2
    A = (-Q * r / S, 0, 0, Q * r * a * sp.sin(th) ** 2 / S)
    return chart(
        (t, r, th, ph),
        kerr_metric(charge=Q),
        (M, a, Q),
        claim="electrovacuum",
        potential=A,
        domain=(r > M + sp.sqrt(M**2 - a**2 - Q**2), th > 0, th < sp.pi),
        ranges=(M > 0, a >= 0, a < M / 2, Q > -M / 2, Q < M / 2),
        **kw,
    )


afun = sp.Function("a")
H = sp.Function("H")


def flrw(**kw):
    # Weinberg, Gravitation and Cosmology (1972), eq. 14.2.1 (reduced-circumference form)
    A = afun(t)
    return chart(
        (t, r, th, ph),
        sp.diag(-1, A**2 / (1 - k * r**2), A**2 * r**2, A**2 * r**2 * sp.sin(th) ** 2),
        (k,),
        claim=kw.pop("claim", "none"),
        domain=(r > 0, r < sp.Rational(1, 2), th > 0, th < sp.pi),
        ranges=(k >= -1, k <= 1),
        functions=(A,),
        **kw,
    )


__all__ = [
    "ChartSpec",
    "Fluid",
    "Invariant",
    "Limit",
    "NullDust",
    "chart",
    "sph",
    "schwarzschild",
    "reissner_nordstrom",
    "kerr",
    "kerr_metric",
    "kerr_newman",
    "flrw",
    "afun",
    "H",
    "t",
    "r",
    "th",
    "ph",
    "x",
    "y",
    "z",
    "u",
    "v",
    "M",
    "Q",
    "a",
    "k",
    "Lam",
]
