"""Symmetries of a chart: Killing vectors and Killing tensors, proved exactly.

* Killing's equation for a vector field xi^a (components in the chart's coordinates):
  ``(L_xi g)_ab = xi^c d_c g_ab + g_cb d_a xi^c + g_ac d_b xi^c = 0`` (Wald, General Relativity,
  1984, eq. C.2.8 and sec. C.3), written with the engine's first derivatives of the metric;
* the Killing tensor equation for a symmetric K_ab: ``nabla_(a K_bc) = 0``, checked as
  ``nabla_a K_bc + nabla_b K_ca + nabla_c K_ab = 0`` for a <= b <= c, with
  ``nabla_a K_bc = d_a K_bc - Gamma^d_ab K_dc - Gamma^d_ac K_bd`` and the engine's Christoffel symbols
  (Walker & Penrose 1970 for Kerr's);
* the obvious Killing vectors: d/dx^c for every coordinate x^c the metric does not depend on
  (every d_c g_ab is exactly zero).

Each residual is proved with :meth:`gravicat.engine.geometry.Geometry.verify` (sampled stage, then the
exact normal form), so a wrong sign is caught with a counterexample. The field of the chart is built
over the vector or tensor components too (:func:`with_expressions`).

Status: a library slice (no command or verifier plugin yet). Room: physics.
"""

from __future__ import annotations

import dataclasses

__all__ = ["with_expressions", "killing_residuals", "killing_tensor_residuals", "obvious_killing_vectors",
           "prove_killing_vector", "prove_killing_tensor"]


def with_expressions(spec, exprs):
    """``spec`` with ``exprs`` (sympy) added to the expressions the exact field is built over."""
    extra = dict(spec.extra)
    extra["_exprs"] = list(extra.get("_exprs", ())) + list(exprs)
    return dataclasses.replace(spec, extra=extra)


def killing_residuals(X, xi) -> dict:
    """Components ``L[a,b]`` (a <= b) of the Lie derivative of g along ``xi`` (sympy components) on backend X."""
    n, g, dg, iz = X.n, X.g, X.dg, X._iz
    xv = [X.val(c) for c in xi]
    dxi = [[X.dval(xi[c], a) if not iz(xv[c]) else X.zero for a in range(n)] for c in range(n)]  # d_a xi^c
    out = {}
    for a in range(n):
        for b in range(a, n):
            terms = [xv[c] * dg[c][a][b] for c in range(n) if not iz(xv[c]) and not iz(dg[c][a][b])]
            terms += [g[c][b] * dxi[c][a] for c in range(n) if not iz(g[c][b]) and not iz(dxi[c][a])]
            terms += [g[a][c] * dxi[c][b] for c in range(n) if not iz(g[a][c]) and not iz(dxi[c][b])]
            out[X.label("L", a, b)] = X._sum(terms)
    return out


def killing_tensor_residuals(X, K) -> dict:
    """Components ``S[a,b,c]`` (a <= b <= c) of 3 nabla_(a K_bc) for the symmetric ``K`` (sympy K_ab) on X."""
    n, G, iz = X.n, X.christoffel, X._iz
    Kv = [[X.val(K[a][b]) for b in range(n)] for a in range(n)]

    def nabla(a, b, c):  # nabla_a K_bc
        terms = [] if iz(Kv[b][c]) else [X.dval(K[b][c], a)]
        terms += [-(G[d][a][b] * Kv[d][c]) for d in range(n) if not iz(G[d][a][b]) and not iz(Kv[d][c])]
        terms += [-(G[d][a][c] * Kv[b][d]) for d in range(n) if not iz(G[d][a][c]) and not iz(Kv[b][d])]
        return terms

    out = {}
    for a in range(n):
        for b in range(a, n):
            for c in range(b, n):
                out[X.label("S", a, b, c)] = X._sum(nabla(a, b, c) + nabla(b, c, a) + nabla(c, a, b))
    return out


def obvious_killing_vectors(geometry) -> list[str]:
    """Names of the coordinates the metric does not depend on (d/dx is then a Killing vector), proved exactly."""
    n, dg = geometry.n, geometry.dg
    return [str(geometry.coords[c]) for c in range(n)
            if all(geometry.is_zero(dg[c][a][b]) for a in range(n) for b in range(a, n))]


def prove_killing_vector(spec, xi, *, budget: float = 20.0, seed: int = 0):
    """Prove Killing's equation for the sympy components ``xi`` on the chart ``spec``: an engine ``Outcome``."""
    from gravicat.engine.geometry import Geometry

    geo = Geometry(with_expressions(spec, xi), budget=budget, seed=seed)
    return geo.verify(lambda X: killing_residuals(X, xi), what="Killing's equation")


def prove_killing_tensor(spec, K, *, budget: float = 20.0, seed: int = 0):
    """Prove the Killing tensor equation for the symmetric sympy matrix ``K`` (K_ab): an engine ``Outcome``."""
    from gravicat.engine.geometry import Geometry

    n = len(spec.coords)
    geo = Geometry(with_expressions(spec, [K[a][b] for a in range(n) for b in range(n)]), budget=budget, seed=seed)
    return geo.verify(lambda X: killing_tensor_residuals(X, K), what="the Killing tensor equation")
