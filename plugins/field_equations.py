"""Verifier ``field-equations``: the entry's claimed Einstein equations hold exactly.

G_ab + Lambda g_ab = 8 pi T_ab with T from the claim (README conventions):
vacuum T = 0 (checked as R_ab = 0 when no Lambda is declared), electrovacuum
T_ab = (F_ac F_b^c - g_ab F_cd F^cd / 4) / (4 pi) with F = dA and Maxwell's
equations nabla^a F_ab = 0, perfect fluid T_ab = (rho + p) u_a u_b + p g_ab
with g(u, u) = -1 (dust: p = 0), null dust T_ab = rho k_a k_b with g(k, k) = 0.
For ``none`` the non-zero components of the Einstein tensor are reported.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl
from gravicat.physics.claims import CLAIMS

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


def residuals(spec, claim):
    """The residual function of ``claim`` for :meth:`Geometry.verify` (name -> value): the shared
    :func:`gravicat.physics.claims.field_equation_residuals` over the chart's declared matter."""
    from gravicat.physics.claims import SpecMatter, field_equation_residuals

    def fn(X):
        return field_equation_residuals(X, claim, SpecMatter(spec, X))

    return fn


class FieldEquationsCheck:
    name = "field-equations"
    version = "2"
    screens_repairs = True  # repair runs it for the baseline and the proof of a repaired chart

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.physics.claims import missing_matter
        from gravicat.plugins._common import from_outcome, result, skipped_if_degenerate

        spec = geometry.spec
        claim = spec.field_equations
        if claim not in CLAIMS:
            return [result(self.name, "fail", "none", f"unknown field-equations claim {claim!r}", self)]
        skipped = skipped_if_degenerate(geometry, self.name, self, "the Einstein tensor")
        if skipped is not None:
            return [skipped]
        if claim == "none":
            return [self._report_einstein(geometry)]
        missing = missing_matter(spec, claim)
        if missing:
            return [result(self.name, "fail", "none", missing, self)]
        what = claim if spec.cosmological_constant is None else f"{claim} (with the declared cosmological constant)"
        outcome = geometry.verify(residuals(spec, claim), what=f"the {what} field equations")
        return [from_outcome(self.name, outcome, self)]

    def _report_einstein(self, geometry):
        import sympy as sp

        from gravicat.plugins._common import result

        n = geometry.n

        def fn(X):
            return {X.label("G", a, b): X.einstein[a][b] for a in range(n) for b in range(a, n)}

        values, err = geometry.prove_values(fn)
        if err:
            return result(
                self.name,
                "inconclusive",
                "none",
                f"no claim to check; the Einstein tensor was not computed ({err})",
                self,
            )
        comps = {}
        for k, v in values.items():
            if geometry.is_zero(v):
                continue
            comps[k] = sp.sstr(geometry.to_sympy(v, opaque=True))
        listing = "; ".join(f"{k} = {v}" for k, v in comps.items()) or "all components vanish"
        data = {"einstein": comps, "path": geometry.path}
        legend = geometry.legend()
        if legend and comps:
            listing += f"; {legend}"
            data["opaque"] = {sp.sstr(ph): sp.sstr(X) for ph, X in geometry.opaque.items()}
        return result(
            self.name,
            "pass",
            "symbolic",
            f"no field equations claimed; Einstein tensor: {listing}",
            self,
            data=data,
        )


@hookimpl
def register_verifiers():
    return [FieldEquationsCheck()]
