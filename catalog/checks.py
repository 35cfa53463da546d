"""Verification results and the verifier contract.

A verifier is any object with ``name`` (str), ``version`` (str) and
``check(subject) -> list[CheckResult]``, contributed through the
``register_verifiers`` hook. ``subject`` is a :class:`gravicat.engine.geometry.Geometry`
(a prepared chart: sympy metric, inverse, derivatives and lazily cached
curvature, shared by every verifier of one run). The core runs verifiers,
isolates their crashes, times them and records provenance; a verifier only
computes and reports.

This module is imported by the CLI at start-up: keep it free of sympy.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass, field
from typing import Any, Protocol, runtime_checkable


class Status(enum.StrEnum):
    """Outcome of one check. :data:`SEVERITY` orders them for the overall status."""

    PASS = "pass"
    SKIPPED = "skipped"
    INCONCLUSIVE = "inconclusive"
    FAIL = "fail"
    ERROR = "error"  # the verifier itself crashed: a bug to report, never a pass


# A skipped check neither helps nor harms: it only shows when nothing else ran.
SEVERITY = {Status.SKIPPED: 0, Status.PASS: 1, Status.INCONCLUSIVE: 2, Status.FAIL: 3, Status.ERROR: 4}


def worst(statuses) -> Status:
    """The worst of ``statuses``; ``skipped`` only when every check was skipped (or none ran)."""
    out = Status.SKIPPED
    for s in statuses:
        s = Status(s)
        if SEVERITY[s] > SEVERITY[out]:
            out = s
    return out


class Method(enum.StrEnum):
    SYMBOLIC = "symbolic"  # proved identically (exact rational-function normal form)
    SAMPLED = "sampled"  # exact rational evaluation at random points of the domain
    NONE = "none"  # nothing was computed (skipped)


@dataclass
class CheckResult:
    """One check of one chart.

    ``counterexample`` (on failure) holds the parameter and coordinate values
    (as strings of exact numbers), the offending component and its residual:
    ``{"point": {"M": "1", "r": "7/2", ...}, "component": "R[t,r]",
    "residual": "-3/49"}``. ``data`` carries extra machine-readable output
    (for example computed invariants) and may be empty.
    """

    check: str
    status: Status
    method: Method
    detail: str
    counterexample: dict[str, Any] | None = None
    seconds: float = 0.0
    verifier: str = ""
    version: str = ""
    data: dict[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        return {
            "check": self.check,
            "status": Status(self.status).value,
            "method": Method(self.method).value,
            "detail": self.detail,
            "counterexample": self.counterexample,
            "seconds": round(self.seconds, 6),
            "verifier": self.verifier,
            "version": self.version,
        }


@runtime_checkable
class Verifier(Protocol):
    name: str
    version: str

    def check(self, subject: Any) -> list[CheckResult]: ...


@runtime_checkable
class Exporter(Protocol):
    """An export target: ``name`` is the ``--to`` value; ``suffix`` the file ending.

    ``export(document, context)`` returns the text to write. ``document`` is a
    :class:`gravicat.format.metricfile.MetricDocument`; ``context`` is a dict with at
    least ``revision`` (hash) and ``checks`` (list of stored result dicts).
    """

    name: str
    version: str
    suffix: str

    def export(self, document: Any, context: dict[str, Any]) -> str: ...
