"""The geodesic right-hand side in Hamiltonian form, vectorised over many rays.

With H(x, p) = 1/2 g^ab(x) p_a p_b the geodesics (null for H = 0, timelike for H = -1/2 with an
affine parameter equal to proper time) obey

    dx^a/dl = dH/dp_a = g^ab p_b,        dp_a/dl = -dH/dx^a = -1/2 (d_a g^bc) p_b p_c.

The inverse metric g^ab is the engine's exact one (:attr:`gravicat.engine.geometry.Geometry.ginv`,
reduced by the exact field); its coordinate derivatives are taken by sympy on those
expressions, after the parameters are set to their (exact) values. Nothing here computes
Christoffel symbols: the Hamiltonian form needs only g^ab and its first derivatives, and H itself
is the drift measure reported for every ray (it is conserved exactly along a geodesic).

Two outputs from the same expressions:

* :class:`HamiltonianSystem`: NumPy callables (sympy's ``lambdify`` on the expressions with the
  coordinates renamed ``x0, x1, ...`` and the momenta ``p0, p1, ...``, so the generated text holds
  only those names, numbers and NumPy functions, never a string of the catalogue);
  arrays are laid out ``(n, N)``: one column per ray;
* :func:`c99_source`: a C99 function ``gravicat_hamiltonian_rhs(long nrays, const double *y,
  double *dy, double *h)`` over rays stored one after another as ``(x^0..x^{n-1}, p_0..p_{n-1})``.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from gravicat.errors import InputError

DEFAULT_BUDGET = 20.0  # CPU seconds for the exact inverse metric

_CACHE: dict = {}


@dataclass
class HamiltonianSystem:
    """Numeric geodesic right-hand side of one chart with fixed parameters.

    ``coords``: the chart's coordinate names; ``values``: parameter name -> float;
    ``inverse_exprs``: (a, b) -> sympy expression of g^ab (a <= b, non-zero only) in the symbols
    ``x0..x{n-1}``; ``derivative_exprs``: (c, a, b) -> d_c g^ab. Call :meth:`rhs`, :meth:`hamiltonian`,
    :meth:`metric` and :meth:`inverse` with arrays of shape ``(n, N)``.
    """

    entry: str
    chart: str
    coords: tuple[str, ...]
    values: dict[str, float]
    inverse_exprs: dict
    derivative_exprs: dict
    metric_exprs: dict
    domain_exprs: list = field(default_factory=list)  # (text, margin expr, strict): margin > 0 inside
    charge: float = 0.0  # charge per unit mass q of the particle: H = 1/2 g^ab (p_a - q A_a)(p_b - q A_b)
    potential_exprs: dict = field(default_factory=dict)  # a -> A_a (covariant), only with a charge
    _fns: dict = field(default_factory=dict, repr=False)

    @property
    def n(self) -> int:
        return len(self.coords)

    # ---- compiled callables (built on first use)
    def _compiled(self, kind: str):
        if kind not in self._fns:
            import sympy

            xs = sympy.symbols(f"x0:{self.n}", real=True)
            ps = sympy.symbols(f"p0:{self.n}", real=True)
            if kind == "rhs":
                outputs = [e for e in self._rhs_exprs(xs, ps)]
                args = (xs, ps)
            elif kind == "hamiltonian":
                outputs = [self._h_expr(ps)]
                args = (xs, ps)
            elif kind == "metric":
                outputs = [self.metric_exprs.get((a, b), 0) for a in range(self.n) for b in range(self.n)]
                args = (xs,)
            elif kind == "potential":
                outputs = [self.potential_exprs.get(a, sympy.Integer(0)) for a in range(self.n)]
                args = (xs,)
            elif kind == "inverse":
                outputs = [self._ginv(a, b) for a in range(self.n) for b in range(self.n)]
                args = (xs,)
            else:  # domain margins
                outputs = [m for _, m, _ in self.domain_exprs] or [sympy.Integer(1)]
                args = (xs,)
            self._fns[kind] = sympy.lambdify(args, outputs, modules=["numpy", "scipy"], cse=True)
        return self._fns[kind]

    def _ginv(self, a, b):
        import sympy

        return self.inverse_exprs.get((min(a, b), max(a, b)), sympy.Integer(0))

    def _kinetic(self, ps):
        """The kinetic momenta P_a = p_a - q A_a (p_a themselves without a charge)."""
        import sympy

        if not self.charge:
            return list(ps)
        q = sympy.Float(self.charge, 17)
        return [ps[a] - q * self.potential_exprs.get(a, 0) for a in range(self.n)]

    def _h_expr(self, ps):
        n = self.n
        import sympy

        P = self._kinetic(ps)
        return sum(((1 if a == b else 2) * self._ginv(a, b) * P[a] * P[b]
                    for a in range(n) for b in range(a, n)), start=sympy.Integer(0)) / 2

    def _rhs_exprs(self, xs, ps):
        """dx^a/dl = g^ab P_b, dp_c/dl = -1/2 d_c g^ab P_a P_b + q (d_c A_b) g^bd P_d with P = p - q A
        (P = p without a charge: the geodesic equations)."""
        import sympy

        n = self.n
        P = self._kinetic(ps)
        dx = [sum((self._ginv(a, b) * P[b] for b in range(n)), start=sympy.Integer(0)) for a in range(n)]
        dp = []
        for c in range(n):
            acc = sympy.Integer(0)
            for (c2, a, b), d in self.derivative_exprs.items():
                if c2 == c:
                    acc += (1 if a == b else 2) * d * P[a] * P[b]
            force = sympy.Integer(0)
            if self.charge:
                q = sympy.Float(self.charge, 17)
                for b, A in self.potential_exprs.items():
                    dA = sympy.diff(A, xs[c])
                    if dA != 0:
                        force += q * dA * dx[b]
            dp.append(-acc / 2 + force)
        return dx + dp

    @staticmethod
    def _arrays(values, shape):
        import numpy as np

        return np.array([np.broadcast_to(np.asarray(v, dtype=float), shape) for v in values])

    def rhs(self, x, p):
        """``(dx/dl, dp/dl)``, each of shape ``(n, N)``, for positions ``x`` and momenta ``p`` of shape ``(n, N)``."""
        import numpy as np

        out = self._arrays(self._compiled("rhs")(tuple(x), tuple(p)), np.shape(x[0]))
        return out[: self.n], out[self.n:]

    def hamiltonian(self, x, p):
        """H = 1/2 g^ab p_a p_b for every ray (shape ``(N,)``)."""
        import numpy as np

        return self._arrays(self._compiled("hamiltonian")(tuple(x), tuple(p)), np.shape(x[0]))[0]

    def metric(self, x):
        """g_ab at the points ``x`` (shape ``(n, n, N)``)."""
        import numpy as np

        return self._arrays(self._compiled("metric")(tuple(x)), np.shape(x[0])).reshape(self.n, self.n, -1)

    def inverse(self, x):
        """g^ab at the points ``x`` (shape ``(n, n, N)``)."""
        import numpy as np

        return self._arrays(self._compiled("inverse")(tuple(x)), np.shape(x[0])).reshape(self.n, self.n, -1)

    def potential(self, x):
        """A_a at the points ``x`` (shape ``(n, N)``; ``(n,)`` for one point); zero without a charge."""
        import numpy as np

        return self._arrays(self._compiled("potential")(tuple(x)), np.shape(x[0]))

    def domain_margins(self, x):
        """One row per domain relation of the chart (shape ``(k, N)``): > 0 strictly inside."""
        import numpy as np

        return self._arrays(self._compiled("domain")(tuple(x)), np.shape(x[0]))


def hamiltonian_system(spec, values: Mapping[Any, Any], *, budget: float = DEFAULT_BUDGET,
                       source: str | None = None, skip_domain: tuple[str, ...] = (),
                       charge: float = 0.0) -> HamiltonianSystem:
    """The :class:`HamiltonianSystem` of a chart (``ChartSpec``) with every parameter given a number.

    ``values`` maps parameter symbols (or names) to numbers (sympy or Python). The exact inverse
    comes from the engine within ``budget`` CPU seconds. Domain relations whose only coordinates
    are in ``skip_domain`` (e.g. ``0 < theta < pi``, an axis a ray may cross) are not margins.
    A nonzero ``charge`` (per unit mass) adds the chart's declared electromagnetic potential A_a
    (the metric file's ``potential``, as the field-equation claims read it) through p_a - q A_a.
    Raises :class:`InputError` naming the chart for a degenerate metric, arbitrary functions, an
    inverse beyond the budget, a parameter without a value, or a charge on a chart without a
    potential. Cached per chart, values and charge.
    """
    import sympy

    from gravicat.engine.geometry import BudgetExceeded, Geometry

    where = source or str((getattr(spec, "extra", None) or {}).get("source", spec.entry))
    field_name = f"charts.{spec.chart}"
    byname = {str(k): v for k, v in values.items()}
    missing = [str(p) for p in spec.params if str(p) not in byname]
    if missing:
        raise InputError(where, missing[0], "no value given")
    key = (spec.entry, spec.chart, str(spec.metric), tuple(sorted((k, str(v)) for k, v in byname.items())),
           tuple(skip_domain), float(charge))
    if key in _CACHE:
        return _CACHE[key]
    if spec.functions:
        raise InputError(where, field_name, f"the metric depends on the arbitrary function(s) "
                                            f"{', '.join(map(str, spec.functions))}; geodesics need numbers")
    if charge and spec.potential is None:
        raise InputError(where, f"{field_name}.potential", "the chart declares no electromagnetic potential; "
                                                           "a charged particle needs one")
    if not math.isfinite(charge):
        raise InputError("--charge", None, f"{charge} is not a finite charge per unit mass")
    geom = Geometry(spec, budget=budget)
    reason = geom.degeneracy()
    if reason:
        raise InputError(where, field_name, f"no inverse metric ({reason})")
    n = geom.n
    xs = sympy.symbols(f"x0:{n}", real=True)
    rename = dict(zip(spec.coords, xs, strict=True))
    rename.update({p: sympy.sympify(byname[str(p)]) for p in spec.params})
    try:
        with geom.deadline(budget):
            ginv = geom.ginv
            inv = {}
            for a in range(n):
                for b in range(a, n):
                    if not geom.vanishes(ginv[a][b]):
                        e = sympy.sympify(geom.to_sympy(ginv[a][b])).xreplace(rename)
                        if e != 0:
                            inv[(a, b)] = e
    except (BudgetExceeded, ZeroDivisionError) as exc:
        raise InputError(where, field_name, f"the exact inverse metric is not available ({exc or 'budget'})") from None
    stray = set().union(*(e.free_symbols for e in inv.values())) - set(xs) if inv else set()
    if stray:
        raise InputError(where, field_name, f"the inverse metric still holds {', '.join(sorted(map(str, stray)))}")
    derivs = {}
    for (a, b), e in inv.items():
        for c in range(n):
            if e.has(xs[c]):
                d = sympy.diff(e, xs[c])
                if d != 0:
                    derivs[(c, a, b)] = d
    g = spec.metric
    metric = {(a, b): sympy.sympify(g[a, b]).xreplace(rename) for a in range(n) for b in range(n) if g[a, b] != 0}
    skip = {sympy.Symbol(s, real=True) for s in skip_domain} | {c for c in spec.coords if str(c) in skip_domain}
    domain = []
    for rel in spec.domain:
        if rel.free_symbols <= skip | set(spec.params):
            continue
        op = rel.rel_op
        margin = rel.lhs - rel.rhs if op in (">", ">=") else rel.rhs - rel.lhs
        domain.append((str(rel), sympy.sympify(margin).xreplace(rename), op in (">", "<")))
    potential = {}
    if charge:
        for a, A in enumerate(spec.potential):
            e = sympy.sympify(A).xreplace(rename)
            if e != 0:
                potential[a] = e
        stray = set().union(*(e.free_symbols for e in potential.values())) - set(xs) if potential else set()
        if stray:
            raise InputError(where, f"{field_name}.potential", f"the potential still holds "
                                                               f"{', '.join(sorted(map(str, stray)))}")
    system = HamiltonianSystem(entry=spec.entry, chart=spec.chart, coords=tuple(str(c) for c in spec.coords),
                               values={k: float(sympy.sympify(v)) for k, v in byname.items()},
                               inverse_exprs=inv, derivative_exprs=derivs, metric_exprs=metric, domain_exprs=domain,
                               charge=float(charge), potential_exprs=potential)
    if len(_CACHE) > 16:
        _CACHE.clear()
    _CACHE[key] = system
    return system


_SAFE = re.compile(r"[^A-Za-z0-9_.:,=+\- ]")


def _c_printer(system: HamiltonianSystem):
    """sympy's C99 printer without the non-C99 ``M_PI`` family (constants printed as numbers); functions C99
    does not have (LambertW) are refused with one line naming the chart."""
    from sympy.printing.c import C99CodePrinter

    class Printer(C99CodePrinter):
        def _print_NumberSymbol(self, expr):
            return f"{float(expr.evalf(25))!r}"

        _print_Pi = _print_Exp1 = _print_EulerGamma = _print_Catalan = _print_GoldenRatio = _print_NumberSymbol

        def _print_not_supported(self, expr):
            raise InputError(f"{system.entry}", f"charts.{system.chart}",
                             f"the C99 geodesic code cannot print {type(expr).__name__} (no C99 function); "
                             "export to geodesic-numpy instead")

    return Printer({"math_macros": {}, "strict": True})


def _program(system: HamiltonianSystem):
    """(temporaries, reduced outputs) of cse over the 2n right-hand sides and H, symbols x0.., p0.., t0.."""
    import sympy

    n = system.n
    xs = sympy.symbols(f"x0:{n}", real=True)
    ps = sympy.symbols(f"p0:{n}", real=True)
    outputs = system._rhs_exprs(xs, ps) + [system._h_expr(ps)]
    temps, reduced = sympy.cse(outputs, symbols=sympy.numbered_symbols("t", real=True))
    used = set().union(*(e.free_symbols for e in reduced), *(e.free_symbols for _, e in temps))
    return xs, ps, temps, reduced, used


def c99_function(system: HamiltonianSystem, name: str = "gravicat_hamiltonian_rhs", qualifier: str = "") -> list[str]:
    """The lines of ``[qualifier] void NAME(long nrays, const double *restrict y, double *restrict dy,
    double *restrict h)``: ray ``k`` occupies ``y[2n k .. 2n k + 2n - 1]`` = (x^0..x^{n-1}, p_0..p_{n-1});
    the derivatives go to ``dy`` in the same layout and H = 1/2 g^ab p_a p_b to ``h[k]`` (``h`` may be
    NULL). Only generated names (``x0``, ``p0``, ``t0``...), numbers and C99 math functions appear."""
    n = system.n
    printer = _c_printer(system)
    xs, ps, temps, reduced, used = _program(system)
    lines = [
        f"{qualifier + ' ' if qualifier else ''}void {name}(long nrays, const double *restrict y, "
        "double *restrict dy, double *restrict h)",
        "{",
        "    long k;",
        "    for (k = 0; k < nrays; ++k) {",
        f"        const double *s = y + {2 * n}L * k;",
        f"        double *d = dy + {2 * n}L * k;",
    ]
    for i in range(n):
        for sym, slot in ((xs[i], i), (ps[i], n + i)):
            if sym in used:
                lines.append(f"        const double {sym} = s[{slot}];")
    for sym, e in temps:
        lines.append(f"        const double {sym} = {printer.doprint(e)};")
    for i in range(2 * n):
        lines.append(f"        d[{i}] = {printer.doprint(reduced[i])};")
    lines.append("        if (h) {")
    lines.append(f"            h[k] = {printer.doprint(reduced[2 * n])};")
    lines.append("        }")
    lines += ["    }", "}"]
    return lines


def c99_source(system: HamiltonianSystem) -> str:
    """A C99 translation unit with ``gravicat_hamiltonian_rhs`` (:func:`c99_function`). Parameters are fixed
    at the values listed in the header comment."""
    n = system.n
    params = ", ".join(f"{_SAFE.sub('_', k)} = {v!r}" for k, v in system.values.items()) or "none"
    lines = [
        "/* Geodesic right-hand side in Hamiltonian form, generated by gravicat.",
        f" * entry {_SAFE.sub('_', system.entry)}, chart {_SAFE.sub('_', system.chart)}; "
        f"coordinates x0..x{n - 1} = {_SAFE.sub('_', ', '.join(system.coords))}",
        f" * parameters: {params}",
        " * dx^a/dl = g^ab p_b, dp_a/dl = -1/2 d_a g^bc p_b p_c, H = 1/2 g^ab p_a p_b. */",
        "#include <math.h>",
        "#include <stddef.h>",
        "",
    ]
    return "\n".join(lines + c99_function(system) + [""])


_NUMPY_HELPERS = '''

def _stack(values, shape):
    return np.stack([np.broadcast_to(np.asarray(v, dtype=float), shape) for v in values], axis=-1)


def _unpack(x, p):
    x = np.asarray(x, dtype=float)
    p = np.asarray(p, dtype=float)
    if x.shape[-1] != DIMENSION or p.shape[-1] != DIMENSION:
        raise ValueError(f"x and p need a last axis of length {DIMENSION}")
    return x, p, np.broadcast_shapes(x.shape[:-1], p.shape[:-1])
'''


def numpy_code(system: HamiltonianSystem) -> str:
    """Python functions (numpy only) ``rhs(x, p) -> (dx, dp)`` and ``hamiltonian(x, p)`` over rays with
    ``x``, ``p`` of shape ``(..., n)`` (one ray per leading index). The module around it defines
    ``DIMENSION``. Only generated names, numbers and numpy functions appear (sympy's numpy printer)."""
    from gravicat.export.python_code import _LAMBERTW, _printer, _statement

    n = system.n
    printer = _printer({})
    xs, ps, temps, reduced, used = _program(system)
    body = ["    x, p, shape = _unpack(x, p)"]
    for i in range(n):
        for sym, arr in ((xs[i], "x"), (ps[i], "p")):
            if sym in used:
                body.append(f"    {sym} = {arr}[..., {i}]")
    for sym, e in temps:
        body += _statement(str(sym), printer.doprint(e))
    rhs = ["", "", "def _program(x, p):",
           '    """The 2n right-hand sides and H, in the order dx^0..dx^{n-1}, dp_0..dp_{n-1}, H."""']
    rhs += body
    rhs += _statement("out", "[" + ", ".join(printer.doprint(e) for e in reduced) + "]")
    rhs += ["    return out, shape", "",
            "", "def rhs(x, p):",
            f'    """(dx/dl, dp/dl), each of shape (..., {n}), for positions x and momenta p (..., {n})."""',
            "    out, shape = _program(x, p)",
            f"    return _stack(out[:{n}], shape), _stack(out[{n}:{2 * n}], shape)", "",
            "", "def hamiltonian(x, p):",
            '    """H = 1/2 g^ab p_a p_b for every ray (shape (...,)): 0 for light, -1/2 for a unit mass."""',
            "    out, shape = _program(x, p)",
            f"    return np.broadcast_to(np.asarray(out[{2 * n}], dtype=float), shape).copy()", ""]
    helpers = _NUMPY_HELPERS + (_LAMBERTW if printer.uses_lambertw else "")
    return helpers + "\n".join(rhs)
