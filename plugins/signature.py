"""Verifier ``signature``: the metric is Lorentzian, one minus sign and n - 1 plus signs
((-,+,+,+) in four dimensions; the printed signature always has the chart's dimension), at
sampled points of the domain.

The inertia of g at a point is certain (:func:`gravicat.engine.curvature.inertia`; the
Lorentzian counts come from :mod:`gravicat.physics.claims`, shared with repair): the
characteristic polynomial of the symmetric matrix has only real roots, so
Descartes' rule of signs counts its positive and negative eigenvalues, in exact
rationals or, at points with values that are not rational (pi, exp, nested
roots...), in interval arithmetic when the signs of the coefficients decide it
(on the sympy path, in 60-digit floating point with the engine's zero-test
margin). A point where it is not decided is counted as undecided, never as a
counterexample; the verdict ``fail`` needs a certain count.

The sample points are generic (:mod:`gravicat.engine.sampling`): a wrong signature at
one, with det g != 0 there, holds on a neighbourhood of it. A set of measure
zero where det g vanishes inside the domain (an axis ``sin(theta) = 0``, a
horizon) is not sampled; it is reported as a note, found from the factors of
det g. A metric degenerate at every sampled point fails. Where the coordinate
vector d/dx^a changes character (g_aa changes sign over the sampled points,
e.g. d/dt inside an ergoregion) the detail says so; that is information, not
a failure.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import CheckResult, PreparedChart


class SignatureCheck:
    name = "signature"
    version = "2"
    screens_repairs = True  # repair runs it for the baseline and the proof of a repaired chart

    def check(self, geometry: PreparedChart) -> list[CheckResult]:
        from gravicat.engine.curvature import inertia
        from gravicat.physics.claims import lorentzian
        from gravicat.plugins._common import point_matrix, result, signature_text, zero_sets_note

        n = geometry.n
        want = lorentzian(n)
        lorentz = signature_text(*want)
        names = [str(c) for c in geometry.coords]
        funcs = ", ".join(str(f) for f in geometry.spec.functions)
        seen_sign = {i: set() for i in range(n)}
        examples = {}
        good = []  # points with the Lorentzian signature
        approx = 0  # of which decided by floating-point eigenvalues only
        undecided = []  # (point, counts or None): the inertia was not certain
        degenerate = []  # (point, counts): a certain zero eigenvalue
        for _ in range(geometry.samples * 2):
            pd = geometry.draw_point(need_inverse=False)
            if pd is None:
                break
            try:
                with pd.precision():
                    counts, certain = inertia(point_matrix(pd))
            except (ValueError, ZeroDivisionError):  # a value that is not a finite number
                undecided.append((pd, None))
                continue
            if counts == want:
                good.append(pd)
                approx += not certain
            elif not certain:
                undecided.append((pd, counts))
                continue
            elif counts[1]:
                degenerate.append((pd, counts))
                continue
            else:
                return [self._wrong(counts, pd, lorentz, funcs)]
            for i in range(n):
                v = pd.g[i][i]
                s = "timelike" if v < 0 else "spacelike" if v > 0 else "null"
                seen_sign[i].add(s)
                examples.setdefault((i, s), pd.sample.shown)
        if degenerate and not good:
            pd, counts = degenerate[0]
            why = geometry.degeneracy() or "det g = 0 at every sampled point of the domain"
            return [
                result(
                    self.name,
                    "fail",
                    "sampled",
                    f"the metric is degenerate ({why}): signature {signature_text(*counts)} at "
                    f"{len(degenerate)} sample points, not Lorentzian {lorentz}",
                    self,
                    counterexample={
                        "point": dict(pd.sample.shown),
                        "component": "signature",
                        "residual": signature_text(*counts),
                    },
                )
            ]
        if not good:
            if undecided:
                return [
                    result(
                        self.name,
                        "inconclusive",
                        "sampled",
                        f"the signature was not decided at any of {len(undecided)} sample points "
                        "(the values there were not precise enough to fix the sign of every eigenvalue)",
                        self,
                    )
                ]
            return [
                result(self.name, "inconclusive", "none", "no valid sample point could be drawn from the domain", self)
            ]
        notes = []
        if degenerate:
            if geometry.field is None:
                return [
                    result(
                        self.name,
                        "inconclusive",
                        "sampled",
                        f"Lorentzian {lorentz} at {len(good)} sample points, but det g = 0 at "
                        f"{len(degenerate)} others; on the sympy path it is not decided whether that is a "
                        "set of measure zero or a region of the domain",
                        self,
                        counterexample={"point": dict(degenerate[0][0].sample.shown), "component": "signature",
                                        "residual": signature_text(*degenerate[0][1])},
                    )
                ]
            notes.append(
                f"det g = 0 at {len(degenerate)} sample points (e.g. at "
                + ", ".join(f"{k}={v}" for k, v in degenerate[0][0].sample.shown.items())
                + "), where det g, not identically zero, vanishes on a set of measure zero"
            )
        sets = zero_sets_note(geometry, good)
        if sets:
            notes.append(sets)
        if undecided:
            notes.append(f"not decided at {len(undecided)} further sample points (imprecise values)")
        for i in range(n):
            kinds = seen_sign[i]
            if len(kinds) > 1:
                where = ", ".join(
                    f"{s} e.g. at " + ", ".join(f"{k}={v}" for k, v in examples[(i, s)].items()) for s in sorted(kinds)
                )
                notes.append(f"d/d{names[i]} changes character over the domain ({where})")
            else:
                notes.append(f"d/d{names[i]} {next(iter(kinds))}")
        detail = f"Lorentzian {lorentz} at {len(good)} sample points"
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
                data={
                    "signature": lorentz,
                    "character": {names[i]: sorted(seen_sign[i]) for i in range(n)},
                    "degenerate_points": len(degenerate),
                    "undecided_points": len(undecided),
                },
            )
        ]

    def _wrong(self, counts, pd, lorentz, funcs):
        from gravicat.plugins._common import result, signature_text

        sig = signature_text(*counts)
        detail = f"the metric is not Lorentzian {lorentz} at a point of the domain: signature {sig}"
        if counts == (counts[0], 0, 1) and counts[0] > 1:
            detail += f" (the opposite sign convention; this catalogue uses {lorentz})"
        if funcs:
            detail += f", with the sampled values of the declared functions {funcs}"
        return result(
            self.name,
            "fail",
            "sampled",
            detail,
            self,
            counterexample={"point": dict(pd.sample.shown), "component": "signature", "residual": sig},
        )


@hookimpl
def register_verifiers():
    return [SignatureCheck()]
