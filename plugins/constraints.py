"""Verifier ``constraints``: the Hamiltonian and momentum constraints of an initial-data entry hold exactly.

For a chart of an initial-data entry (a 3-geometry gamma_ij with extrinsic curvature K_ij, see
docs/initial-data.md) it proves, with the engine's exact proof (sample points, then the exact zero
test; or a counterexample point):

* Hamiltonian constraint ``R + K^2 - K_ij K^ij = 16 pi rho + 2 Lambda``;
* momentum constraint ``D_j (K^ij - gamma^ij K) = 8 pi S^i`` (checked index-lowered),

with R the Ricci scalar of gamma from the engine's curvature, through the one copy of the residuals,
:func:`gravicat.physics.split.prove_constraints` (E. Gourgoulhon, 3+1 Formalism in General
Relativity, 2012, eqs. 4.63 and 4.64; T. W. Baumgarte and S. L. Shapiro, Numerical Relativity, 2010,
eqs. 2.132 and 2.133 - equation numbers recalled from memory).

Only initial-data entries: ``kinds = ("initial-data",)``, so the runner reports it ``skipped`` on a
spacetime chart, whose constraints follow from its field equations (proved by ``field-equations``;
``gravicat split`` shows them per slice). Proving them again for every spacetime chart would double
the cost of ``verify --all`` for no new information.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart

_STATUS = {"proved": "pass", "violated": "fail", "inconclusive": "inconclusive", "skipped": "skipped",
           "pass": "pass", "fail": "fail"}
_METHODS = ("symbolic", "sampled", "none")


class ConstraintsCheck:
    name = "constraints"
    version = "1"
    kinds = ("initial-data",)  # the runner skips it on spacetime charts

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.errors import CatalogError
        from gravicat.physics.initial_data import initial_slice, is_initial_data_spec
        from gravicat.physics.split import prove_constraints
        from gravicat.plugins._common import result

        spec = geometry.spec
        if not is_initial_data_spec(spec):
            return [result(self.name, "skipped", "none", "not initial data: a spacetime's constraints follow "
                                                         "from its field equations (see 'gravicat split')", self)]
        try:
            sl = initial_slice(spec, budget=geometry.budget)
        except CatalogError as exc:  # a degenerate spatial metric: reported, not a crash
            return [result(self.name, "fail", "none", str(exc), self)]
        out = prove_constraints(sl, budget=geometry.budget, seed=geometry.seed)
        results = []
        for key, label in (("hamiltonian", "the Hamiltonian constraint R + K^2 - K_ij K^ij = 16 pi rho + 2 Lambda"),
                           ("momentum", "the momentum constraint D_j (K^ij - gamma^ij K) = 8 pi S^i")):
            o = out[key]
            method = o["method"] if o["method"] in _METHODS else "none"
            text = o.get("detail") or o["status"]
            detail = text if "constraint" in text else f"{label}: {text}"
            results.append(result(f"constraints.{key}", _STATUS.get(o["status"], "inconclusive"), method, detail,
                                  self, counterexample=o.get("counterexample")))
        return results


@hookimpl
def register_verifiers():
    return [ConstraintsCheck()]
