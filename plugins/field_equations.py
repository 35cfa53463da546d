"""Verifier ``field-equations``: the entry's claimed Einstein equations hold exactly.

G_ab + Lambda g_ab = 8 pi T_ab with T from the claim (README conventions):
vacuum T = 0 (checked as R_ab = 0 when no Lambda is declared), electrovacuum
T_ab = (F_ac F_b^c - g_ab F_cd F^cd / 4) / (4 pi) with F = dA and Maxwell's
equations nabla^a F_ab = 0, perfect fluid T_ab = (rho + p) u_a u_b + p g_ab
with g(u, u) = -1 (dust: p = 0), null dust T_ab = rho k_a k_b with g(k, k) = 0.
For ``none`` the non-zero components of the Einstein tensor are reported.
"""

from __future__ import annotations

from gravicat import hookimpl

CLAIMS = ("vacuum", "lambda-vacuum", "electrovacuum", "perfect-fluid", "dust", "null-dust", "none")


def _total(X, terms):
    """Sum of engine values (terms with a common denominator are added first)."""
    return X._sum([t for t in terms if not X.vanishes(t)])


def _lower(X, vec):
    n = X.n
    return [_total(X, (X.g[a][b] * vec[b] for b in range(n) if not X.vanishes(X.g[a][b]))) for a in range(n)]


def residuals(spec, claim):
    """The residual function of ``claim`` for :meth:`Geometry.verify` (name -> value)."""
    import sympy as sp

    lam = spec.cosmological_constant
    lam = None if lam is None or sp.sympify(lam) == 0 else sp.sympify(lam)

    def fn(X):
        n = X.n
        out = {}
        if claim == "vacuum" and lam is None:
            for a in range(n):
                for b in range(a, n):
                    out[X.label("R", a, b)] = X.ricci[a][b]
            return out
        rhs = [[X.zero] * n for _ in range(n)]  # 8 pi T_ab
        if claim == "electrovacuum":
            A = spec.potential
            z = X.vanishes
            F = [[X.dval(A[b], a) - X.dval(A[a], b) for b in range(n)] for a in range(n)]
            gi = X.ginv
            Fmix = [  # F_a^b
                [_total(X, (F[a][c] * gi[c][b] for c in range(n) if not z(gi[c][b]))) for b in range(n)]
                for a in range(n)
            ]
            F2 = _total(X, (Fmix[a][b] * Fmix[b][a] for a in range(n) for b in range(n)))  # F_ab F^ba = -F^2
            for a in range(n):
                for b in range(a, n):
                    # 8 pi T_ab = 2 (F_ac F_b^c - g_ab F_cd F^cd / 4), F_cd F^cd = -F2
                    v = _total(X, (F[a][c] * Fmix[b][c] for c in range(n) if not z(F[a][c]) and not z(Fmix[b][c])))
                    rhs[a][b] = (v + X.g[a][b] * F2 / 4) * 2
            # Maxwell: nabla^a F_ab = g^ac d_c F_ab - Gamma^e F_eb + Gamma^e_cb F_e^c, with the contracted
            # Christoffel symbol Gamma^e = g^ac Gamma^e_ac (the g^ac Gamma^e_cb F_ae term, rewritten with
            # g^ac F_ae = -F_e^c)
            G = X.christoffel
            Gc = [
                _total(X, (gi[a][c] * G[e][a][c] for a in range(n) for c in range(n) if not z(gi[a][c])))
                for e in range(n)
            ]
            for b in range(n):
                terms = []
                for a in range(n):
                    if a == b:
                        continue
                    for c in range(n):
                        if z(gi[a][c]):
                            continue
                        d = X.ddval(A[b], c, a) - X.ddval(A[a], c, b)
                        if not z(d):
                            terms.append(gi[a][c] * d)
                terms += [-(Gc[e] * F[e][b]) for e in range(n) if not z(Gc[e]) and not z(F[e][b])]
                terms += [
                    G[e][c][b] * Fmix[e][c]
                    for e in range(n)
                    for c in range(n)
                    if not z(G[e][c][b]) and not z(Fmix[e][c])
                ]
                out[X.label("maxwell", b)] = _total(X, terms)
        elif claim in ("perfect-fluid", "dust"):
            fl = spec.fluid
            u = [X.val(v) for v in fl.velocity]
            ul = _lower(X, u)
            rho8 = X.val(8 * sp.pi * fl.density)
            p8 = X.val(8 * sp.pi * fl.pressure) if claim == "perfect-fluid" else X.zero
            for a in range(n):
                for b in range(a, n):
                    rhs[a][b] = (rho8 + p8) * ul[a] * ul[b] + p8 * X.g[a][b]
            out["g(u,u)+1"] = _total(X, (ul[a] * u[a] for a in range(n))) + 1
        elif claim == "null-dust":
            nd = spec.null_dust
            k = [X.val(v) for v in nd.vector]
            kl = _lower(X, k)
            rho8 = X.val(8 * sp.pi * nd.density)
            for a in range(n):
                for b in range(a, n):
                    rhs[a][b] = rho8 * kl[a] * kl[b]
            out["g(k,k)"] = _total(X, (kl[a] * k[a] for a in range(n)))
        Gt = X.einstein
        L = X.val(lam) if lam is not None else None
        for a in range(n):
            for b in range(a, n):
                v = Gt[a][b] - rhs[a][b]
                if L is not None:
                    v = v + L * X.g[a][b]
                out[X.label("E", a, b)] = v
        return out

    return fn


def _missing(spec, claim):
    if claim == "lambda-vacuum" and spec.cosmological_constant is None:
        return "the claim lambda-vacuum needs a cosmological-constant in the chart"
    if claim == "electrovacuum" and spec.potential is None:
        return "the claim electrovacuum needs a potential in the chart"
    if claim in ("perfect-fluid", "dust") and spec.fluid is None:
        return f"the claim {claim} needs a fluid in the chart"
    if claim == "null-dust" and spec.null_dust is None:
        return "the claim null-dust needs a null-dust in the chart"
    return None


class FieldEquationsCheck:
    name = "field-equations"
    version = "2"

    def check(self, geometry):
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
        missing = _missing(spec, claim)
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
