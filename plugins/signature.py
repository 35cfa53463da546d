"""Verifier ``signature``: the metric is Lorentzian (-,+,+,+) at sampled points of the domain.

The inertia of g at a point is certain (:func:`gravicat.geometry.inertia`): the
characteristic polynomial of the symmetric matrix has only real roots, so
Descartes' rule of signs counts its positive and negative eigenvalues, in exact
rationals or, at points with values that are not rational (pi, exp, nested
roots...), in interval arithmetic when every coefficient's sign is certain;
only otherwise floating-point eigenvalues of the interval midpoints. Where the
coordinate vector d/dx^a changes character (g_aa changes sign over the sampled
points, e.g. d/dt inside an ergoregion) the detail says so; that is
information, not a failure.
"""

from __future__ import annotations

from gravicat import hookimpl


class SignatureCheck:
    name = "signature"
    version = "1"

    def check(self, geometry):
        from gravicat.geometry import inertia
        from gravicat.plugins._common import result

        n = geometry.n
        names = [str(c) for c in geometry.coords]
        seen_sign = {i: set() for i in range(n)}
        examples = {}
        checked = 0
        approx = 0
        for _ in range(geometry.samples * 2):
            pd = geometry.draw_point(need_inverse=False)
            if pd is None:
                break
            g = pd.g
            (neg, zero, pos), certain = inertia(g)
            approx += not certain
            if (neg, zero, pos) != (1, 0, n - 1):
                sig = "(" + ",".join(["-"] * neg + ["0"] * zero + ["+"] * pos) + ")"
                return [
                    result(
                        self.name,
                        "fail",
                        "sampled",
                        f"the metric is not Lorentzian at a point of the domain: signature {sig}",
                        self,
                        counterexample={"point": dict(pd.sample.shown), "component": "signature", "residual": sig},
                    )
                ]
            checked += 1
            for i in range(n):
                v = g[i][i]
                s = "timelike" if v < 0 else "spacelike" if v > 0 else "null"
                seen_sign[i].add(s)
                examples.setdefault((i, s), pd.sample.shown)
        if not checked:
            return [
                result(self.name, "inconclusive", "none", "no valid sample point could be drawn from the domain", self)
            ]
        notes = []
        for i in range(n):
            kinds = seen_sign[i]
            if len(kinds) > 1:
                where = ", ".join(
                    f"{s} e.g. at " + ", ".join(f"{k}={v}" for k, v in examples[(i, s)].items()) for s in sorted(kinds)
                )
                notes.append(f"d/d{names[i]} changes character over the domain ({where})")
            else:
                notes.append(f"d/d{names[i]} {next(iter(kinds))}")
        detail = f"Lorentzian (-,+,+,+) at {checked} sample points"
        if approx:
            detail += f" ({approx} by floating-point eigenvalues)"
        detail += "; " + "; ".join(notes)
        return [
            result(
                self.name,
                "pass",
                "sampled",
                detail,
                self,
                data={"character": {names[i]: sorted(seen_sign[i]) for i in range(n)}},
            )
        ]


@hookimpl
def register_verifiers():
    return [SignatureCheck()]
