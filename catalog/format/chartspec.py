"""A chart of a metric file, as sympy objects: the input every verifier works from.

:func:`gravicat.format.metricfile.build_chart` makes a :class:`ChartSpec` from a
validated document; :class:`gravicat.engine.geometry.Geometry` prepares it (inverse,
derivatives, curvature) once per run.

Conventions: signature (-,+,+,+), G = c = 1, G_ab + Lambda g_ab = 8 pi T_ab.
Tuples indexed "by coordinate" follow the order of ``coords``; missing
components are zero.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # annotations only: importing this module stays cheap
    import sympy


@dataclass(frozen=True)
class Fluid:
    density: sympy.Expr
    pressure: sympy.Expr  # 0 for dust
    velocity: tuple[sympy.Expr, ...]  # contravariant u^mu


@dataclass(frozen=True)
class NullDust:
    density: sympy.Expr
    vector: tuple[sympy.Expr, ...]  # contravariant k^mu, must be null


@dataclass(frozen=True)
class Limit:
    name: str
    set: dict[sympy.Symbol, sympy.Expr]  # parameter substitutions
    coordinates: dict[sympy.Symbol, sympy.Expr]  # coordinate substitutions (may be empty)
    reduces_to: str  # "ENTRY:CHART"


@dataclass(frozen=True)
class Invariant:
    value: sympy.Expr
    source: str


@dataclass(frozen=True)
class ChartSpec:
    entry: str  # entry id (slug)
    chart: str  # chart name
    field_equations: str  # the entry's claim
    coords: tuple[sympy.Symbol, ...]  # real symbols, in file order
    params: tuple[sympy.Symbol, ...]  # with the declared assumptions
    metric: sympy.ImmutableMatrix  # g_ab, symmetric, definitions substituted
    functions: tuple[sympy.Expr, ...] = ()  # applied undefined functions, e.g. a(t)
    domain: tuple[sympy.Rel, ...] = ()  # coordinate domain (chained ones split in two)
    param_ranges: tuple[sympy.Rel, ...] = ()  # from the parameters' ``range``
    defaults: dict[sympy.Symbol, sympy.Expr] = field(default_factory=dict)
    cosmological_constant: sympy.Expr | None = None
    potential: tuple[sympy.Expr, ...] | None = None  # covariant A_mu
    fluid: Fluid | None = None
    null_dust: NullDust | None = None
    observers: dict[str, tuple[sympy.Expr, ...]] = field(default_factory=dict)
    # other chart name -> that chart's coordinates as expressions in this chart's coordinates
    transforms: dict[str, dict[str, sympy.Expr]] = field(default_factory=dict)
    invariants: dict[str, Invariant] = field(default_factory=dict)  # ricci-scalar, kretschmann, weyl-square
    limits: tuple[Limit, ...] = ()  # limits whose ``chart`` is this chart
    flat_when: tuple[dict[sympy.Symbol, sympy.Expr], ...] = ()
    tags: tuple[str, ...] = ()
    extra: dict[str, Any] = field(default_factory=dict)

    def claim_expressions(self) -> list:
        """The expressions the field-equation claim is built from: the metric components (row by
        row), then the cosmological constant, the potential, the fluid and the null dust."""
        out = list(self.metric)
        if self.cosmological_constant is not None:
            out.append(self.cosmological_constant)
        if self.potential is not None:
            out.extend(self.potential)
        if self.fluid is not None:
            out += [self.fluid.density, self.fluid.pressure, *self.fluid.velocity]
        if self.null_dust is not None:
            out += [self.null_dust.density, *self.null_dust.vector]
        return out
