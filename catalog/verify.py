"""Running verifiers: each chart is built and prepared once, every verifier gets the same
prepared :class:`gravicat.geometry.Geometry`, and the runner (not the verifier) isolates
crashes, times each verifier and stamps its name and version on every result.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from gravicat.checks import CheckResult, Method, Status, worst
from gravicat.errors import InputError
from gravicat.metricfile import MetricDocument

DEFAULT_BUDGET = 20.0  # seconds per symbolic proof before a check is reported inconclusive


@dataclass
class ChartReport:
    chart: str
    results: list[CheckResult] = field(default_factory=list)
    path: str = ""
    seconds: float = 0.0

    @property
    def status(self) -> Status:
        return worst(r.status for r in self.results)

    def to_json(self) -> dict[str, Any]:
        return {"chart": self.chart, "status": self.status.value, "path": self.path,
                "seconds": round(self.seconds, 6), "checks": [r.to_json() for r in self.results]}


def make_resolver(docs: Mapping[str, MetricDocument]) -> Callable[[str], Any]:
    """``resolve("ENTRY:CHART") -> ChartSpec | None`` over ``docs`` (id -> document), cached."""
    from gravicat.metricfile import build_chart

    cache: dict[str, Any] = {}

    def resolve(ref: str):
        if ref not in cache:
            entry, _, chart = ref.partition(":")
            doc = docs.get(entry)
            if doc is None or chart not in doc.data["charts"]:
                cache[ref] = None
            else:
                cache[ref] = build_chart(doc, chart, resolve)
        return cache[ref]

    return resolve


def select_verifiers(all_verifiers: Mapping[str, Any], only: Iterable[str] | None) -> list[Any]:
    if not all_verifiers:
        raise InputError("plugins", None, "no verifier is loaded: is gravicat installed (pip install -e .)?")
    if not only:
        return list(all_verifiers.values())
    chosen = []
    for name in only:
        if name not in all_verifiers:
            raise InputError("--only", None, f"no check '{name}' (available: {', '.join(all_verifiers)})")
        chosen.append(all_verifiers[name])
    return chosen


def run_verifier(verifier, geometry) -> list[CheckResult]:
    """Run one verifier on a prepared chart; a crash becomes an ``error`` result, never an exception."""
    start = time.perf_counter()
    try:
        results = list(verifier.check(geometry))
        if not all(isinstance(r, CheckResult) for r in results):
            raise TypeError("check() must return a list of CheckResult")
    except Exception as exc:  # a faulty plugin must not stop the others
        results = [CheckResult(check=verifier.name, status=Status.ERROR, method=Method.NONE,
                               detail=f"the verifier crashed: {type(exc).__name__}: {exc}")]
    elapsed = time.perf_counter() - start
    for r in results:
        r.verifier, r.version = verifier.name, verifier.version
        r.seconds = r.seconds or elapsed / max(1, len(results))
    return results


def check_chart(doc: MetricDocument, chart: str, verifiers: Iterable[Any], *,
                resolve: Callable[[str], Any] | None = None, budget: float = DEFAULT_BUDGET,
                seed: int = 0) -> ChartReport:
    """Build ``chart`` of ``doc`` once and run every verifier on the shared prepared geometry."""
    from gravicat.geometry import Geometry
    from gravicat.metricfile import build_chart

    start = time.perf_counter()
    spec = build_chart(doc, chart, resolve)
    geometry = Geometry(spec, budget=budget, seed=seed)
    report = ChartReport(chart=chart, path=geometry.path)
    for verifier in verifiers:
        report.results.extend(run_verifier(verifier, geometry))
    report.seconds = time.perf_counter() - start
    return report


def check_document(doc: MetricDocument, verifiers: list[Any], *, charts: Iterable[str] | None = None,
                   resolve: Callable[[str], Any] | None = None, budget: float = DEFAULT_BUDGET) -> list[ChartReport]:
    names = list(charts) if charts else doc.chart_names
    return [check_chart(doc, c, verifiers, resolve=resolve, budget=budget) for c in names]


def bundled_documents() -> dict[str, MetricDocument]:
    from gravicat.store import iter_bundled_documents

    return {d.id: d for d in iter_bundled_documents()}


# --------------------------------------------------------------------------- process pool units


def run_unit(unit: dict[str, Any]) -> dict[str, Any]:
    """Verify one (document, chart) in a worker process; everything in and out is plain data."""
    from gravicat.registry import make_plugin_manager, verifiers

    pm = make_plugin_manager(blocked=unit["blocked"])
    chosen = [v for name, v in verifiers(pm).items() if name in unit["verifiers"]]
    docs = {k: MetricDocument(v, f"catalogue:{k}") for k, v in unit["docs"].items()}
    doc = MetricDocument(unit["document"], unit["source"])
    report = check_chart(doc, unit["chart"], chosen, resolve=make_resolver({**docs, doc.id: doc}),
                         budget=unit["budget"])
    return {"key": unit["key"], "chart": unit["chart"], "path": report.path, "seconds": report.seconds,
            "results": [r.to_json() | {"data": r.data} for r in report.results]}


def result_from_json(d: dict[str, Any]) -> CheckResult:
    return CheckResult(check=d["check"], status=Status(d["status"]), method=Method(d["method"]),
                       detail=d["detail"], counterexample=d.get("counterexample"), seconds=d.get("seconds", 0.0),
                       verifier=d.get("verifier", ""), version=d.get("version", ""), data=d.get("data") or {})
