"""Numbers from a chart: vectorised numpy callables at fixed parameter values.

:meth:`gravicat.Chart.numeric` returns a :class:`NumericChart`. Its functions are compiled once per
chart (sympy's ``lambdify`` with common subexpressions shared) from the exact expressions: the
metric as written, and the inverse metric and Christoffel symbols computed by the engine
(:class:`gravicat.engine.geometry.Geometry`); nothing is re-derived here. Parameters are passed
as numbers, so a second ``numeric()`` call with other values reuses the compiled functions.

Points are arrays of shape ``(..., n)`` (the last axis runs over the chart's coordinates in file
order); results have shape ``(..., n, n)`` (metric, inverse) or ``(..., n, n, n)`` (Christoffel,
``[..., a, b, c]`` = Gamma^a_bc). Every point must lie in the chart's domain (with the parameter
values substituted): a point outside it is a one-line :class:`gravicat.InputError`, not a number
(:meth:`NumericChart.inside` gives the mask to filter with). Arithmetic is float64.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from typing import TYPE_CHECKING, Any

from gravicat.errors import InputError

if TYPE_CHECKING:
    import numpy

    from gravicat.api.entry import Chart


def _split(items: Iterable[str], option: str) -> list[tuple[str, str]]:
    from gravicat.format.assign import split_assignments

    out = []
    for item in items:
        if not isinstance(item, str):
            raise InputError(option, None, f"{item!r} is not NAME=VALUE text")
        out.extend(split_assignments(item, option))
    return out


class NumericChart:
    """Vectorised numpy functions of one chart at fixed parameter values.

    * ``parameters``: name -> the exact value used (given, else the file's default);
    * ``metric(x)``: g_ab, shape ``(..., n, n)``;
    * ``inverse(x)``: g^ab, shape ``(..., n, n)`` (exact inverse from the engine, then evaluated);
    * ``christoffel(x)``: Gamma^a_bc, shape ``(..., n, n, n)``, index order ``[..., a, b, c]``;
    * ``inside(x)``: boolean mask, shape ``(...)``: which points lie in the chart's domain.

    ``x`` is anything numpy turns into a float array whose last axis has length n.
    """

    def __init__(self, chart: Chart, values: dict[Any, Any]):
        self.chart = chart
        self._values = values  # parameter Symbol -> exact sympy number
        self._floats = [float(values[p]) for p in chart.parameters]

    @classmethod
    def build(cls, chart: Chart, assignments: Iterable[str], values: Mapping[str, Any]) -> NumericChart:
        """Parse and check the parameter values (see :meth:`gravicat.Chart.numeric`)."""
        from gravicat.export.codegen import numeric_parameters

        option = f"{chart.subject} numeric()"
        spec = chart.spec
        if spec.functions:
            names = ", ".join(str(f) for f in spec.functions)
            raise InputError(chart.subject, f"charts.{chart.name}.functions",
                             f"the metric depends on the arbitrary function(s) {names}, whose values are not "
                             "known: no numbers")
        given: dict[str, Any] = {}
        for name, text in [*_split(assignments, option), *values.items()]:
            if name in given and str(given[name]) != str(text):
                raise InputError(option, name, f"given twice with different values ({given[name]} and {text})")
            given[name] = text
        fixed = numeric_parameters(chart.entry.document, spec, given, option)
        return cls(chart, fixed)

    @property
    def parameters(self) -> dict[str, Any]:
        return {str(p): v for p, v in self._values.items()}

    def __repr__(self) -> str:
        shown = ", ".join(f"{k}={v}" for k, v in self.parameters.items())
        return f"<NumericChart {self.chart.subject} ({shown})>"

    # -- compiled functions, cached on the chart -----------------------------
    def _compiled(self, key: str, make) -> Any:
        cache = self.chart.__dict__.setdefault("_numeric_functions", {})
        if key not in cache:
            import sympy

            exprs = make()
            args = [*self.chart.coordinates, *self.chart.parameters]
            cache[key] = (sympy.lambdify(args, exprs, modules="numpy", cse=True), len(exprs))
        return cache[key]

    def _points(self, x) -> tuple[list[numpy.ndarray], tuple[int, ...]]:
        import numpy as np

        try:
            arr = np.asarray(x, dtype=float)
        except (TypeError, ValueError) as exc:
            raise InputError(self.chart.subject, "x", f"points must be numbers ({exc})") from None
        n = self.chart.dimension
        if arr.ndim == 0 or arr.shape[-1] != n:
            raise InputError(self.chart.subject, "x", f"points must have shape (..., {n}) for the coordinates "
                                                      f"({', '.join(self.chart.coordinate_names)}); got {arr.shape}")
        return [arr[..., i] for i in range(n)], arr.shape[:-1]

    def _evaluate(self, key: str, make, x, tail: tuple[int, ...]):
        import numpy as np

        cols, shape = self._points(x)
        self._require_inside(cols, shape)
        fn, count = self._compiled(key, make)
        with np.errstate(all="ignore"):
            values = fn(*cols, *self._floats)
        out = np.empty(shape + (count,), dtype=float)
        for k, v in enumerate(values):
            out[..., k] = v
        return out.reshape(shape + tail)

    def inside(self, x) -> numpy.ndarray:
        """Which points lie in the chart's domain (strict inequalities as written), shape ``(...)``."""
        cols, shape = self._points(x)
        return self._mask(cols, shape)

    def _mask(self, cols, shape):
        import numpy as np

        domain = self.chart.domain
        if not domain:
            return np.ones(shape, dtype=bool)
        fn, _ = self._compiled("domain", lambda: list(domain))
        with np.errstate(all="ignore"):
            parts = fn(*cols, *self._floats)
        mask = np.ones(shape, dtype=bool)
        for p in parts:
            mask &= np.broadcast_to(np.asarray(p, dtype=bool), shape)
        return mask

    def _require_inside(self, cols, shape) -> None:
        import numpy as np

        mask = self._mask(cols, shape)
        if mask.all():
            return
        bad = np.argwhere(~mask)
        first = tuple(int(i) for i in bad[0])
        point = ", ".join(f"{name}={float(c[first]) if shape else float(c):.6g}"
                          for name, c in zip(self.chart.coordinate_names, cols, strict=True))
        text = "; ".join(self.chart.entry.document.data["charts"][self.chart.name]["domain"])
        raise InputError(self.chart.subject, "x", f"{len(bad)} point(s) outside the chart's domain ({text}), "
                                                  f"the first ({point}) at index {first}; filter with inside(x)")

    # -- the public functions -------------------------------------------------
    def metric(self, x) -> numpy.ndarray:
        """g_ab at the points ``x``, shape ``(..., n, n)``."""
        n = self.chart.dimension
        return self._evaluate("metric", lambda: list(self.chart.metric), x, (n, n))

    def inverse(self, x) -> numpy.ndarray:
        """g^ab at the points ``x``, shape ``(..., n, n)`` (the engine's exact inverse, evaluated)."""
        n = self.chart.dimension
        return self._evaluate("inverse", lambda: list(self.chart.inverse_metric()), x, (n, n))

    def christoffel(self, x) -> numpy.ndarray:
        """Gamma^a_bc at the points ``x``, shape ``(..., n, n, n)``, index order ``[..., a, b, c]``."""
        n = self.chart.dimension
        return self._evaluate("christoffel", lambda: list(self.chart.christoffel().reshape(n ** 3)), x, (n, n, n))
