"""Verifier ``observers``: each declared four-velocity u^mu is timelike and normalised, g(u, u) = -1."""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


class ObserversCheck:
    name = "observers"
    version = "1"

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.plugins._common import from_outcome, result

        spec = geometry.spec
        if not spec.observers:
            return [result(self.name, "skipped", "none", "no observers declared", self)]
        out = []
        n = geometry.n
        for obs, vel in spec.observers.items():

            def fn(X, vel=vel):
                u = [X.val(c) for c in vel]
                norm = X.zero
                for a in range(n):
                    for b in range(n):
                        if not X.vanishes(X.g[a][b]) and not X.vanishes(u[a]) and not X.vanishes(u[b]):
                            norm = norm + X.g[a][b] * u[a] * u[b]
                return {"g(u,u)+1": norm + 1}

            outcome = geometry.verify(fn, what=f"the normalisation g(u,u) = -1 of observer {obs!r}")
            out.append(from_outcome(f"{self.name}:{obs}", outcome, self))
        return out


@hookimpl
def register_verifiers():
    return [ObserversCheck()]
