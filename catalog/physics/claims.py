"""The one implementation of what an entry claims: field-equation residuals, the Lorentzian
signature, and the residuals of declared limits, flat-when substitutions and asymptotic flatness.

Every function here is written over the engine's curvature (:class:`gravicat.engine.curvature._Curvature`)
and works on each of its backends: the symbolic chart :class:`gravicat.engine.geometry.Geometry`
(flint field elements on the fast path, sympy on the slow path), its sample points
:class:`gravicat.engine.pointdata.PointData` (exact rationals or intervals), and
:class:`gravicat.engine.curvature.BallCurvature` (balls at one point, the backend repair screens
candidates with). The verifiers (``field-equations``, ``signature``, ``limits``) and repair both
call these functions, so a change of convention reaches both at once.

Conventions (README): signature (-,+,+,+) (one minus sign, n - 1 plus signs), c = G = 1,
G_ab + Lambda g_ab = 8 pi T_ab with

* vacuum: T = 0 (checked as R_ab = 0 when no cosmological constant is declared, or it is 0);
* electrovacuum: 8 pi T_ab = 2 (F_ac F_b^c - g_ab F_cd F^cd / 4), F = dA, and Maxwell's
  equations nabla^a F_ab = 0;
* perfect fluid: T_ab = (rho + p) u_a u_b + p g_ab with g(u, u) = -1 (dust: p = 0);
* null dust: T_ab = rho k_a k_b with g(k, k) = 0.

The matter fields reach the residual through a :class:`Matter` object, because each backend holds
them differently: :class:`SpecMatter` evaluates the chart's declared expressions on a ``Geometry``
or ``PointData``; repair gives the values of its jets at a point.

Room: ``physics`` may import ``engine``, ``format`` and the core contract.
"""

from __future__ import annotations

from typing import Any, Protocol

__all__ = [
    "CLAIMS",
    "RADIAL",
    "MASS",
    "Matter",
    "SpecMatter",
    "missing_matter",
    "field_equation_residuals",
    "lorentzian",
    "signature_defect",
    "metric_difference",
    "riemann_residuals",
    "asymptotic_residuals",
    "radial_coordinate",
    "mass_parameter",
]

#: The field-equation claims an entry may make.
CLAIMS = ("vacuum", "lambda-vacuum", "electrovacuum", "perfect-fluid", "dust", "null-dust", "none")
#: Names of the radial coordinate (asymptotic flatness) and of the mass parameter, in order of preference.
RADIAL = ("r", "rho", "R")
MASS = ("M", "m")


class Matter(Protocol):
    """The matter fields of a chart at the backend's values (one value per call).

    ``cosmological_constant()`` is None when none is declared (or it is 0). ``rho8()`` / ``p8()``
    are 8 pi rho and 8 pi p of the fluid; ``null_rho8()`` is 8 pi rho of the null dust.
    """

    def cosmological_constant(self) -> Any: ...
    def dA(self, b: int, a: int) -> Any: ...  # d_a A_b
    def ddA(self, b: int, c: int, a: int) -> Any: ...  # d_c d_a A_b
    def velocity(self) -> list: ...
    def rho8(self) -> Any: ...
    def p8(self) -> Any: ...
    def null_vector(self) -> list: ...
    def null_rho8(self) -> Any: ...


class SpecMatter:
    """:class:`Matter` from a ChartSpec's declared expressions, on a Geometry or a PointData ``X``."""

    def __init__(self, spec, X):
        import sympy as sp

        self.spec = spec
        self.X = X
        lam = spec.cosmological_constant
        self._lam = None if lam is None or sp.sympify(lam) == 0 else sp.sympify(lam)
        self._pi8 = 8 * sp.pi

    def cosmological_constant(self):
        return self.X.val(self._lam) if self._lam is not None else None

    def dA(self, b, a):
        return self.X.dval(self.spec.potential[b], a)

    def ddA(self, b, c, a):
        return self.X.ddval(self.spec.potential[b], c, a)

    def velocity(self):
        return [self.X.val(v) for v in self.spec.fluid.velocity]

    def rho8(self):
        return self.X.val(self._pi8 * self.spec.fluid.density)

    def p8(self):
        return self.X.val(self._pi8 * self.spec.fluid.pressure)

    def null_vector(self):
        return [self.X.val(v) for v in self.spec.null_dust.vector]

    def null_rho8(self):
        return self.X.val(self._pi8 * self.spec.null_dust.density)


def missing_matter(spec, claim: str) -> str | None:
    """What a claim needs that the chart does not declare (a one-line message), or None."""
    if claim == "lambda-vacuum" and spec.cosmological_constant is None:
        return "the claim lambda-vacuum needs a cosmological-constant in the chart"
    if claim == "electrovacuum" and spec.potential is None:
        return "the claim electrovacuum needs a potential in the chart"
    if claim in ("perfect-fluid", "dust") and spec.fluid is None:
        return f"the claim {claim} needs a fluid in the chart"
    if claim == "null-dust" and spec.null_dust is None:
        return "the claim null-dust needs a null-dust in the chart"
    return None


def _total(X, terms):
    """Sum of backend values (structural zeros skipped; the field adds a common denominator once)."""
    return X._sum([t for t in terms if not X.vanishes(t)])


def _lower(X, vec):
    n = X.n
    return [_total(X, (X.g[a][b] * vec[b] for b in range(n) if not X.vanishes(X.g[a][b]))) for a in range(n)]


def field_equation_residuals(X, claim: str, matter: Matter) -> dict:
    """Residual components of the field equations ``claim`` on the backend ``X`` (label -> value).

    Every component vanishes exactly when the claim holds: ``R[a,b]`` (vacuum without a cosmological
    constant), else ``E[a,b]`` = G_ab + Lambda g_ab - 8 pi T_ab, plus ``maxwell[b]`` = nabla^a F_ab
    (electrovacuum), ``g(u,u)+1`` (perfect fluid, dust) or ``g(k,k)`` (null dust). ``claim`` is one
    of :data:`CLAIMS` other than ``none``.
    """
    n = X.n
    out = {}
    lam = matter.cosmological_constant()
    if claim == "vacuum" and lam is None:
        for a in range(n):
            for b in range(a, n):
                out[X.label("R", a, b)] = X.ricci[a][b]
        return out
    z = X.vanishes
    rhs = [[X.zero] * n for _ in range(n)]  # 8 pi T_ab
    if claim == "electrovacuum":
        F = [[matter.dA(b, a) - matter.dA(a, b) for b in range(n)] for a in range(n)]
        gi = X.ginv
        Fmix = [  # F_a^b
            [_total(X, (F[a][c] * gi[c][b] for c in range(n) if not z(gi[c][b]))) for b in range(n)]
            for a in range(n)
        ]
        F2 = _total(X, (Fmix[a][b] * Fmix[b][a] for a in range(n) for b in range(n)))  # F_ab F^ba = -F^2
        for a in range(n):
            for b in range(a, n):
                # 8 pi T_ab = 2 (F_ac F_b^c - g_ab F_cd F^cd / 4), F_cd F^cd = -F2
                v = _total(X, (F[a][c] * Fmix[b][c] for c in range(n) if not z(F[a][c]) and not z(Fmix[b][c])))
                rhs[a][b] = (v + X.g[a][b] * F2 / 4) * 2
        # Maxwell: nabla^a F_ab = g^ac d_c F_ab - Gamma^e F_eb + Gamma^e_cb F_e^c, with the contracted
        # Christoffel symbol Gamma^e = g^ac Gamma^e_ac (the g^ac Gamma^e_cb F_ae term, rewritten with
        # g^ac F_ae = -F_e^c)
        G = X.christoffel
        Gc = [
            _total(X, (gi[a][c] * G[e][a][c] for a in range(n) for c in range(n) if not z(gi[a][c])))
            for e in range(n)
        ]
        for b in range(n):
            terms = []
            for a in range(n):
                if a == b:
                    continue
                for c in range(n):
                    if z(gi[a][c]):
                        continue
                    d = matter.ddA(b, c, a) - matter.ddA(a, c, b)
                    if not z(d):
                        terms.append(gi[a][c] * d)
            terms += [-(Gc[e] * F[e][b]) for e in range(n) if not z(Gc[e]) and not z(F[e][b])]
            terms += [
                G[e][c][b] * Fmix[e][c] for e in range(n) for c in range(n) if not z(G[e][c][b]) and not z(Fmix[e][c])
            ]
            out[X.label("maxwell", b)] = _total(X, terms)
    elif claim in ("perfect-fluid", "dust"):
        u = matter.velocity()
        ul = _lower(X, u)
        rho8 = matter.rho8()
        p8 = matter.p8() if claim == "perfect-fluid" else X.zero
        for a in range(n):
            for b in range(a, n):
                rhs[a][b] = (rho8 + p8) * ul[a] * ul[b] + p8 * X.g[a][b]
        out["g(u,u)+1"] = _total(X, (ul[a] * u[a] for a in range(n))) + 1
    elif claim == "null-dust":
        k = matter.null_vector()
        kl = _lower(X, k)
        rho8 = matter.null_rho8()
        for a in range(n):
            for b in range(a, n):
                rhs[a][b] = rho8 * kl[a] * kl[b]
        out["g(k,k)"] = _total(X, (kl[a] * k[a] for a in range(n)))
    Gt = X.einstein
    for a in range(n):
        for b in range(a, n):
            v = Gt[a][b] - rhs[a][b]
            if lam is not None:
                v = v + lam * X.g[a][b]
            out[X.label("E", a, b)] = v
    return out


# -- signature -------------------------------------------------------------------------


def lorentzian(n: int) -> tuple[int, int, int]:
    """The (negative, zero, positive) eigenvalue counts of a Lorentzian metric in ``n`` dimensions."""
    return (1, 0, n - 1)


def signature_defect(counts: tuple[int, int, int], n: int) -> int:
    """How far eigenvalue sign counts (from :func:`gravicat.engine.curvature.inertia`) are from
    Lorentzian: 0 exactly when they are (1, 0, n - 1)."""
    want = lorentzian(n)
    return sum(abs(c - w) for c, w in zip(counts, want, strict=True))


# -- limits ----------------------------------------------------------------------------


def metric_difference(ours, theirs, n: int, label) -> dict:
    """Components g_ij (i <= j) of a limit of ours minus the target's (label -> value): the residual of
    a declared limit. ``label(i, j)`` names a component."""
    return {label(i, j): ours[i][j] - theirs[i][j] for i in range(n) for j in range(i, n)}


def riemann_residuals(X) -> dict:
    """Components R^a_bcd (c < d) of the backend ``X``: the residual of a flat-when substitution."""
    n, R = X.n, X.riemann
    return {
        X.label("Riem", a, b, c, d): R[a][b][c][d]
        for a in range(n)
        for b in range(n)
        for c in range(n)
        for d in range(c + 1, n)
    }


def asymptotic_residuals(c0, c1, mass) -> dict:
    """Residuals of asymptotic flatness from g_tt = c0 + c1/r + O(1/r^2): ``g_tt + 1`` = c0 + 1 and,
    with a mass parameter, ``r*(g_tt + 1)`` = c1 - 2 M (mass None: only the first)."""
    out = {"g_tt + 1": c0 + 1}
    if mass is not None:
        out["r*(g_tt + 1)"] = c1 - 2 * mass
    return out


def radial_coordinate(names):
    """The radial coordinate among ``names`` (first of :data:`RADIAL` present, by name), or None."""
    by_name = {str(x): x for x in names}
    return next((by_name[r] for r in RADIAL if r in by_name), None)


def mass_parameter(names):
    """The mass parameter among ``names``: the first whose name is one of :data:`MASS`, or None."""
    return next((x for x in names if str(x) in MASS), None)
