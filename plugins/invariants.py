"""Verifier ``invariants``: curvature scalars, and the declared closed forms compared exactly.

Computes the Ricci scalar, the Kretschmann scalar R_abcd R^abcd and the Weyl
square C_abcd C^abcd (from K, R_ab R^ab and R) and reports their closed forms
in ``data`` (keys ``ricci_scalar``, ``kretschmann``, ``weyl_square``, as sympy
strings; where the engine carries a sub-expression of the metric as an opaque
function, the strings use its placeholder, defined under ``data["opaque"]``).
Each declared invariant (``ricci-scalar``, ``kretschmann``, ``weyl-square``) is
then checked: sampled stage, then exact proof.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart

ATTRS = {"ricci-scalar": "ricci_scalar", "kretschmann": "kretschmann", "weyl-square": "weyl_square"}


class InvariantsCheck:
    name = "invariants"
    version = "2"

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        import sympy as sp

        from gravicat.plugins._common import from_outcome, result, skipped_if_degenerate

        spec = geometry.spec
        out = []
        skipped = skipped_if_degenerate(geometry, self.name, self, "the curvature")
        if skipped is not None:  # every declared invariant is skipped for the same reason
            return [
                result(f"{self.name}:{key}", "skipped", "none", skipped.detail, self) for key in spec.invariants
            ] + [skipped]
        for key, inv in spec.invariants.items():
            attr = ATTRS.get(key)
            if attr is None:
                out.append(
                    result(
                        f"{self.name}:{key}",
                        "fail",
                        "none",
                        f"unknown invariant {key!r} (known: {', '.join(ATTRS)})",
                        self,
                    )
                )
                continue

            def fn(X, attr=attr, value=inv.value, key=key):
                return {key: getattr(X, attr) - X.val(value)}

            outcome = geometry.verify(fn, what=f"the declared {key} ({inv.source})")
            out.append(from_outcome(f"{self.name}:{key}", outcome, self))
        values, err = geometry.prove_values(lambda X: {a: getattr(X, a) for a in ATTRS.values()})
        if err:
            out.append(result(self.name, "inconclusive", "none", f"curvature scalars not computed ({err})", self))
            return out
        data = {a: sp.sstr(geometry.to_sympy(v, opaque=True)) for a, v in values.items()}
        shown = "; ".join(f"{a} = {s if len(s) < 200 else s[:197] + '...'}" for a, s in data.items())
        legend = geometry.legend()
        if legend:
            data["opaque"] = {sp.sstr(ph): sp.sstr(X) for ph, X in geometry.opaque.items()}
            shown += f"; {legend}"
        out.append(
            result(self.name, "pass", "symbolic", f"computed on the {geometry.path} path: {shown}", self, data=data)
        )
        return out


@hookimpl
def register_verifiers():
    return [InvariantsCheck()]
