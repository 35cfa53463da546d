"""Verifier ``energy-conditions``: each declared energy condition holds or is violated as declared.

The conditions are those of Hawking & Ellis, The Large Scale Structure of Space-Time, 1973, sec. 4.3
(null, weak, strong, dominant), for ``8 pi T_ab = G_ab + Lambda g_ab`` with the engine's Einstein
tensor and the chart's cosmological constant (:mod:`gravicat.physics.matter`):

* when ``T_ab`` vanishes identically (proved exactly: a vacuum or Lambda-vacuum claim) every
  condition holds on the domain (method ``symbolic``), and a declared violation is a failure;
* otherwise the conditions are evaluated at the chart's sample points in an orthonormal frame:
  a violation found there is reported with the point and the violating vector (the counterexample
  of a declared ``holds``, the witness of a declared ``violated``); a condition met at every point
  holds at N sample points (method ``sampled``). A declared violation that no sample point shows is
  ``inconclusive`` (it may lie off the points), as is a point whose stress tensor is not of
  Hawking-Ellis type I.

Defined here for 4-dimensional charts. Charts that declare no condition are skipped at no cost.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


class EnergyConditionsCheck:
    name = "energy-conditions"
    version = "1"

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.plugins._common import result, skipped_if_degenerate

        declared = (geometry.spec.extra.get("declarations") or {}).get("energy-conditions")
        if not declared:
            return [result(self.name, "skipped", "none", "no energy-conditions declared", self)]
        checks = {cond: f"{self.name}:{cond}" for cond in declared}
        skipped = skipped_if_degenerate(geometry, self.name, self, "the stress-energy tensor")
        if skipped is not None:
            return [result(c, "skipped", "none", skipped.detail, self) for c in checks.values()]
        if geometry.n != 4:
            return [result(c, "inconclusive", "none", f"not computed: the energy conditions are evaluated for 4 "
                           f"dimensions (this chart has {geometry.n})", self) for c in checks.values()]
        from gravicat.physics.matter import energy_conditions, stress_energy8

        spec = geometry.spec

        def tensor(X):
            T = stress_energy8(X, spec)
            return {X.label("8piT", a, b): T[a][b] for a in range(X.n) for b in range(a, X.n)}

        vacuum = geometry.verify(tensor, what="T_ab = 0")
        if vacuum.status == "pass":
            out = []
            for cond, state in declared.items():
                if state == "holds":
                    out.append(result(checks[cond], "pass", "symbolic", "holds on the domain: T_ab = 0 identically "
                                      f"(proved: {vacuum.detail})", self))
                else:
                    out.append(result(checks[cond], "fail", "symbolic", "declared violated, but T_ab = 0 "
                                      f"identically (proved: {vacuum.detail}), so every energy condition holds",
                                      self, counterexample={"component": "8piT", "residual": "0 on the domain"}))
            return out
        found = energy_conditions(geometry, spec)
        types = ", ".join(found.get("hawking_ellis_types", [])) or "none"
        out = []
        for cond, state in declared.items():
            got = found[cond]
            ce = got.get("counterexample")
            data = {"declared": state, "found": got["status"], "hawking_ellis_types": found.get("hawking_ellis_types")}
            if got["status"] == "violated":
                text = (f"violated at a sample point: {ce['quantity']} = {ce['value']} along the vector "
                        f"({', '.join(ce['vector'])})")
                if state == "violated":
                    out.append(result(checks[cond], "pass", "sampled", text, self, data=data | {"witness": ce}))
                else:
                    out.append(result(checks[cond], "fail", "sampled", f"declared holds, but {text}", self,
                                      counterexample={"point": ce["point"], "component": ce["quantity"],
                                                      "residual": ce["value"], "vector": ce["vector"]}, data=data))
            elif got["status"].startswith("holds"):
                if state == "holds":
                    out.append(result(checks[cond], "pass", "sampled", f"{got['status']} (not proved on the domain)",
                                      self, data=data))
                else:
                    out.append(result(checks[cond], "inconclusive", "sampled", f"declared violated, but it "
                                      f"{got['status']}; a violation off those points is not excluded", self,
                                      data=data))
            else:
                out.append(result(checks[cond], "inconclusive", "none", f"not decided: the stress tensor is of "
                                  f"Hawking-Ellis type(s) {types} at the sample points (conditions are evaluated "
                                  "for type I)", self, data=data))
        return out


@hookimpl
def register_verifiers():
    return [EnergyConditionsCheck()]
