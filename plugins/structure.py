"""Verifier ``structure``: the metric is a symmetric matrix over declared symbols and is non-degenerate.

* symmetric: g_ab - g_ba reduces to zero exactly;
* every free symbol is a coordinate or a parameter of the chart, and every
  function application is one of the declared ``functions``;
* non-degenerate: det g is not identically zero (fail when it is, or when it
  vanishes at every sampled point). The sample points are generic; on the
  flint path det g is a rational function of the chart's generators, so a
  zero at some points only lies on a set of measure zero (an axis, a horizon)
  and is a note, as is such a set found inside the domain from the factors of
  det g. On the sympy path (``Abs``, ``sign``...) zeros at some points only
  leave the check inconclusive.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


def _det_exact(rows):
    """Determinant of a small matrix of exact numbers (fraction-free Gaussian elimination)."""
    m = [list(row) for row in rows]
    n = len(m)
    det = 1
    for c in range(n):
        p = next((r for r in range(c, n) if m[r][c] != 0), None)
        if p is None:
            return 0 * m[0][0]
        if p != c:
            m[c], m[p] = m[p], m[c]
            det = -det
        det = det * m[c][c]
        for r in range(c + 1, n):
            f = m[r][c] / m[c][c]
            if f != 0:
                m[r] = [m[r][j] - f * m[c][j] for j in range(n)]
    return det


class StructureCheck:
    name = "structure"
    version = "2"
    screens_repairs = True  # repair runs it for the baseline and the proof of a repaired chart

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        import sympy as sp

        from gravicat.plugins._common import result

        spec = geometry.spec
        g = spec.metric
        n = geometry.n
        if g.shape != (n, n):
            return [
                result(self.name, "fail", "none", f"the metric is {g.shape[0]}x{g.shape[1]} for {n} coordinates", self)
            ]
        # declared symbols and functions
        declared = set(spec.coords) | set(spec.params)
        free = set()
        for e in g:
            free |= sp.sympify(e).free_symbols
        undeclared = sorted(str(s) for s in free - declared)
        if undeclared:
            return [
                result(
                    self.name, "fail", "symbolic", f"undeclared symbols in the metric: {', '.join(undeclared)}", self
                )
            ]
        funcs_declared = {f.func for f in spec.functions}
        used = set()
        for e in g:
            used |= {f.func for f in sp.sympify(e).atoms(sp.core.function.AppliedUndef)}
        stray = sorted(str(f) for f in used - funcs_declared)
        if stray:
            return [
                result(self.name, "fail", "symbolic", f"undeclared functions in the metric: {', '.join(stray)}", self)
            ]
        # symmetry, exactly
        for i in range(n):
            for j in range(i + 1, n):
                d = sp.sympify(g[i, j] - g[j, i])
                if d != 0 and sp.cancel(d) != 0 and sp.simplify(d) != 0:
                    return [
                        result(
                            self.name,
                            "fail",
                            "symbolic",
                            f"the metric is not symmetric: g[{spec.coords[i]},{spec.coords[j]}] != "
                            f"g[{spec.coords[j]},{spec.coords[i]}]",
                            self,
                            counterexample={
                                "point": {},
                                "component": geometry.label("g", i, j) + " - " + geometry.label("g", j, i),
                                "residual": sp.sstr(d),
                            },
                        )
                    ]
        # degeneracy: sampled first (the sample points do not need the inverse), then det g symbolically
        good, zeros = [], []
        for _ in range(geometry.samples):
            pd = geometry.draw_point(need_inverse=False)
            if pd is None:
                break
            try:
                with pd.precision():
                    det = _det_exact(pd.g)
                    zero = pd.zero_test(det)
            except ZeroDivisionError:
                continue
            if zero is True or (zero is None and pd.point is None):
                zeros.append(pd)
            else:
                good.append(pd)
        try:
            values, err = geometry.prove_values(lambda X: {"det": X.det})
        except ZeroDivisionError:  # exact elimination found no pivot: det g is identically 0
            values, err = {"det": geometry.zero}, None

        def at(pd):
            return {"point": dict(pd.sample.shown), "component": "det g", "residual": "0"}

        if not err and geometry.is_zero(values["det"]):
            return [
                result(
                    self.name,
                    "fail",
                    "symbolic",
                    "the metric is degenerate: det g is identically zero",
                    self,
                    counterexample=at(zeros[0]) if zeros else {"point": {}, "component": "det g", "residual": "0"},
                )
            ]
        if zeros and not good:
            return [
                result(
                    self.name,
                    "fail",
                    "sampled",
                    f"the metric is degenerate: det g = 0 at every sampled point of the domain ({len(zeros)})"
                    + ("" if err else ", though det g is not identically zero as an expression"),
                    self,
                    counterexample=at(zeros[0]),
                )
            ]
        if zeros and (err or geometry.field is None):
            # det g = 0 at some points only, and nothing says whether on a region or on a set of measure zero
            return [
                result(
                    self.name,
                    "inconclusive",
                    "sampled",
                    f"symmetric, symbols declared; det g = 0 at {len(zeros)} of {len(zeros) + len(good)} "
                    "sample points: whether it vanishes on a region of the domain is not decided"
                    + (f" (det g not computed symbolically: {err})" if err else f" on the {geometry.path} path"),
                    self,
                    counterexample=at(zeros[0]),
                )
            ]
        if err:
            return [
                result(
                    self.name,
                    "inconclusive",
                    "sampled",
                    f"symmetric, symbols declared, det g non-zero at {len(good)} sample points; "
                    f"det g not computed symbolically ({err})",
                    self,
                )
            ]
        from gravicat.plugins._common import zero_sets_note

        det = values["det"]
        notes = ""
        if zeros:  # a rational function not identically zero vanishes on a set of measure zero only
            notes += f"; det g = 0 at {len(zeros)} sample points, on a set of measure zero"
        sets = zero_sets_note(geometry, good)
        if sets:
            notes += f"; {sets}"
        return [
            result(
                self.name,
                "pass",
                "symbolic",
                f"symmetric, every symbol declared, det g = {sp.sstr(geometry.to_sympy(det))[:300]} "
                f"(not identically zero; non-zero at {len(good)} sample points){notes} [path: {geometry.path}]",
                self,
            )
        ]


@hookimpl
def register_verifiers():
    return [StructureCheck()]
