"""Verifier ``signature``: the metric is Lorentzian (-,+,+,+) at sampled points of the domain.

The inertia of g at a point is exact: the characteristic polynomial of the
(rational) symmetric matrix has only real roots, so Descartes' rule of signs
counts its positive and negative eigenvalues exactly. Points with values that
are not rational (pi, exp...) use floating-point eigenvalues of the interval
midpoints. Where the coordinate vector d/dx^a changes character (g_aa changes
sign over the sampled points, e.g. d/dt inside an ergoregion) the detail says
so; that is information, not a failure.
"""

from __future__ import annotations

from gravicat import hookimpl


def _sign_changes(coeffs):
    signs = [c > 0 for c in coeffs if c != 0]
    return sum(1 for i in range(1, len(signs)) if signs[i] != signs[i - 1])


def inertia(rows):
    """(negative, zero, positive) eigenvalue counts of a symmetric matrix of exact rationals."""
    import flint

    n = len(rows)
    mat = flint.fmpq_mat(n, n, [flint.fmpq(v) for row in rows for v in row])
    p = mat.charpoly()
    coeffs = [p[i] for i in range(n + 1)]  # ascending
    zero = next(i for i, c in enumerate(coeffs) if c != 0)
    pos = _sign_changes(coeffs)
    neg = _sign_changes([c if i % 2 == 0 else -c for i, c in enumerate(coeffs)])
    return neg, zero, pos


def inertia_float(rows):
    import numpy as np

    vals = np.linalg.eigvalsh(
        np.array([[float(v.mid()) if hasattr(v, "mid") else float(v) for v in row] for row in rows])
    )
    scale = max(1.0, float(np.max(np.abs(vals))))
    tol = 1e-12 * scale
    return int(np.sum(vals < -tol)), int(np.sum(np.abs(vals) <= tol)), int(np.sum(vals > tol))


class SignatureCheck:
    name = "signature"
    version = "1"

    def check(self, geometry):
        import flint

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
            exact = all(isinstance(v, flint.fmpq) for row in g for v in row)
            neg, zero, pos = inertia(g) if exact else inertia_float(g)
            approx += not exact
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
