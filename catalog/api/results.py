"""Check results as the Python API returns them: one object for every chart of one check run."""

from __future__ import annotations

import html
from collections.abc import Iterator
from typing import Any

from gravicat.checks import CheckResult, Status, worst


class CheckResults:
    """The outcome of :meth:`gravicat.Entry.check` / :meth:`gravicat.Chart.check`.

    The same reports ``gravicat check`` prints: ``reports`` holds one
    :class:`gravicat.engine.runner.ChartReport` per chart (``chart``, ``results``, ``path``,
    ``seconds``); ``status`` is the worst status over every check (``skipped`` only when all
    were); ``passed`` is True unless some check failed or crashed (``fail`` / ``error``), the
    condition under which ``gravicat check`` exits 1. ``to_json()`` is exactly the document
    ``gravicat check --json`` prints. Iterating gives ``(chart, CheckResult)`` pairs.
    """

    def __init__(self, metric: str, reports: list[Any]):
        self.metric = metric
        self.reports = list(reports)

    @property
    def status(self) -> Status:
        return worst(r.status for r in self.reports)

    @property
    def passed(self) -> bool:
        return self.status not in (Status.FAIL, Status.ERROR)

    def __iter__(self) -> Iterator[tuple[str, CheckResult]]:
        for rep in self.reports:
            for res in rep.results:
                yield rep.chart, res

    def __len__(self) -> int:
        return sum(len(r.results) for r in self.reports)

    def result(self, check: str, chart: str | None = None) -> CheckResult:
        """The result of ``check`` (on ``chart``, needed when several charts were checked)."""
        found = [r for c, r in self if r.check == check and chart in (None, c)]
        if len(found) != 1:
            from gravicat.errors import NotFound

            what = "several results" if found else "no result"
            raise NotFound(f"{self.metric}: {what} for check '{check}'" + (f" on chart '{chart}'" if chart else "")
                           + f" (checks: {', '.join(sorted({r.check for _, r in self}))})")
        return found[0]

    def failures(self) -> list[tuple[str, CheckResult]]:
        """The ``(chart, result)`` pairs that failed or crashed."""
        return [(c, r) for c, r in self if r.status in (Status.FAIL, Status.ERROR)]

    def to_json(self) -> dict[str, Any]:
        """The shape of ``gravicat check --json``: ``{"metric", "status", "charts": [...]}``."""
        return {"metric": self.metric, "status": self.status.value, "charts": [r.to_json() for r in self.reports]}

    def __repr__(self) -> str:
        lines = [f"<CheckResults {self.metric}: {self.status.value}"]
        for chart, r in self:
            lines.append(f"  {chart:<20} {r.check:<22} {r.status.value:<12} {r.method.value:<9} "
                         f"{r.detail.splitlines()[0] if r.detail else ''}")
        return "\n".join(lines) + ">"

    def _repr_html_(self) -> str:
        esc = html.escape
        rows = "".join(
            f"<tr><td>{esc(c)}</td><td>{esc(r.check)}</td><td>{esc(r.status.value)}</td>"
            f"<td>{esc(r.method.value)}</td><td>{r.seconds:.3f}</td><td>{esc(r.detail)}</td></tr>"
            for c, r in self)
        return (f"<p><b>{esc(self.metric)}</b>: {esc(self.status.value)}</p><table><tr><th>chart</th><th>check</th>"
                f"<th>status</th><th>method</th><th>seconds</th><th>detail</th></tr>{rows}</table>")
