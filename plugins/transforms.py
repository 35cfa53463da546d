"""Verifier ``transforms``: each declared coordinate map pulls the other chart's metric back to this one.

For a map y^A = Y^A(x) to chart OTHER of the same entry (resolved through
``spec.extra["resolve"]`` as "ENTRY:OTHER"): d_a Y^A d_b Y^B g'_AB(Y(x)) must
equal g_ab(x) exactly (sampled stage, then proof).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


class TransformsCheck:
    name = "transforms"
    version = "1"

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.plugins._common import result

        spec = geometry.spec
        if not spec.transforms:
            return [result(self.name, "skipped", "none", "no transforms declared", self)]
        return [self._one(geometry, other, mapping) for other, mapping in spec.transforms.items()]

    def _one(self, geometry, other, mapping):
        import sympy as sp

        from gravicat.engine.geometry import prove_zero
        from gravicat.plugins._common import from_outcome, resolver, result

        spec = geometry.spec
        check = f"{self.name}:{other}"
        ref = f"{spec.entry}:{other}"
        resolve = resolver(geometry)
        if resolve is None:
            return result(check, "skipped", "none", f"cannot resolve {ref!r}: no resolver available", self)
        target = resolve(ref)
        if target is None:
            return result(check, "skipped", "none", f"chart {ref!r} not found", self)
        names = [str(c) for c in target.coords]
        missing = [nm for nm in names if nm not in {str(k) for k in mapping}]
        if missing:
            return result(check, "fail", "none", f"the map does not give {', '.join(missing)} of chart {other}", self)
        by_key = {str(k): sp.sympify(v) for k, v in mapping.items()}
        Y = [by_key[nm] for nm in names]
        by_name = {str(p): p for p in spec.params}
        rename = {p: by_name[str(p)] for p in target.params if str(p) in by_name and by_name[str(p)] != p}
        n, m = geometry.n, len(target.coords)
        sub = dict(zip(target.coords, Y, strict=True))
        sub.update(rename)
        Gp = [[sp.sympify(target.metric[A, B]).xreplace(sub) for B in range(m)] for A in range(m)]
        J = [[sp.diff(Y[A], spec.coords[a]) for a in range(n)] for A in range(m)]
        exprs = {}
        for a in range(n):
            for b in range(a, n):
                tot = sp.Integer(0)
                for A in range(m):
                    if J[A][a] == 0:
                        continue
                    for B in range(m):
                        if J[B][b] != 0 and Gp[A][B] != 0:
                            tot += J[A][a] * J[B][b] * Gp[A][B]
                exprs[geometry.label("g", a, b)] = tot - sp.sympify(spec.metric[a, b])
        outcome = prove_zero(
            exprs,
            spec.coords,
            spec.params,
            tuple(spec.param_ranges) + tuple(spec.domain),
            seed=geometry.seed,
            budget=geometry.budget,
            samples=geometry.samples,
            what=f"the pull-back of chart {other}'s metric and this chart's metric",
        )
        return from_outcome(check, outcome, self, detail_prefix=f"pull-back of {ref}")


@hookimpl
def register_verifiers():
    return [TransformsCheck()]
