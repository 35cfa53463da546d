"""Running verifiers: each chart is built and prepared once, every verifier gets the same
prepared :class:`gravicat.engine.geometry.Geometry`, and the runner (not the verifier) isolates
crashes, times each verifier and stamps its name and version on every result.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable, Iterator, Mapping
from dataclasses import dataclass, field
from typing import Any

from gravicat.checks import CheckResult, Method, Status, worst
from gravicat.errors import InputError
from gravicat.format.metricfile import MetricDocument

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
    from gravicat.format.metricfile import build_chart

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


def applies(verifier, spec) -> bool:
    """Whether ``verifier`` checks charts of the kind of ``spec``: a verifier's ``kinds`` attribute lists
    them (``spacetime``, ``initial-data``); without one it checks spacetimes only."""
    return spec.extra.get("kind", "spacetime") in getattr(verifier, "kinds", ("spacetime",))


def _not_applicable(verifier, spec) -> CheckResult:
    kind = spec.extra.get("kind", "spacetime")
    detail = ("not a spacetime: an initial-data entry (a 3-geometry with extrinsic curvature)" if kind != "spacetime"
              else f"applies to {' and '.join(getattr(verifier, 'kinds', ()))} entries only, not to a spacetime")
    return CheckResult(check=verifier.name, status=Status.SKIPPED, method=Method.NONE, detail=detail)


def run_verifier(verifier, geometry) -> list[CheckResult]:
    """Run one verifier on a prepared chart; a crash becomes an ``error`` result, never an exception.
    A verifier that does not apply to the chart's kind of entry (:func:`applies`) is ``skipped``."""
    start = time.perf_counter()
    if not applies(verifier, geometry.spec):
        results = [_not_applicable(verifier, geometry.spec)]
    else:
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
    from gravicat.format.metricfile import build_chart

    start = time.perf_counter()
    spec = build_chart(doc, chart, resolve)
    report = ChartReport(chart=chart)
    _run_spec(spec, list(verifiers), budget, seed, _collect_into(report))
    report.seconds = time.perf_counter() - start
    return report


def _collect_into(report: ChartReport) -> Callable[[tuple], None]:
    def collect(item: tuple) -> None:
        if item[0] == "path":
            report.path = item[1]
        else:
            report.results.extend(item[2])

    return collect


def _run_spec(spec, verifiers: list[Any], budget: float, seed: int, emit: Callable[[tuple], None]) -> None:
    """Prepare a built chart and run the verifiers, reporting as it goes: ``("path", PATH)`` once
    the chart is prepared, then ``("results", K, [CheckResult, ...])`` after the K-th verifier."""
    from gravicat.engine.geometry import Geometry

    geometry = Geometry(spec, budget=budget, seed=seed)
    emit(("path", geometry.path))
    for k, verifier in enumerate(verifiers):
        emit(("results", k, run_verifier(verifier, geometry)))


# CPU seconds a chart's child gets beyond its proofs (building, preparing, sampling): see chart_cap()
CAP_BASE = 10.0


def chart_cap(doc: MetricDocument, chart: str, n_verifiers: int, budget: float) -> float:
    """The hard CPU-time cap of one chart's child process, in seconds.

    ``CAP_BASE + budget * checks``, where ``checks`` counts one proof per verifier plus one per
    declared limit of the chart, flat-when substitution, transform, observer and published
    invariant (each of which may take a symbolic proof of up to ``budget`` CPU seconds).
    """
    data = doc.data
    c = data["charts"][chart]
    declared = (sum(1 for lim in data["limits"].values() if lim["chart"] == chart) + len(data["flat-when"])
                + len(c.get("transforms", ())) + len(c.get("observers", ())) + len(c.get("invariants", ())))
    return CAP_BASE + budget * (n_verifiers + declared)


def check_document(doc: MetricDocument, verifiers: list[Any], *, charts: Iterable[str] | None = None,
                   resolve: Callable[[str], Any] | None = None, budget: float = DEFAULT_BUDGET,
                   jobs: int | None = None) -> list[ChartReport]:
    """Check the charts of ``doc`` (default: all), one :class:`ChartReport` per chart in order.

    ``jobs=None``: one chart after the other in this process (no caps: for callers that are
    already in a capped child). ``jobs=N``: each chart (also a single one) is built, prepared and
    checked in its own forked child, at most N at a time, under the hard CPU-time cap
    :func:`chart_cap` and the memory cap of :mod:`gravicat.engine.fork`; the reports are the same
    as in-process ones, except that the checks of a chart that reached a cap before reporting are
    ``inconclusive`` (the detail says which cap). A chart that cannot be built raises the same
    error as in-process (the first such chart in chart order). Without ``fork`` the charts run in-process.
    """
    names = list(charts) if charts else doc.chart_names
    if jobs is None:
        return [check_chart(doc, c, verifiers, resolve=resolve, budget=budget) for c in names]
    import gravicat.engine.geometry  # noqa: F401 - sympy and flint, imported once here for every child
    from gravicat.engine import fork as _fork

    verifiers = list(verifiers)
    caps = [chart_cap(doc, c, len(verifiers), budget) for c in names]

    # Everything that touches the file's content - building the chart (its definitions substituted),
    # preparing it (the inverse metric, the curvature) and the verifiers - runs in the child, under
    # the chart's CPU-time cap and the memory cap of gravicat.engine.fork; a chart that cannot be
    # built raises its error in the child, re-raised here exactly as in-process.
    def task(k: int):
        def run(emit):
            from gravicat.format.metricfile import build_chart

            start = time.perf_counter()
            spec = build_chart(doc, names[k], resolve)
            _run_spec(spec, verifiers, budget, 0, lambda item: emit(_portable(item)))
            return time.perf_counter() - start

        return run

    # the largest charts start first, so that a long one does not end up last on a core
    order = sorted(range(len(names)), key=lambda k: -len(str(doc.data["charts"][names[k]])))
    started = _fork.run_many([task(k) for k in order], jobs=jobs, cpu_seconds=[caps[k] for k in order])
    outcomes = [started[order.index(k)] for k in range(len(names))]
    reports = []
    for chart, cap, out in zip(names, caps, outcomes, strict=True):
        if out.error is not None:
            out.reraise()
        report = ChartReport(chart=chart)
        collect = _collect_into(report)
        reported = set()
        for item in out.items:
            collect(item)
            if item[0] == "results":
                reported.add(item[1])
        report.seconds = out.value if out.finished else out.seconds
        if not out.finished:
            report.results.extend(_unreported(verifiers, reported, cap, out))
        reports.append(report)
    return reports


def _portable(item: tuple) -> tuple:
    """``item`` as it can travel through a pipe: results whose ``data`` does not pickle get it as text."""
    if item[0] != "results":
        return item
    import pickle

    out = []
    for r in item[2]:
        try:
            pickle.dumps(r)
        except Exception:  # noqa: BLE001 - a plugin's data that cannot travel is shown as text
            r = CheckResult(r.check, r.status, r.method, r.detail, r.counterexample, r.seconds, r.verifier,
                            r.version, {str(k): str(v) for k, v in r.data.items()})
        out.append(r)
    return (item[0], item[1], out)


def _unreported(verifiers: list[Any], reported: set[int], cap: float, out) -> list[CheckResult]:
    """Results for the verifiers a chart's child did not report (it reached its cap, or died)."""
    if out.limit == "memory":
        status = Status.INCONCLUSIVE
        detail = (f"not finished: memory cap reached (the chart's process may add {_memory_text()} of "
                  "address space; setting memory-cap)")
    elif out.limit is not None:
        status = Status.INCONCLUSIVE
        what = "CPU-time" if out.limit == "cpu" else "elapsed-time"
        detail = (f"not finished: the chart's time cap was reached ({what} cap of {cap:g} s for this chart, "
                  "from --budget and its number of checks)")
    else:
        status = Status.ERROR
        detail = f"the chart's process ended without reporting this check (exit code {out.exitcode})"
    return [CheckResult(check=v.name, status=status, method=Method.NONE, detail=detail,
                        verifier=v.name, version=v.version)
            for k, v in enumerate(verifiers) if k not in reported]


def _memory_text() -> str:
    from gravicat.engine.fork import memory_cap_text

    return memory_cap_text()  # the one wording of the cap ("3 GiB", "512 MiB", "no cap")


class BundledDocuments(Mapping[str, MetricDocument]):
    """The documents a ``reduces-to`` target is looked up in, in this order: ``own`` (the subject
    of a check, later ones first), then ``catalogue`` (the user's catalogue: entry id -> latest
    document, may be read on demand), then the bundled reference catalogue.

    This one order is used by ``check`` (a file), ``verify`` (catalogue entries) and the workers,
    so that a limit naming one of the user's entries gets the same verdict from all of them.

    ``docs.get("kerr")`` decodes and validates ``catalog/data/spacetimes/kerr.toml`` only (a
    bundled file is named after its id); iterating, ``len()`` or a lookup of an id that is not
    a file name read every file, in file-name order, as :func:`gravicat.format.bundled.iter_bundled_documents`
    does (a later file with the same id wins, as in a dict built from that iterator).
    The SQL store is never imported, so resolving a ``reduces-to`` target of a file costs one
    small file, not the whole catalogue.
    """

    def __init__(self, own: Iterable[MetricDocument] = (), catalogue: Mapping[str, MetricDocument] | None = None):
        self._own = {d.id: d for d in own}
        self._catalogue = catalogue if catalogue is not None else {}
        self._bundled: dict[str, MetricDocument] = {}
        self._complete = False

    def with_document(self, doc: MetricDocument) -> BundledDocuments:
        """A view with ``doc`` added (it hides an entry of the same id); loaded files are shared."""
        out = BundledDocuments([*self._own.values(), doc], self._catalogue)
        out._bundled, out._complete = self._bundled, self._complete
        return out

    def with_catalogue(self, catalogue: Mapping[str, MetricDocument]) -> BundledDocuments:
        """A view that looks in ``catalogue`` after the own documents and before the bundled files."""
        out = BundledDocuments(self._own.values(), catalogue)
        out._bundled, out._complete = self._bundled, self._complete
        return out

    def _read_all(self) -> None:
        if self._complete:
            return
        from gravicat.format.bundled import bundled_files, read_bundled

        found: dict[str, MetricDocument] = {}
        for path in bundled_files():
            known = self._bundled.get(path.stem)
            doc = known if known is not None and known.source == f"bundled:{path.name}" else read_bundled(path)
            found.pop(doc.id, None)  # a later file with the same id wins and takes the later place
            found[doc.id] = doc
        self._bundled.clear()
        self._bundled.update(found)
        self._complete = True

    def _lookup(self, key: str) -> MetricDocument | None:
        if key in self._own:
            return self._own[key]
        found = self._catalogue.get(key)
        if found is not None:
            return found
        if key in self._bundled or self._complete:
            return self._bundled.get(key)
        from gravicat.format.bundled import bundled_path, read_bundled

        path = bundled_path(key)
        if path is not None:
            doc = read_bundled(path)
            if doc.id == key:
                self._bundled[key] = doc
                return doc
        self._read_all()  # not named after its id (or no such file): read them all, as before
        return self._bundled.get(key)

    def get(self, key, default=None):
        found = self._lookup(key)
        return default if found is None else found

    def __getitem__(self, key: str) -> MetricDocument:
        found = self._lookup(key)
        if found is None:
            raise KeyError(key)
        return found

    def __contains__(self, key) -> bool:
        return self._lookup(key) is not None

    def __iter__(self) -> Iterator[str]:
        self._read_all()
        seen = set(self._bundled)
        yield from self._bundled
        for k in [*self._catalogue, *self._own]:
            if k not in seen:
                seen.add(k)
                yield k

    def __len__(self) -> int:
        self._read_all()
        return len(self._bundled.keys() | set(self._catalogue) | self._own.keys())


def bundled_documents() -> BundledDocuments:
    """The bundled reference catalogue as a lazily read mapping (see :class:`BundledDocuments`)."""
    return BundledDocuments()


# --------------------------------------------------------------------------- process pool units


_UNIT_VERIFIERS: dict[tuple[str, ...], dict[str, Any]] = {}


def run_unit(unit: dict[str, Any]) -> dict[str, Any]:
    """Verify one (document, chart) in a worker process; everything in and out is plain data."""
    import multiprocessing

    from gravicat.registry import make_plugin_manager, verifiers

    key = tuple(unit["blocked"])
    if multiprocessing.parent_process() is None:  # in the command's own process: nothing kept
        loaded = verifiers(make_plugin_manager(blocked=unit["blocked"]))
    else:  # a pool worker: the plugins once per worker, not once per unit
        if key not in _UNIT_VERIFIERS:
            _UNIT_VERIFIERS[key] = verifiers(make_plugin_manager(blocked=unit["blocked"]))
        loaded = _UNIT_VERIFIERS[key]
    chosen = [v for name, v in loaded.items() if name in unit["verifiers"]]
    docs = {k: MetricDocument(v, f"catalogue:{k}") for k, v in unit["docs"].items()}
    doc = MetricDocument(unit["document"], unit["source"])
    # the same order as `check`: the document itself, the user's catalogue, the bundled catalogue
    report = check_chart(doc, unit["chart"], chosen, resolve=make_resolver(BundledDocuments([doc], docs)),
                         budget=unit["budget"])
    return {"key": unit["key"], "chart": unit["chart"], "path": report.path, "seconds": report.seconds,
            "results": [r.to_json() | {"data": r.data} for r in report.results]}


def result_from_json(d: dict[str, Any]) -> CheckResult:
    return CheckResult(check=d["check"], status=Status(d["status"]), method=Method(d["method"]),
                       detail=d["detail"], counterexample=d.get("counterexample"), seconds=d.get("seconds", 0.0),
                       verifier=d.get("verifier", ""), version=d.get("version", ""), data=d.get("data") or {})
