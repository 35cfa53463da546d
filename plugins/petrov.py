"""Verifier ``petrov``: the chart's declared ``petrov-type`` holds.

The type is decided by :func:`gravicat.physics.petrov.petrov_type` (Stephani, Kramer, MacCallum,
Hoenselaers & Herlt, Exact Solutions of Einstein's Field Equations, 2nd ed. 2003, ch. 4 and 9): read
off at the chart's exact sample points, then the identities that define it proved on the whole
domain with the engine's exact zero test. The result says which: ``symbolic`` (proved on the
domain) or ``sampled`` (the type at N sample points, the proof did not finish within the budget).
A different type is a failure whose counterexample is a sample point and the type found there.
Charts that declare no type are skipped at no cost.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


def declarations(geometry) -> dict:
    return geometry.spec.extra.get("declarations") or {}


class PetrovCheck:
    name = "petrov"
    version = "1"

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.plugins._common import result, skipped_if_degenerate

        declared = declarations(geometry).get("petrov-type")
        if declared is None:
            return [result(self.name, "skipped", "none", "no petrov-type declared", self)]
        if geometry.n != 4:  # the file format refuses it; a chart built by hand may still carry it
            return [result(self.name, "fail", "none", f"petrov-type {declared} declared on a chart of "
                           f"{geometry.n} dimensions: the Petrov classification is for 4 dimensions", self)]
        skipped = skipped_if_degenerate(geometry, self.name, self, "the Weyl tensor")
        if skipped is not None:
            return [skipped]
        from gravicat.physics.petrov import petrov_type

        res = petrov_type(geometry)
        data = {"declared": declared, "found": res.type, "where": res.where}
        if res.type == declared:
            if res.method == "symbolic":
                return [result(self.name, "pass", "symbolic", f"type {declared}: {res.where}", self, data=data)]
            return [result(self.name, "pass", "sampled", f"type {declared} {res.where} (not proved on the "
                           "domain)", self, data=data)]
        if res.type is not None:
            return [result(self.name, "fail", res.method, f"declared type {declared}, found type {res.type}: "
                           f"{res.where}", self, counterexample=self._witness(geometry, declared), data=data)]
        witness = self._witness(geometry, declared)
        if witness is not None and res.method == "sampled" and res.where.startswith("not constant"):
            return [result(self.name, "fail", "sampled", f"declared type {declared}; {res.where}", self,
                           counterexample=witness, data=data)]
        return [result(self.name, "inconclusive", "none", f"declared type {declared}; {res.where}", self,
                       data=data)]

    @staticmethod
    def _witness(geometry, declared: str) -> dict | None:
        """A sample point where the type is not ``declared``: one decided exactly there if any, else one
        decided with a zero test "0 within the working precision" (said so), else None."""
        from gravicat.physics.petrov import point_type

        inexact = None
        for pd in geometry.sample_points():
            try:
                found, loose = point_type(pd)
            except (ZeroDivisionError, ValueError):
                continue
            if found == declared:
                continue
            witness = {"point": dict(pd.sample.shown), "component": "Petrov type",
                       "residual": f"type {found} at this point (declared {declared})"}
            if not loose:
                return witness
            if inexact is None:
                witness["residual"] += ", some invariants zero only within the working precision"
                inexact = witness
        return inexact


@hookimpl
def register_verifiers():
    return [PetrovCheck()]
