"""Helpers shared by the built-in verifiers (no hook here)."""

from __future__ import annotations

from gravicat.checks import CheckResult, Method, Status


def from_outcome(check: str, outcome, verifier, *, detail_prefix: str = "", data=None) -> CheckResult:
    """A CheckResult from a :class:`gravicat.engine.geometry.Outcome`."""
    detail = outcome.detail if not detail_prefix else f"{detail_prefix}: {outcome.detail}"
    if outcome.status in ("pass", "fail", "inconclusive") and outcome.path:
        detail += f" [path: {outcome.path}]"
    return CheckResult(
        check=check,
        status=Status(outcome.status),
        method=Method(outcome.method),
        detail=detail,
        counterexample=outcome.counterexample,
        verifier=verifier.name,
        version=verifier.version,
        data=dict(data or {}),
    )


def result(
    check: str, status: str, method: str, detail: str, verifier, *, counterexample=None, data=None
) -> CheckResult:
    return CheckResult(
        check=check,
        status=Status(status),
        method=Method(method),
        detail=detail,
        counterexample=counterexample,
        verifier=verifier.name,
        version=verifier.version,
        data=dict(data or {}),
    )


def resolver(geometry):
    """The ``resolve("ENTRY:CHART") -> ChartSpec | None`` callable, or None."""
    r = geometry.spec.extra.get("resolve")
    return r if callable(r) else None


def symbol_map(source_syms, target_syms):
    """Map ``target_syms`` onto ``source_syms`` with the same name (sympy xreplace dict)."""
    by_name = {str(s): s for s in source_syms}
    return {t: by_name[str(t)] for t in target_syms if str(t) in by_name and by_name[str(t)] != t}


def signature_text(neg: int, zero: int, pos: int) -> str:
    """"(-,+,+,+)"-style text of eigenvalue sign counts, as long as the chart's dimension."""
    return "(" + ",".join(["-"] * neg + ["0"] * zero + ["+"] * pos) + ")"


def skipped_if_degenerate(geometry, check: str, verifier, needs: str) -> CheckResult | None:
    """A ``skipped`` result naming why, when the metric has no inverse on the domain
    (:meth:`gravicat.engine.geometry.Geometry.degeneracy`); None otherwise. ``needs`` says what the
    check would have computed from the inverse ("the Einstein tensor", ...)."""
    reason = geometry.degeneracy()
    if reason is None:
        return None
    return result(
        check,
        "skipped",
        "none",
        f"not computed: the metric is degenerate ({reason}), so {needs} does not exist "
        "(the structure and signature checks report the failure)",
        verifier,
    )


def point_matrix(pd):
    """The metric at a sample point as exact rationals or balls, for :func:`gravicat.engine.geometry.inertia`.

    On the sympy path the values are 60-digit floating-point numbers with no error bound; they
    become balls of radius ``10**-25`` times the largest entry (at least 1), the margin the
    engine's own zero test uses for that path (:meth:`gravicat.engine.geometry.PointData.zero_test`)."""
    if pd.point is not None:
        return pd.g
    import flint
    import mpmath

    from gravicat.engine.ratfun import arb_precision
    from gravicat.engine.sampling import DIGITS

    g = pd.g
    with mpmath.workdps(DIGITS + 10), arb_precision():
        scale = max([mpmath.mpf(1)] + [abs(v) for row in g for v in row])
        rad = flint.arb(mpmath.nstr(scale * mpmath.mpf(10) ** (-(DIGITS // 2)), 20))
        return [[flint.arb(mpmath.nstr(v, DIGITS + 10), rad) for v in row] for row in g]


def zero_sets_note(geometry, points) -> str:
    """One note on the sets of measure zero inside the domain where det g vanishes or diverges
    (see :func:`zero_sets`), or ""."""
    found = zero_sets(geometry, points)
    if not found:
        return ""
    parts = []
    for what in ("vanishes", "diverges"):
        items = [where for w, where in found if w == what]
        if items:
            parts.append(f"det g {what} " + " and ".join(items))
    plural = "sets" if len(found) > 1 else "a set"
    return "; ".join(parts) + f": {plural} of measure zero inside the domain (an axis, a horizon or another " \
        "coordinate or curvature singularity), not sampled"


def zero_sets(geometry, points, limit: int = 3) -> list[tuple[str, str]]:
    """Factors of det g that vanish (or diverge) inside the domain.

    A set of measure zero such as an axis ``sin(theta) = 0`` or a horizon inside the domain is
    never sampled (the sample points are generic), so it is found from the factored det g: a
    factor that takes both signs at the sample points is followed by bisection along the segment
    between two of them, and reported when the crossing point satisfies every inequality of the
    domain and the parameter ranges. Flint path only; at most ``limit`` notes; empty when det g
    is not ready within the budget. Each item is ``("vanishes" or "diverges", "where sin(theta) = 0
    (e.g. at theta ~ 0.0)")``."""
    import mpmath
    import sympy as sp

    from gravicat.engine.ratfun import BudgetExceeded, Unsupported
    from gravicat.engine.sampling import DIGITS, mp_function

    if geometry.field is None or len(points) < 2:
        return []
    try:
        with geometry.deadline(geometry.budget):
            det = geometry.to_sympy(geometry.det)
    except (BudgetExceeded, Unsupported, ZeroDivisionError):
        return []
    syms = list(geometry.params) + list(geometry.coords)
    coords = set(geometry.coords)
    sampler = geometry.sampler
    notes = []
    seen = set()
    for factor in sp.Mul.make_args(sp.factor(det)):
        base, exp = factor.as_base_exp()
        if base in seen or not (base.free_symbols & coords) or base.atoms(sp.core.function.AppliedUndef):
            continue
        seen.add(base)
        if not base.free_symbols <= set(syms):
            continue
        try:
            f = mp_function(syms, base)
            with mpmath.workdps(DIGITS):
                vals = [(pd, _sign(f(*[pd.sample.numeric[s] for s in syms]))) for pd in points]
        except (ValueError, TypeError, ZeroDivisionError, KeyError, NotImplementedError):
            continue
        pos = [pd for pd, s in vals if s > 0]
        neg = [pd for pd, s in vals if s < 0]
        if not pos or not neg:
            continue
        moved = [i for i, s in enumerate(syms) if s in base.free_symbols]
        where = None
        for p1, p2 in list(zip(pos, neg, strict=False))[:4]:
            where = _crossing(f, syms, p1, p2, moved, sampler)
            if where is not None:
                break
        if where is None:
            continue
        what = "vanishes" if exp.is_positive else "diverges"
        shown = ", ".join(
            f"{s} ~ {mpmath.nstr(mpmath.chop(where[s], 10**-20), 6)}" for s in geometry.coords if s in base.free_symbols
        )
        notes.append((what, f"where {sp.sstr(base)} = 0 (e.g. at {shown})"))
        if len(notes) >= limit:
            break
    return notes


def _sign(v) -> int:
    import mpmath

    if isinstance(v, mpmath.mpc):
        if abs(v.imag) > abs(v.real) * mpmath.mpf(10) ** -20:
            return 0
        v = v.real
    return (v > 0) - (v < 0)


def _crossing(f, syms, p1, p2, moved, sampler, steps: int = 80):
    """A point where ``f`` changes sign on the segment from ``p1`` towards ``p2`` (bisection; only
    the values at the indices ``moved``, those ``f`` depends on, move) that lies inside the domain
    and the parameter ranges and where ``f`` is small, or None."""
    import mpmath

    from gravicat.engine.sampling import DIGITS

    with mpmath.workdps(DIGITS):
        a = [mpmath.mpf(p1.sample.numeric[s]) for s in syms]
        b = list(a)
        for i in moved:
            b[i] = mpmath.mpf(p2.sample.numeric[syms[i]])
        s1 = _sign(f(*a))
        lo, hi = mpmath.mpf(0), mpmath.mpf(1)
        try:
            for _ in range(steps):
                mid = (lo + hi) / 2
                x = [ai + (bi - ai) * mid for ai, bi in zip(a, b, strict=True)]
                s = _sign(f(*x))
                if s == 0:
                    break
                if s == s1:
                    lo = mid
                else:
                    hi = mid
            x = [ai + (bi - ai) * (lo + hi) / 2 for ai, bi in zip(a, b, strict=True)]
            if abs(f(*x)) > mpmath.mpf(10) ** -8:
                return None  # a pole or a jump, not a zero
            for _rel, _free, g, strict, _bound in sampler.relations:
                v = g(*x)
                if isinstance(v, mpmath.mpc):
                    v = v.real
                if v < 0 or (strict and v <= mpmath.mpf(10) ** -12):
                    return None
        except (ValueError, TypeError, ZeroDivisionError):
            return None
        return dict(zip(syms, x, strict=True))
