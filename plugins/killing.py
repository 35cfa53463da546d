"""Verifier ``killing``: each declared Killing vector and Killing tensor of the chart is one.

* ``killing:NAME`` (a vector xi^a): Killing's equation ``(L_xi g)_ab = 0`` (Wald, General Relativity,
  1984, eq. C.2.8), every component;
* ``killing:tensor:NAME`` (a symmetric K_ab, or K^ab lowered with the metric): the Killing tensor
  equation ``nabla_(a K_bc) = 0`` (Walker & Penrose, Commun. Math. Phys. 18 (1970) 265, for Kerr's).

The residuals are :mod:`gravicat.physics.killing`'s (the engine's derivatives and Christoffel
symbols), proved with the engine's sampled stage and exact normal form, so a wrong component fails
with a sample point and the residual there. When a component uses a function the chart's exact
field was not built over (``sin(phi)`` in a chart whose metric has none), the check prepares the
chart again over the components too. Charts that declare neither are skipped at no cost.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


class KillingCheck:
    name = "killing"
    version = "1"

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.plugins._common import result, skipped_if_degenerate

        decl = geometry.spec.extra.get("declarations") or {}
        vectors, tensors = decl.get("killing") or {}, decl.get("killing-tensors") or {}
        if not vectors and not tensors:
            return [result(self.name, "skipped", "none", "no Killing vectors or tensors declared", self)]
        out = []
        for name, xi in vectors.items():
            out.append(self._vector(geometry, name, xi))
        skipped = skipped_if_degenerate(geometry, self.name, self, "the Christoffel symbols")
        for name, t in tensors.items():
            check = f"{self.name}:tensor:{name}"
            if skipped is not None:
                out.append(result(check, "skipped", "none", skipped.detail, self))
                continue
            out.append(self._tensor(geometry, check, name, t))
        return out

    def _vector(self, geometry, name, xi):
        from gravicat.physics.killing import killing_residuals, prove_killing_vector
        from gravicat.plugins._common import from_outcome

        what = f"Killing's equation for the vector {name!r}"
        if _representable(geometry, xi):
            outcome = geometry.verify(lambda X: killing_residuals(X, xi), what=what)
        else:
            outcome = prove_killing_vector(geometry.spec, xi, budget=geometry.budget, seed=geometry.seed)
        return from_outcome(f"{self.name}:{name}", outcome, self, detail_prefix=_prefix(outcome, what))

    def _tensor(self, geometry, check, name, t):
        from gravicat.physics.killing import killing_tensor_residuals, prove_killing_tensor
        from gravicat.plugins._common import from_outcome

        K = t["components"]
        n = geometry.n
        if t["indices"] == "upper":  # K_ab = g_ac g_bd K^cd, left unexpanded: the exact field reduces it
            g = geometry.spec.metric
            K = g * K * g
        K = [[K[a, b] for b in range(n)] for a in range(n)]
        what = f"the Killing tensor equation for {name!r} ({t['indices']} indices)"
        if _representable(geometry, [x for row in K for x in row]):
            outcome = geometry.verify(lambda X: killing_tensor_residuals(X, K), what=what)
        else:
            outcome = prove_killing_tensor(geometry.spec, K, budget=geometry.budget, seed=geometry.seed)
        return from_outcome(check, outcome, self, detail_prefix=_prefix(outcome, what))


def _prefix(outcome, what: str) -> str:
    return "" if what in outcome.detail else what  # a failure's detail already names it


def _representable(geometry, exprs) -> bool:
    """Whether every expression is a value of the prepared chart's path (always on the sympy path)."""
    if geometry.field is None:
        return True
    from gravicat.engine.ratfun import Unsupported

    try:
        for e in exprs:
            geometry.val(e)
    except (Unsupported, KeyError, ValueError, TypeError):  # a generator the field was not built over
        return False
    return True


@hookimpl
def register_verifiers():
    return [KillingCheck()]
