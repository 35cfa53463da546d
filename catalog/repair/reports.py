"""Repair reports: the constants of the search and the dataclasses of what it found."""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

from gravicat.checks import CheckResult
from gravicat.format.metricfile import MetricDocument

#: Edit kinds, in the order of how common the slip is (used to rank suggestions of equal size).
KINDS = ("sign", "factor-2", "small-factor", "exponent", "trig", "swap", "drop-term", "parameter-power")
#: The factors and divisors of ``small-factor`` (a dropped or stray /3 of a cosmological constant, a 4 or 6 of a
#: charge or a mass term); 2 is ``factor-2``. Offered where ``factor-2`` is, except on a bare number.
SMALL_FACTORS = (3, 4, 6)
HYPOTHESIS_NOTE = ("Each suggestion is a hypothesis: several metrics can satisfy the same claim, so check the "
                   "repaired expression against the source paper before relying on it.")

DEFAULT_POINTS = 3
DEFAULT_BUDGET = 60.0
PROOF_BUDGET = 20.0
OTHERS_LIMIT = 5.0  # seconds for the other verifiers on the failing chart (closed forms of a wrong metric are slow)
MAX_PROOFS = 24  # survivors proved per chart (best ranked first)
PAIR_POOL = 60  # single edits pairs are drawn from, best residual reduction first
_PREC = 256
_ASYM_PREC = 1024
_ASYM_EXP = 120  # the asymptotic screen evaluates g_tt at r = 2**120
_IMPLICIT = (Fraction(2), Fraction(-1), Fraction(1, 2))  # exponents offered for a factor written without one
_TRIG = {"sin": "cos", "cos": "sin", "sinh": "cosh", "cosh": "sinh", "tan": "cot", "cot": "tan",
         "tanh": "coth", "coth": "tanh"}


# =========================================================================== reports


@dataclass
class EditInfo:
    """One edit of a suggestion: the field, the kind, what changed, and the whole expression before and after."""

    field: str
    kind: str
    detail: str
    original: str
    suggested: str

    def to_json(self) -> dict[str, str]:
        return {"field": self.field, "kind": self.kind, "detail": self.detail, "original": self.original,
                "suggested": self.suggested}


@dataclass
class Suggestion:
    """A repaired chart that passed the screen and the verifiers."""

    chart: str
    edits: list[EditInfo]
    status: str  # "pass", or "inconclusive" when a repaired or previously passing check is only sampled now
    checks: list[CheckResult]
    document: MetricDocument  # the repaired document (canonical form)
    still_failing: list[str] = field(default_factory=list)  # non-repairable checks that failed before and still do
    doubt: str = ""  # why this is probably not the slip (ranked after every other suggestion, never applied unasked)

    @property
    def size(self) -> int:
        return len(self.edits)

    def to_json(self, rank: int) -> dict[str, Any]:
        return {"rank": rank, "size": self.size, "status": self.status, "revision": self.document.hash,
                "still_failing": self.still_failing, "doubt": self.doubt,
                "edits": [e.to_json() for e in self.edits], "checks": [c.to_json() for c in self.checks]}


@dataclass
class ChartRepair:
    """The search on one chart."""

    chart: str
    baseline: list[CheckResult]
    failing: list[str] = field(default_factory=list)  # repairable checks that failed
    candidates: int = 0  # distinct single edits
    pairs: int = 0  # pairs of edits screened
    screened: int = 0  # candidates (singles and pairs) screened
    passed_screen: int = 0  # distinct metrics that passed the screen
    proved: int = 0  # survivors run through the verifiers
    suggestions: list[Suggestion] = field(default_factory=list)
    exhausted: bool = False  # the budget ran out before every candidate was screened
    note: str = ""
    seconds: float = 0.0
    points: int = 0

    def to_json(self, first_rank: int = 1) -> dict[str, Any]:
        return {"chart": self.chart, "failing": self.failing,
                "baseline": [r.to_json() for r in self.baseline],
                "candidates": self.candidates, "pairs": self.pairs, "screened": self.screened,
                "points": self.points, "passed_screen": self.passed_screen, "proved": self.proved,
                "budget_exhausted": self.exhausted, "note": self.note, "seconds": round(self.seconds, 3),
                "suggestions": [s.to_json(first_rank + i) for i, s in enumerate(self.suggestions)]}


@dataclass
class RepairReport:
    metric: str
    charts: list[ChartRepair]
    seconds: float = 0.0

    @property
    def status(self) -> str:
        """``nothing-to-repair``, ``repairs-found`` or ``no-repair-found`` (also when every suggestion is doubtful)."""
        if not any(c.failing for c in self.charts):
            return "nothing-to-repair"
        if any(not s.doubt for c in self.charts for s in c.suggestions):
            return "repairs-found"
        return "no-repair-found"

    @property
    def suggestions(self) -> list[Suggestion]:
        return [s for c in self.charts for s in c.suggestions]

    def to_json(self) -> dict[str, Any]:
        charts, rank = [], 1
        for c in self.charts:
            charts.append(c.to_json(rank))
            rank += len(c.suggestions)
        return {"metric": self.metric, "status": self.status, "note": HYPOTHESIS_NOTE,
                "seconds": round(self.seconds, 3), "charts": charts}


def screens_repairs(verifier) -> bool:
    """Does repair run ``verifier`` for the baseline and the proof of a repaired chart? A verifier says so
    with the attribute ``screens_repairs = True`` (its checks honour the proof budget, and repair can
    screen what it checks: field equations, signature, limits); every other verifier runs on a failing
    chart and on each survivor under a hard time limit, so that a repair never breaks a check that passed."""
    return getattr(verifier, "screens_repairs", False) is True
