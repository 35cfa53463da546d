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
from typing import Any

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
    import sympy as sp

    return sp.sympify(geo.to_sympy(v))


def split_chart(spec, *, time: str | None = None, budget: float = 20.0, source: str = "split") -> Slice:
    """The 3+1 split of the ChartSpec ``spec`` by the coordinate ``time`` (name; default: the first).

    Raises :class:`InputError` when the chart is not four-dimensional or more, its metric is
    degenerate, or its slices are null or not spacelike at a sample point."""
    import sympy as sp

    from gravicat.engine.geometry import Geometry
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
    gi = geo.ginv
    gtt_inv = sp.factor(_sym(geo, gi[t][t]))
    lapse_sq = sp.factor(-1 / gtt_inv)
    lapse = geo._settle(sp.factor(1 / sp.sqrt(sp.factor(-gtt_inv))))
    shift = [sp.factor(_sym(geo, -gi[t][i] / gi[t][t])) for i in spatial]
    shift_lower = [spec.metric[t, i] for i in spatial]
    gamma = [[spec.metric[i, j] for j in spatial] for i in spatial]
    chris = geo.christoffel  # Gamma^a_bc of the four-metric: K_ij = -alpha Gamma^t_ij
    gamma_t = [[_sym(geo, chris[t][i][j]) for j in spatial] for i in spatial]
    k = [[sp.factor(-lapse * gamma_t[a][b]) for b in range(n - 1)] for a in range(n - 1)]
    # gamma^ij = g^ij - g^ti g^tj / g^tt (the inverse of the spatial metric, from the four-inverse)
    gam_inv = [[gi[i][j] - gi[t][i] * gi[t][j] / gi[t][t] for j in spatial] for i in spatial]
    tr = geo._sum([gam_inv[a][b] * chris[t][i][j] for a, i in enumerate(spatial) for b, j in enumerate(spatial)
                   if not geo.vanishes(chris[t][i][j])])
    trace_k = sp.factor(-lapse * _sym(geo, tr))
    T8 = _stress8(geo, spec)
    rho8 = momentum8 = None
    if T8 is not None:
        # rho = n^a n^b T_ab with n^a = -alpha g^at: 8 pi rho = -(g^at g^bt 8 pi T_ab) / g^tt
        r = geo._sum([gi[a][t] * gi[b][t] * T8[a][b] for a in range(n) for b in range(n)
                      if not geo.vanishes(T8[a][b])])
        rho8 = sp.factor(_sym(geo, -r / gi[t][t]))
        # S_i = -n^b T_ib = alpha g^bt T_ib
        momentum8 = [sp.factor(lapse * _sym(geo, geo._sum([gi[b][t] * T8[i][b] for b in range(n)
                                                             if not geo.vanishes(T8[i][b])])))
                     for i in spatial]
    lam = spec.cosmological_constant
    lam = None if lam is None or sp.sympify(lam) == 0 else sp.sympify(lam)
    tsym = spec.coords[t]
    extra = [e for row in k for e in row] + [trace_k, *shift]
    if rho8 is not None:
        extra += [rho8, *momentum8]
    if lam is not None:
        extra.append(lam)
    sub = ChartSpec(
        entry=spec.entry,
        chart=f"{spec.chart} ({tsym} = const)",
        field_equations="none",
        coords=tuple(spec.coords[i] for i in spatial),
        params=tuple(spec.params) + (tsym,),
        metric=sp.ImmutableMatrix(gamma),
        functions=spec.functions,
        domain=spec.domain,
        param_ranges=spec.param_ranges,
        defaults=dict(spec.defaults),
        extra={"_exprs": extra},
    )
    return Slice(spec=spec, time=t, spatial=spatial, lapse=lapse, lapse_squared=lapse_sq, shift=shift,
                 shift_lower=shift_lower, spatial_metric=gamma, extrinsic=k, trace_k=trace_k, rho8=rho8,
                 momentum8=momentum8, cosmological_constant=lam, spatial_spec=sub)


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
