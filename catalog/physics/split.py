"""The 3+1 split of a chart: lapse, shift, spatial metric, extrinsic curvature, and the constraints.

Slicing by one coordinate ``t`` of the chart (default: the first): the slices ``t = const`` must
be spacelike, i.e. ``g^tt < 0``; a sample point of the domain where it is not is reported.

Conventions (signature -+++, c = G = 1; the sign of K as in Baumgarte and Shapiro, Numerical
Relativity, 2010, eq. 2.49, and Misner, Thorne and Wheeler, Gravitation, 1973, eq. 21.67):

* lapse ``alpha = 1/sqrt(-g^tt)``, shift ``beta_i = g_ti``, ``beta^i = gamma^ij beta_j = -g^ti/g^tt``,
  spatial metric ``gamma_ij = g_ij`` (i, j spatial);
* extrinsic curvature ``K_ij = -(1/(2 alpha)) (d_t gamma_ij - D_i beta_j - D_j beta_i)``, which equals
  ``-alpha Gamma^t_ij`` of the four-metric; it is computed that way, from the engine's Christoffel
  symbols. ``K = gamma^ij K_ij = -nabla_a n^a``: slices that expand have ``K < 0``;
* matter from the entry's claim (:mod:`gravicat.physics.claims`, the one stress tensor):
  ``rho = n^a n^b T_ab``, ``S_i = -gamma_i^a n^b T_ab`` with ``n_a = -alpha d_a t``;
* Hamiltonian constraint ``R + K^2 - K_ij K^ij - 16 pi rho - 2 Lambda = 0``; momentum constraint
  ``D_j K^j_i - D_i K - 8 pi S_i = 0`` (the index-lowered form of ``D_j (K^ij - gamma^ij K) = 8 pi S^i``).

The three-metric is a chart of its own: its curvature (spatial Christoffel symbols and Ricci scalar)
comes from the engine's :class:`gravicat.engine.geometry.Geometry` on that chart, with the time
coordinate as a parameter, and the constraints are proved there with the engine's exact proof
(:meth:`Geometry.verify`: sample points first, then the exact zero test), or fail with a
counterexample point.

Room: ``physics`` may import ``engine``, ``format`` and the core contract.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

from gravicat.engine.curvature import _Curvature  # the engine's one copy of the curvature formulas
from gravicat.errors import InputError

__all__ = ["CONVENTION", "Slice", "split_chart", "prove_constraints", "split_report"]

CONVENTION = (
    "signature (-,+,+,+), c = G = 1; alpha = 1/sqrt(-g^tt), beta_i = g_ti, beta^i = -g^ti/g^tt, gamma_ij = g_ij; "
    "K_ij = -(1/(2 alpha)) (d_t gamma_ij - D_i beta_j - D_j beta_i) = -alpha Gamma^t_ij "
    "(K = -nabla_a n^a: expanding slices have K < 0); "
    "Hamiltonian R + K^2 - K_ij K^ij = 16 pi rho + 2 Lambda; momentum D_j (K^ij - gamma^ij K) = 8 pi S^i; "
    "rho = n^a n^b T_ab, S_i = -gamma_i^a n^b T_ab"
)


@dataclass
class Slice:
    """The 3+1 split of one chart (sympy expressions in the chart's own symbols)."""

    spec: Any  # the four-dimensional ChartSpec
    time: int  # index of the time coordinate
    spatial: tuple[int, ...]  # indices of the spatial coordinates
    lapse: Any
    lapse_squared: Any
    shift: list  # beta^i
    shift_lower: list  # beta_i
    spatial_metric: list  # gamma_ij
    extrinsic: list  # K_ij
    trace_k: Any
    rho8: Any | None  # 8 pi rho (None: the claim defines no matter)
    momentum8: list | None  # 8 pi S_i
    cosmological_constant: Any | None
    spatial_spec: Any = None  # the three-metric as a ChartSpec (time coordinate as a parameter)
    notes: list = field(default_factory=list)
    # the four-dimensional Geometry the split was computed on (None for data given on the slice): its
    # exact values are what prove_constraints works on (added after the first release; may be None)
    geometry: Any = None

    @property
    def coords(self):
        return tuple(self.spec.coords[i] for i in self.spatial)

    @property
    def time_symbol(self):
        return self.spec.coords[self.time]


class _StressOnly:
    """A backend proxy whose Einstein tensor is zero: the claim's residual ``E[a,b]`` is then
    ``-8 pi T_ab``, the stress tensor of :func:`gravicat.physics.claims.field_equation_residuals`
    (the one copy), without writing a second one here."""

    def __init__(self, X):
        self._X = X

    def __getattr__(self, name):
        return getattr(self._X, name)

    @property
    def einstein(self):
        n = self._X.n
        return [[self._X.zero] * n for _ in range(n)]


class _NoLambda:
    def __init__(self, matter):
        self._m = matter

    def __getattr__(self, name):
        return getattr(self._m, name)

    def cosmological_constant(self):
        return None


def _stress8(geo, spec):
    """8 pi T_ab of the entry's claim on the Geometry ``geo`` (lists of field values), or None when the
    claim defines no matter (``none``); zero for vacuum and lambda-vacuum."""
    from gravicat.physics.claims import SpecMatter, field_equation_residuals

    claim = spec.field_equations
    n = geo.n
    if claim == "none":
        return None
    if claim in ("vacuum", "lambda-vacuum"):
        return [[geo.zero] * n for _ in range(n)]
    res = field_equation_residuals(_StressOnly(geo), claim, _NoLambda(SpecMatter(spec, geo)))
    out = [[geo.zero] * n for _ in range(n)]
    for a in range(n):
        for b in range(a, n):
            out[a][b] = out[b][a] = -res[geo.label("E", a, b)]
    return out


def _time_index(spec, time: str | None, source: str) -> int:
    names = [str(c) for c in spec.coords]
    if time is None:
        return 0
    if time not in names:
        raise InputError(source, "--time", f"{time!r} is not a coordinate of chart {spec.chart} ({', '.join(names)})")
    return names.index(time)


def _check_spacelike(geo, t: int, source: str) -> None:
    """Refuse slices that are not spacelike (g^tt >= 0) at a sample point of the domain."""
    from gravicat.engine.geometry import BudgetExceeded

    name = str(geo.coords[t])
    try:
        with geo.deadline(geo.budget):
            null = geo.is_zero(geo.ginv[t][t])
    except BudgetExceeded:
        null = False
    if null:
        raise InputError(source, f"chart {geo.spec.chart}",
                         f"the slices {name} = const are null (g^{name}{name} = 0 everywhere); "
                         "choose another time with --time or another chart")
    for pd in geo.sample_points():
        try:
            v = pd.ginv[t][t]
            z = pd.zero_test(v)
            positive = z is not None and (v >= 0 if not hasattr(v, "lower") else v.lower() >= 0)
        except (ZeroDivisionError, ValueError, TypeError):
            continue
        if z is True or positive:
            where = ", ".join(f"{k} = {val}" for k, val in pd.sample.shown.items())
            raise InputError(source, f"chart {geo.spec.chart}",
                             f"the slices {name} = const are not spacelike at {where} (g^{name}{name} >= 0 there); "
                             "choose another time with --time or another chart")


def _sym(geo, v):
    """An exact value of ``geo`` as sympy (the engine's factored form), with removable zeros of the
    denominator cancelled where cheap (:func:`_cancel_roots`)."""
    import sympy as sp

    return _cancel_roots(sp.sympify(geo.to_sympy(v)))


_CANCEL_LIMIT = 1000  # tree nodes: larger expressions are printed as the engine gives them


def _cancel_roots(e):
    """``e`` with common factors of numerator and denominator that involve a square root cancelled.

    The engine keeps denominators free of square roots (it multiplies by conjugates), so a value such
    as Kerr-Schild's ``beta^x = 2 M x / (r (r + 2M))``, ``r = sqrt(x^2 + y^2 + z^2)``, comes out as
    ``2 M x (2M - r) r / (r^2 (4M^2 - r^2))``: equal, but 0/0 at the horizon ``r = 2M``, where the
    slices are regular. For each ``sqrt(P)`` with ``P`` a polynomial, numerator and denominator are
    rewritten with ``s = sqrt(P)`` and reduced modulo ``P - s^2`` (lex order), then cancelled; the
    result is kept only when the denominator lost degree (something really cancelled). Expressions
    of more than :data:`_CANCEL_LIMIT` tree nodes, or with nested roots, are left as they are."""
    import sympy as sp

    for i, _node in enumerate(sp.preorder_traversal(e)):  # stop counting early: big values are common
        if i > _CANCEL_LIMIT:
            return e
    roots = [p for p in e.atoms(sp.Pow) if not p.exp.is_Integer]
    if any(q is not p and p.base.has(q) for p in roots for q in roots):
        return e  # nested roots (Kerr-Schild's radius): the reduction below would be slow and rarely helps
    for p in sorted(e.atoms(sp.Pow), key=sp.default_sort_key):
        if p.exp != sp.S.Half or not p.base.is_polynomial() or not p.base.free_symbols:
            continue
        s = sp.Dummy("s", positive=True)
        base = sp.expand(p.base)
        num, den = sp.fraction(sp.together(e.xreplace({p: s})))
        if not den.has(*base.free_symbols):
            continue
        others = sorted((num.free_symbols | den.free_symbols) - base.free_symbols - {s}, key=str)
        gens = [*sorted(base.free_symbols, key=str), *others, s]
        try:
            _, rn = sp.reduced(sp.expand(num), [base - s**2], *gens, order="lex")
            _, rd = sp.reduced(sp.expand(den), [base - s**2], *gens, order="lex")
            before = sp.Poly(rd, *gens).total_degree()
            q = sp.cancel(rn / rd)
            after = sp.Poly(sp.fraction(q)[1], *gens).total_degree()
        except (sp.PolynomialError, sp.GeneratorsNeeded, ZeroDivisionError):
            continue
        if after < before:
            e = sp.factor(q).xreplace({s: p})
    return e


def fix_parameters(spec, fixed: dict, *, source: str = "--set"):
    """``spec`` with the parameters of ``fixed`` (symbol -> exact number) substituted everywhere the
    split reads (metric, cosmological constant, potential, fluid, null dust, domain, ranges); they are
    no longer parameters. A domain relation the values make true everywhere is dropped; one they make
    false is an :class:`InputError` naming ``source``."""
    from dataclasses import replace

    import sympy as sp

    if not fixed:
        return spec

    def sub(e):
        return None if e is None else sp.sympify(e).xreplace(fixed)

    def relations(rels, what):
        out = []
        for rel in rels:
            new = rel.xreplace(fixed)
            if new == sp.true:
                continue
            if new == sp.false:
                raise InputError(source, None, f"with these values the {what} {sp.sstr(rel)} of chart {spec.chart} "
                                               "holds nowhere")
            out.append(new)
        return tuple(out)

    fluid = spec.fluid and replace(spec.fluid, density=sub(spec.fluid.density), pressure=sub(spec.fluid.pressure),
                                   velocity=tuple(sub(v) for v in spec.fluid.velocity))
    dust = spec.null_dust and replace(spec.null_dust, density=sub(spec.null_dust.density),
                                      vector=tuple(sub(v) for v in spec.null_dust.vector))
    return replace(
        spec, params=tuple(p for p in spec.params if p not in fixed), metric=spec.metric.xreplace(fixed),
        cosmological_constant=sub(spec.cosmological_constant),
        potential=None if spec.potential is None else tuple(sub(a) for a in spec.potential),
        fluid=fluid, null_dust=dust, domain=relations(spec.domain, "domain relation"),
        param_ranges=relations(spec.param_ranges, "parameter range"),
        defaults={k: v for k, v in spec.defaults.items() if k not in fixed},
        observers={}, invariants={}, limits=(), transforms={}, flat_when=(),
        extra={**{k: _substituted(v, fixed) for k, v in spec.extra.items()},
               "fixed": {str(k): v for k, v in fixed.items()}})


def _substituted(value, fixed):
    """``value`` (sympy objects, possibly in tuples, lists or dataclasses such as an initial-data chart's
    parts) with ``fixed`` substituted; anything else unchanged."""
    import dataclasses

    import sympy as sp

    if isinstance(value, (sp.Basic, sp.MatrixBase)):
        return value.xreplace(fixed)
    if isinstance(value, (tuple, list)):
        return type(value)(_substituted(v, fixed) for v in value)
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return dataclasses.replace(value, **{f.name: _substituted(getattr(value, f.name), fixed)
                                             for f in dataclasses.fields(value) if f.init})
    return value


def split_chart(spec, *, time: str | None = None, budget: float = 20.0, source: str = "split") -> Slice:
    """The 3+1 split of the ChartSpec ``spec`` by the coordinate ``time`` (name; default: the first).

    The lapse, shift, K_ij and the matter terms are computed as exact values of the engine
    (:class:`Geometry`: flint field elements on the fast path) and turned into sympy only for the
    Slice's printable fields (the engine's factored form, no further simplification); the Slice keeps
    the Geometry (``geometry``), so :func:`prove_constraints` works on the exact values directly.

    Raises :class:`InputError` when the chart has fewer than two coordinates, its metric is
    degenerate, or its slices are null or not spacelike at a sample point; :class:`CatalogError` when
    the exact values do not reduce within ``budget`` CPU seconds."""
    import sympy as sp

    from gravicat.engine.geometry import BudgetExceeded, Geometry
    from gravicat.errors import CatalogError
    from gravicat.format.chartspec import ChartSpec

    n = len(spec.coords)
    if n < 2:
        raise InputError(source, f"chart {spec.chart}", "a 3+1 split needs at least two coordinates")
    t = _time_index(spec, time, source)
    spatial = tuple(i for i in range(n) if i != t)
    geo = Geometry(spec, budget=budget)
    reason = geo.degeneracy()
    if reason:
        raise InputError(source, f"chart {spec.chart}", f"the metric is degenerate ({reason})")
    _check_spacelike(geo, t, source)
    try:
        with geo.deadline(budget):
            gi = geo.ginv
            chris = geo.christoffel  # Gamma^a_bc of the four-metric: K_ij = -alpha Gamma^t_ij
            gtt_inv = _sym(geo, gi[t][t])
            lapse_sq = -1 / gtt_inv
            lapse = geo._settle(1 / sp.sqrt(-gtt_inv))
            shift = [_sym(geo, -gi[t][i] / gi[t][t]) for i in spatial]
            k = [[lapse * -_sym(geo, chris[t][i][j]) for j in spatial] for i in spatial]
            gam_inv = _Spatial(geo, t, spatial).ginv
            tr = geo._sum([gam_inv[a][b] * chris[t][i][j] for a, i in enumerate(spatial)
                           for b, j in enumerate(spatial) if not geo.vanishes(chris[t][i][j])])
            trace_k = lapse * -_sym(geo, tr)
            T8 = _stress8(geo, spec)
            rho8 = momentum8 = None
            if T8 is not None:
                # rho = n^a n^b T_ab with n^a = -alpha g^at: 8 pi rho = -(g^at g^bt 8 pi T_ab) / g^tt
                rho8 = _sym(geo, _rho8(geo, T8, t))
                # S_i = -n^b T_ib = alpha g^bt T_ib
                momentum8 = [lapse * _sym(geo, s) for s in _s8_over_alpha(geo, T8, t, spatial)]
    except BudgetExceeded:
        raise CatalogError(f"{spec.entry}:{spec.chart}: the split did not reduce within {budget:g} s "
                           "(give a larger --budget)") from None
    lam = spec.cosmological_constant
    lam = None if lam is None or sp.sympify(lam) == 0 else sp.sympify(lam)
    tsym = spec.coords[t]
    sub = ChartSpec(
        entry=spec.entry,
        chart=f"{spec.chart} ({tsym} = const)",
        field_equations="none",
        coords=tuple(spec.coords[i] for i in spatial),
        params=tuple(spec.params) + (tsym,),
        metric=sp.ImmutableMatrix([[spec.metric[i, j] for j in spatial] for i in spatial]),
        functions=spec.functions,
        domain=spec.domain,
        param_ranges=spec.param_ranges,
        defaults=dict(spec.defaults),
        # the printable values, so that a Geometry of the three-chart (the path of data given on a slice)
        # can convert them; the split's own proofs work on ``geometry`` and never build it
        extra={"_exprs": [e for row in k for e in row] + [trace_k, *shift]
               + ([rho8, *momentum8] if rho8 is not None else []) + ([lam] if lam is not None else [])},
    )
    return Slice(spec=spec, time=t, spatial=spatial, lapse=lapse, lapse_squared=lapse_sq, shift=shift,
                 shift_lower=[spec.metric[t, i] for i in spatial],
                 spatial_metric=[[spec.metric[i, j] for j in spatial] for i in spatial], extrinsic=k,
                 trace_k=trace_k, rho8=rho8, momentum8=momentum8, cosmological_constant=lam, spatial_spec=sub,
                 geometry=geo)


def _rho8(X, T8, t):
    gi, n = X.ginv, X.n
    r = X._sum([gi[a][t] * gi[b][t] * T8[a][b] for a in range(n) for b in range(n)
                if not (X.vanishes(T8[a][b]) or X.vanishes(gi[a][t]) or X.vanishes(gi[b][t]))])
    return -r / gi[t][t]


def _s8_over_alpha(X, T8, t, spatial):
    gi, n = X.ginv, X.n
    return [X._sum([gi[b][t] * T8[i][b] for b in range(n) if not (X.vanishes(T8[i][b]) or X.vanishes(gi[b][t]))])
            for i in spatial]


class _Spatial(_Curvature):
    """The spatial metric gamma_ij = g_ij (i, j spatial) of a four-dimensional backend ``X`` (the
    :class:`Geometry` or one of its sample points) as a curvature backend of its own: the engine's
    formulas (:class:`gravicat.engine.curvature._Curvature`) on the spatial block of g, dg and ddg, in
    ``X``'s number type. Its inverse comes from the four-inverse, ``gamma^ij = g^ij - g^ti g^tj / g^tt``,
    and ``det gamma = g^tt det g``."""

    def __init__(self, X, t, spatial):
        self.X, self.t, self.S = X, t, spatial
        self.n = len(spatial)
        self.zero, self.one = X.zero, X.one
        self.field = getattr(X, "field", None)
        S = spatial
        self.g = [[X.g[a][b] for b in S] for a in S]
        self.dg = [[[X.dg[c][a][b] for b in S] for a in S] for c in S]

    @cached_property
    def ddg(self):
        S, d = self.S, self.X.ddg
        return [[[[d[c][e][a][b] for b in S] for a in S] for e in S] for c in S]

    def _iz(self, v) -> bool:
        return self.X._iz(v)

    def _nf(self, v):
        return self.X._nf(v)

    def _inverse(self):
        gi, t, S = self.X.ginv, self.t, self.S
        inv = [[gi[i][j] if self._iz(gi[t][i]) or self._iz(gi[t][j])
                else self._nf(gi[i][j] - gi[t][i] * gi[t][j] / gi[t][t]) for j in S] for i in S]
        return inv, self._nf(self.X.det * gi[t][t])


# -- constraints ----------------------------------------------------------------------------------


def _hamiltonian(sl: Slice):
    m = len(sl.spatial)
    kx = sl.extrinsic

    def fn(X):
        gi = X.ginv
        K = [[X.val(kx[i][j]) for j in range(m)] for i in range(m)]
        # K^i_j = gamma^ia K_aj
        Km = [[X._sum([gi[i][a] * K[a][j] for a in range(m) if not X.vanishes(gi[i][a])]) for j in range(m)]
              for i in range(m)]
        tr = X._sum([Km[i][i] for i in range(m)])
        kk = X._sum([Km[i][j] * Km[j][i] for i in range(m) for j in range(m)])
        h = X.ricci_scalar + tr * tr - kk
        if sl.rho8 is not None:
            h = h - 2 * X.val(sl.rho8)
        if sl.cosmological_constant is not None:
            h = h - 2 * X.val(sl.cosmological_constant)
        return {"hamiltonian": h}

    return fn


def _momentum(sl: Slice):
    m = len(sl.spatial)
    kx = sl.extrinsic
    names = [str(c) for c in sl.coords]

    def fn(X):
        gi, G, dg = X.ginv, X.christoffel, X.dg
        z = X.vanishes
        K = [[X.val(kx[i][j]) for j in range(m)] for i in range(m)]
        dK = [[[X.dval(kx[i][j], c) for j in range(m)] for i in range(m)] for c in range(m)]  # d_c K_ij
        # d_c gamma^ij = -gamma^ia d_c gamma_ab gamma^bj
        dgi = [[[X._sum([-(gi[i][a] * dg[c][a][b] * gi[b][j]) for a in range(m) for b in range(m)
                         if not (z(gi[i][a]) or z(dg[c][a][b]) or z(gi[b][j]))]) for j in range(m)]
                for i in range(m)] for c in range(m)]
        out = {}
        for i in range(m):
            terms = []
            for j in range(m):
                for c in range(m):
                    if z(gi[j][c]):
                        continue
                    # D_c K_ji = d_c K_ji - Gamma^l_cj K_li - Gamma^l_ci K_jl
                    dk = [dK[c][j][i]]
                    dk += [-(G[l][c][j] * K[l][i]) for l in range(m) if not (z(G[l][c][j]) or z(K[l][i]))]
                    dk += [-(G[l][c][i] * K[j][l]) for l in range(m) if not (z(G[l][c][i]) or z(K[j][l]))]
                    terms.append(gi[j][c] * X._sum(dk))
                    # - d_i K = - d_i (gamma^jc K_jc)
                    terms.append(-(gi[j][c] * dK[i][j][c]))
                for c in range(m):
                    if not (z(dgi[i][j][c]) or z(K[j][c])):
                        terms.append(-(dgi[i][j][c] * K[j][c]))
            if sl.momentum8 is not None:
                terms.append(-X.val(sl.momentum8[i]))
            out[f"momentum[{names[i]}]"] = X._sum(terms)
        return out

    return fn


def _fast_hamiltonian(sl: Slice):
    """The Hamiltonian constraint on the four-dimensional backend: with K_ij = alpha L_ij,
    ``L_ij = -Gamma^t_ij`` and ``alpha^2 = -1/g^tt``, ``R + alpha^2 (L^2 - L_ij L^ij) - 16 pi rho - 2 Lambda``
    (every term rational in the engine's field: no square root of g^tt is needed)."""
    t, S, spec, lam = sl.time, sl.spatial, sl.spec, sl.cosmological_constant
    m = len(S)

    def fn(X):
        three = _Spatial(X, t, S)
        gam, ch, gi = three.ginv, X.christoffel, X.ginv
        z = X.vanishes
        L = [[-ch[t][i][j] for j in S] for i in S]
        Lm = [[X._sum([gam[i][a] * L[a][j] for a in range(m) if not (z(gam[i][a]) or z(L[a][j]))])
               for j in range(m)] for i in range(m)]
        tr = X._sum([Lm[i][i] for i in range(m)])
        ll = X._sum([Lm[i][j] * Lm[j][i] for i in range(m) for j in range(m) if not (z(Lm[i][j]) or z(Lm[j][i]))])
        h = three.ricci_scalar - (tr * tr - ll) / gi[t][t]
        T8 = _stress8(X, spec)
        if T8 is not None:
            h = h - 2 * _rho8(X, T8, t)
        if lam is not None:
            h = h - 2 * X.val(lam)
        return {"hamiltonian": h}

    return fn


def _fast_momentum(sl: Slice):
    """The momentum constraint on the four-dimensional backend, divided by the lapse: with
    K_ij = alpha L_ij and ``d_j alpha = alpha w_j``, ``w_j = -(d_j g^tt)/(2 g^tt)``,
    ``(D_j K^j_i - D_i K - 8 pi S_i)/alpha = D_j L^j_i - d_i L + L^j_i w_j - L w_i - 8 pi S_i/alpha``.
    ``d_c L_ij = -d_c (g^te Gamma_eij)`` from the metric's first and second derivatives (the same
    numbers the engine's curvature is built from), so it is rational in the engine's field too."""
    t, S, spec = sl.time, sl.spatial, sl.spec
    m = len(S)
    names = [str(c) for c in sl.coords]

    def fn(X):
        three = _Spatial(X, t, S)
        n, gi, G1, ch, dg, ddg = X.n, X.ginv, X.christoffel_first, X.christoffel, X.dg, X.ddg
        gam, G3 = three.ginv, three.christoffel
        z = X.vanishes
        # d_c g^te = -g^ta d_c g_ab g^be  (c spatial)
        dgt = [[X._sum([-(gi[t][a] * dg[S[c]][a][b] * gi[b][e]) for a in range(n) for b in range(n)
                        if not (z(gi[t][a]) or z(dg[S[c]][a][b]) or z(gi[b][e]))]) for e in range(n)]
               for c in range(m)]

        def dgamma_first(c, e, i, j):  # d_c Gamma_eij = (d_c d_i g_ej + d_c d_j g_ei - d_c d_e g_ij)/2
            terms = [v for v in (ddg[c][i][e][j], ddg[c][j][e][i]) if not z(v)]
            if not z(ddg[c][e][i][j]):
                terms.append(-ddg[c][e][i][j])
            return X._sum(terms) / 2 if terms else X.zero

        L = [[-ch[t][i][j] for j in S] for i in S]
        dL = [[[-X._sum([dgt[c][e] * G1[e][S[i]][S[j]] for e in range(n) if not (z(dgt[c][e]) or z(G1[e][S[i]][S[j]]))]
                        + [gi[t][e] * dgamma_first(S[c], e, S[i], S[j]) for e in range(n) if not z(gi[t][e])])
                 for j in range(m)] for i in range(m)] for c in range(m)]  # d_c L_ij
        # d_c gamma^ij = -gamma^ia d_c gamma_ab gamma^bj
        dgam = [[[X._sum([-(gam[i][a] * three.dg[c][a][b] * gam[b][j]) for a in range(m) for b in range(m)
                          if not (z(gam[i][a]) or z(three.dg[c][a][b]) or z(gam[b][j]))]) for j in range(m)]
                 for i in range(m)] for c in range(m)]
        Lm = [[X._sum([gam[j][a] * L[a][i] for a in range(m) if not (z(gam[j][a]) or z(L[a][i]))])
               for i in range(m)] for j in range(m)]  # L^j_i
        tr = X._sum([Lm[i][i] for i in range(m)])
        w = [-(dgt[j][t] / gi[t][t]) / 2 for j in range(m)]
        T8 = _stress8(X, spec)
        s8 = None if T8 is None else _s8_over_alpha(X, T8, t, S)
        out = {}
        for i in range(m):
            terms = []
            for j in range(m):
                for c in range(m):
                    if z(gam[j][c]):
                        continue
                    # gamma^jc D_c L_ji, D_c L_ji = d_c L_ji - Gamma^l_cj L_li - Gamma^l_ci L_jl
                    dk = [dL[c][j][i]]
                    dk += [-(G3[l][c][j] * L[l][i]) for l in range(m) if not (z(G3[l][c][j]) or z(L[l][i]))]
                    dk += [-(G3[l][c][i] * L[j][l]) for l in range(m) if not (z(G3[l][c][i]) or z(L[j][l]))]
                    terms.append(gam[j][c] * X._sum(dk))
                    terms.append(-(gam[j][c] * dL[i][j][c]))  # - d_i L: the gamma^jc d_i L_jc part
                    if not (z(dgam[i][j][c]) or z(L[j][c])):
                        terms.append(-(dgam[i][j][c] * L[j][c]))  # ... and its d_i gamma^jc L_jc part
                if not (z(Lm[j][i]) or z(w[j])):
                    terms.append(Lm[j][i] * w[j])
            if not (z(tr) or z(w[i])):
                terms.append(-(tr * w[i]))
            if s8 is not None:
                terms.append(-s8[i])
            out[f"momentum[{names[i]}]"] = X._sum(terms)
        return out

    return fn


def _outcome_dict(out) -> dict:
    status = {"pass": "proved", "fail": "violated"}.get(out.status, out.status)
    return {"status": status, "method": out.method, "detail": out.detail, "counterexample": out.counterexample}


def prove_constraints(sl: Slice, *, budget: float = 20.0, seed: int = 0) -> dict:
    """Prove the Hamiltonian and momentum constraints of a :class:`Slice` with the engine's exact proof:
    ``{"hamiltonian": {...}, "momentum": {...}}``, each with ``status`` (``proved``, ``violated``,
    ``inconclusive``, ``skipped``), ``method``, ``detail`` and ``counterexample`` (a point, or None)."""
    from gravicat.engine.geometry import Geometry

    if sl.rho8 is None:
        skipped = {"status": "skipped", "method": "none", "counterexample": None,
                   "detail": "the entry claims no field equations, so rho and S_i are not defined"}
        return {"hamiltonian": dict(skipped), "momentum": dict(skipped)}
    if sl.geometry is not None:  # a split chart: the exact values of its four-dimensional Geometry
        geo = sl.geometry
        return {
            "hamiltonian": _outcome_dict(geo.verify(_fast_hamiltonian(sl), budget=budget,
                                                    what="the Hamiltonian constraint")),
            "momentum": _outcome_dict(geo.verify(_fast_momentum(sl), budget=budget,
                                                 what="the momentum constraint (divided by the lapse)")),
        }
    geo3 = Geometry(sl.spatial_spec, budget=budget, seed=seed)
    reason = geo3.degeneracy()
    if reason:
        bad = {"status": "skipped", "method": "none", "counterexample": None,
               "detail": f"the spatial metric is degenerate ({reason})"}
        return {"hamiltonian": dict(bad), "momentum": dict(bad)}
    return {
        "hamiltonian": _outcome_dict(geo3.verify(_hamiltonian(sl), what="the Hamiltonian constraint")),
        "momentum": _outcome_dict(geo3.verify(_momentum(sl), what="the momentum constraint")),
    }


def spatial_ricci_scalar(sl: Slice, *, budget: float = 20.0):
    """The Ricci scalar of the spatial metric (sympy), from the engine's curvature of the three-chart."""
    from gravicat.engine.geometry import Geometry

    if sl.geometry is not None:
        geo = sl.geometry
        with geo.deadline(budget):
            return geo.to_sympy(_Spatial(geo, sl.time, sl.spatial).ricci_scalar)
    geo3 = Geometry(sl.spatial_spec, budget=budget)
    with geo3.deadline(budget):
        return geo3.to_sympy(geo3.ricci_scalar)


def _text(e) -> str:
    import sympy as sp

    return sp.sstr(e)


def split_report(entry: str, sl: Slice, constraints: dict, adm: dict | None, ricci=None) -> dict:
    """One chart's part of the JSON of ``gravicat split`` (tensors as nested lists of strings, in
    coordinate order with the time coordinate removed)."""
    m = len(sl.spatial)
    out = {
        "chart": sl.spec.chart,
        "time": str(sl.time_symbol),
        "coordinates": [str(c) for c in sl.coords],
        "convention": CONVENTION,
        "lapse": _text(sl.lapse),
        "shift": [_text(b) for b in sl.shift],
        "shift_lower": [_text(b) for b in sl.shift_lower],
        "spatial_metric": [[_text(sl.spatial_metric[i][j]) for j in range(m)] for i in range(m)],
        "extrinsic_curvature": [[_text(sl.extrinsic[i][j]) for j in range(m)] for i in range(m)],
        "trace_K": _text(sl.trace_k),
        "spatial_ricci_scalar": None if ricci is None else _text(ricci),
        "energy_density": None if sl.rho8 is None else _text(sl.rho8 / (8 * _pi())),
        "momentum_density": None if sl.momentum8 is None else [_text(s / (8 * _pi())) for s in sl.momentum8],
        "constraints": constraints,
        "adm": adm,
    }
    return out


def _pi():
    import sympy as sp

    return sp.pi
