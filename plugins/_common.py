"""Helpers shared by the built-in verifiers (no hook here)."""

from __future__ import annotations

from gravicat.checks import CheckResult, Method, Status


def from_outcome(check: str, outcome, verifier, *, detail_prefix: str = "", data=None) -> CheckResult:
    """A CheckResult from a :class:`gravicat.geometry.Outcome`."""
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
