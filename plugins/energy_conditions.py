"""Verifier ``energy-conditions``: each declared energy condition holds or is violated as declared.

The conditions are those of Hawking & Ellis, The Large Scale Structure of Space-Time, 1973, sec. 4.3
(null, weak, strong, dominant), for ``8 pi T_ab = G_ab + Lambda g_ab`` with the engine's Einstein
tensor and the chart's cosmological constant on the geometric side (the conventions of ``classify``):

* where ``T^a_b`` is diagonal in the chart, on the exact fast path (vacuum, static and cosmological charts, also in
  Eddington-Finkelstein form) the quantities are exact rational functions whose signs are proved on
  the domain and parameter ranges, or a violation is shown at an exact point
  (:func:`gravicat.physics.energy_proof.proved_energy_conditions`, method ``symbolic``);
* otherwise (4 dimensions) the conditions are evaluated at the chart's sample points in an
  orthonormal frame (:func:`gravicat.physics.matter.energy_conditions`, method ``sampled``).

A violation is reported with the point and the violating vector (the counterexample of a declared
``holds``, the witness of a declared ``violated``). A declared violation that only sample points
contradict is ``inconclusive`` (it may lie off the points), as is a stress tensor not of
Hawking-Ellis type I there. Charts that declare no condition are skipped at no cost.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


class EnergyConditionsCheck:
    name = "energy-conditions"
    version = "2"

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.plugins._common import result, skipped_if_degenerate

        declared = (geometry.spec.extra.get("declarations") or {}).get("energy-conditions")
        if not declared:
            return [result(self.name, "skipped", "none", "no energy-conditions declared", self)]
        checks = {cond: f"{self.name}:{cond}" for cond in declared}
        skipped = skipped_if_degenerate(geometry, self.name, self, "the stress-energy tensor")
        if skipped is not None:
            return [result(c, "skipped", "none", skipped.detail, self) for c in checks.values()]
        from gravicat.physics.energy_proof import proved_energy_conditions

        spec = geometry.spec
        # the exact analysis honours the budget on the fast path only (its sympy-path zero tests and sign
        # analysis are not interruptible): off the fast path, the sampled frame analysis alone
        got = proved_energy_conditions(geometry, spec, budget=geometry.budget) if geometry.field is not None else None
        how = "exact: T^a_b diagonal in the chart"
        if got is None:
            if geometry.n != 4:
                return [result(c, "inconclusive", "none", "not decided: T^a_b is not diagonal in this chart, and "
                               f"the sampled frame analysis is written for 4 dimensions (this chart has {geometry.n})",
                               self) for c in checks.values()]
            from gravicat.physics.matter import energy_conditions

            got = energy_conditions(geometry, spec)
            how = "orthonormal frame at the sample points"
        types = got.get("hawking_ellis_types") or [got.get("hawking_ellis_type")]
        types_text = ", ".join(t for t in types if t) or "none"
        return [self._one(checks[cond], state, got[cond], how, types_text) for cond, state in declared.items()]

    def _one(self, check, state, got, how, types_text):
        from gravicat.plugins._common import result

        status, method = got["status"], {"proved": "symbolic"}.get(got["method"], got["method"])
        data = {"declared": state, "found": status, "analysis": how}
        if status == "violated":
            ce = got["counterexample"]
            where = "at an exact point" if method == "symbolic" else "at a sample point"
            text = (f"violated {where}: {ce['quantity']} = {ce['value']} along the "
                    f"{ce.get('vector_kind', 'violating')} vector ({', '.join(ce['vector'])})")
            if state == "violated":
                return result(check, "pass", method, text, self, data=data | {"witness": ce})
            return result(check, "fail", method, f"declared holds, but {text}", self,
                          counterexample={"point": ce["point"], "component": ce["quantity"], "residual": ce["value"],
                                          "vector": ce["vector"]}, data=data)
        if status.startswith("holds"):
            where = got.get("where") or status
            if state == "holds":
                suffix = "" if method == "symbolic" else " (not proved on the domain)"
                return result(check, "pass", method, f"holds: {where}{suffix}", self, data=data)
            if method == "symbolic":
                return result(check, "fail", "symbolic", f"declared violated, but it holds: {where}", self,
                              counterexample={"component": check.split(":", 1)[1], "residual": where}, data=data)
            return result(check, "inconclusive", "sampled", f"declared violated, but it {status}; a violation off "
                          "those points is not excluded", self, data=data)
        return result(check, "inconclusive", "none", f"not decided ({how}): Hawking-Ellis type(s) {types_text} at "
                      "the sample points (the conditions are evaluated for type I)", self, data=data)


@hookimpl
def register_verifiers():
    return [EnergyConditionsCheck()]
