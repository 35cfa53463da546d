"""Initial-data charts as 3+1 slices: the :class:`gravicat.physics.split.Slice` of an initial-data entry.

An initial-data chart (:mod:`gravicat.format.initialdata`) gives the spatial metric gamma_ij, the
extrinsic curvature K_ij, the lapse and shift and the matter terms on one slice. :func:`initial_slice`
puts them into the same :class:`~gravicat.physics.split.Slice` a spacetime chart's split gives, so the
one copy of the constraint residuals (:func:`gravicat.physics.split.prove_constraints`) proves them and
the initial-data exporters print them, whichever kind of entry they come from (:func:`slice_of_chart`).

The Slice's four-dimensional ``spec`` is the metric those data make at the slice (time coordinate
``t``, or ``t_`` when ``t`` is taken): ``g_tt = -alpha^2 + beta_k beta^k``, ``g_ti = beta_i``,
``g_ij = gamma_ij``; it names the time coordinate only, no evolution is implied. The trace of K uses
the engine's inverse metric of the three-chart (:class:`gravicat.engine.geometry.Geometry`).

Room: ``physics`` may import ``engine``, ``format`` and the core contract.
"""

from __future__ import annotations

from gravicat.errors import InputError

__all__ = ["is_initial_data_spec", "initial_slice", "slice_of_chart"]


def is_initial_data_spec(spec) -> bool:
    """Whether a ChartSpec is the spatial chart of an initial-data entry."""
    return spec.extra.get("kind") == "initial-data"


def initial_slice(spec, *, budget: float = 20.0):
    """The :class:`~gravicat.physics.split.Slice` of an initial-data ChartSpec (from
    :func:`gravicat.format.initialdata.build_initial_chart`)."""
    import sympy as sp

    from gravicat.engine.geometry import Geometry
    from gravicat.format.chartspec import ChartSpec
    from gravicat.physics.split import Slice

    if not is_initial_data_spec(spec):
        raise InputError(spec.extra.get("source", spec.entry), f"chart {spec.chart}", "not an initial-data chart")
    parts = spec.extra["initial_data"]
    gamma = spec.metric
    shift = list(parts.shift)
    shift_lower = [sp.factor(sum(gamma[i, j] * shift[j] for j in range(3))) for i in range(3)]
    geo = Geometry(spec, budget=budget)
    reason = geo.degeneracy()
    if reason:
        raise InputError(spec.extra.get("source", spec.entry), f"chart {spec.chart}",
                         f"the spatial metric is degenerate ({reason})")
    K = parts.extrinsic
    with geo.deadline(budget):
        tr = geo._sum([geo.ginv[i][j] * geo.val(K[i, j]) for i in range(3) for j in range(3)
                       if K[i, j] != 0 and not geo.vanishes(geo.ginv[i][j])])
        trace_k = sp.factor(geo.to_sympy(tr))
    names = {str(s) for s in (*spec.coords, *spec.params)}
    t = sp.Symbol(next(n for n in ("t", "t_", "t0", "time") if n not in names), real=True)
    alpha = parts.lapse
    g4 = sp.zeros(4, 4)
    g4[0, 0] = -alpha**2 + sum(shift_lower[i] * shift[i] for i in range(3))
    for i in range(3):
        g4[0, i + 1] = g4[i + 1, 0] = shift_lower[i]
        for j in range(3):
            g4[i + 1, j + 1] = gamma[i, j]
    spec4 = ChartSpec(entry=spec.entry, chart=spec.chart, field_equations="none", coords=(t, *spec.coords),
                      params=spec.params, metric=sp.ImmutableMatrix(g4), domain=spec.domain,
                      param_ranges=spec.param_ranges, defaults=dict(spec.defaults), extra={"kind": "initial-data"})
    eight_pi = 8 * sp.pi
    return Slice(spec=spec4, time=0, spatial=(1, 2, 3), lapse=alpha, lapse_squared=alpha**2, shift=shift,
                 shift_lower=shift_lower, spatial_metric=[[gamma[i, j] for j in range(3)] for i in range(3)],
                 extrinsic=[[K[i, j] for j in range(3)] for i in range(3)], trace_k=trace_k,
                 rho8=eight_pi * parts.density, momentum8=[eight_pi * s for s in parts.momentum],
                 cosmological_constant=spec.cosmological_constant, spatial_spec=spec,
                 notes=["initial data given on the slice (an initial-data entry)"])


def slice_of_chart(spec, *, budget: float = 20.0, source: str = "initial data"):
    """The Slice of any built chart: an initial-data chart as given, a spacetime chart split by its
    first coordinate (:func:`gravicat.physics.split.split_chart`)."""
    if is_initial_data_spec(spec):
        return initial_slice(spec, budget=budget)
    from gravicat.physics.split import split_chart

    return split_chart(spec, budget=budget, source=source)
