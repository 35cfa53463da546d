"""The search: baseline checks, screening in forked workers, proofs of the survivors, ranking."""

from __future__ import annotations

import math
import time
from collections.abc import Iterable, Mapping
from typing import Any

from gravicat.checks import CheckResult, Method, Status
from gravicat.errors import CatalogError, InputError
from gravicat.format.expr import (
    Names,
    check_expression,
)
from gravicat.format.metricfile import MetricDocument
from gravicat.physics.claims import mass_parameter, radial_coordinate
from gravicat.repair.edits import _check_candidate, _make_candidate, edited_document, enumerate_edits
from gravicat.repair.jets import _Evaluator, _NotQuadratic, _Prec, _Undefined
from gravicat.repair.model import _Model, _PointEnv, point_from_sample
from gravicat.repair.reports import (
    _PREC,
    DEFAULT_BUDGET,
    DEFAULT_POINTS,
    KINDS,
    MAX_PROOFS,
    OTHERS_LIMIT,
    PAIR_POOL,
    PROOF_BUDGET,
    ChartRepair,
    EditInfo,
    RepairReport,
    Suggestion,
    screens_repairs,
)
from gravicat.repair.screening import (
    _Asymptotic,
    _Cand,
    _FieldEquations,
    _Flat,
    _Limit,
    _Screen,
    _Signature,
    riemann_values,
)

# =========================================================================== parallel map over forked workers

_STATE: dict[str, Any] = {}


def _pool_map(fn, items: list, jobs: int, *, cpu_seconds=None, wall_seconds=None, failed=None,
              forked: bool = False) -> list:
    """``[fn(x) for x in items]`` in forked children (at most ``jobs`` at a time) through
    :func:`gravicat.engine.fork.run_many`, with CPU-second (and wall) limits per item; in this process
    when ``jobs <= 1`` or there is one item, unless ``forked``. ``failed(x, outcome)`` gives the value of
    an item whose child hit a limit or died (default: the child's exception is raised again here)."""
    if not forked and (jobs <= 1 or len(items) <= 1):
        return [fn(x) for x in items]
    from gravicat.engine.fork import run_many

    outs = run_many([lambda emit, x=x: fn(x) for x in items], jobs=max(1, jobs), cpu_seconds=cpu_seconds,
                    wall_seconds=wall_seconds)
    values = []
    for x, out in zip(items, outs, strict=True):
        if out.finished:
            values.append(out.value)
        elif failed is not None:
            values.append(failed(x, out))
        elif out.exception is not None:
            raise out.exception
        else:
            raise RuntimeError(f"a repair worker ended without a result ({_why(out)})")
    return values


def _why(out, cpu_seconds: float | None = None, wall_seconds: float | None = None) -> str:
    """Why a forked item gave no result (a limit, in the runner's one wording, an error, or how the
    child ended)."""
    from gravicat.engine.fork import describe_limit

    if out.limit is None and out.error is None:
        return "the worker process ended without a result"
    return describe_limit(out, cpu_seconds, wall_seconds)


def _screen_chunk(indices: list[int]) -> list[tuple[int, bool, float, tuple | None] | None]:
    screen: _Screen = _STATE["screen"]
    cands: list[_Cand] = _STATE["cands"]
    deadline: float = _STATE["deadline"]
    out = []
    for i in indices:
        if time.monotonic() > deadline:
            out.append(None)
            continue
        v = screen.judge(cands[i])
        out.append((i, v.ok, v.score, v.fingerprint))
    return out


def _screen_all(screen: _Screen, cands: list[_Cand], jobs: int, deadline: float):
    _STATE.update(screen=screen, cands=cands, deadline=deadline)
    if not cands:
        return []
    if jobs <= 1:
        return _screen_chunk(list(range(len(cands))))
    size = max(4, len(cands) // (jobs * 6) + 1)
    # interleave so that every chunk gets a mix of cheap and expensive candidates
    chunks = [list(range(k, len(cands), (len(cands) + size - 1) // size)) for k in
              range((len(cands) + size - 1) // size)]
    left = max(1.0, deadline - time.monotonic())
    results = _pool_map(_screen_chunk, chunks, jobs, cpu_seconds=left + 30, wall_seconds=left + 60,
                        failed=lambda chunk, out: [None] * len(chunk))
    flat: list = [None] * len(cands)
    for chunk, res in zip(chunks, results, strict=True):
        for i, r in zip(chunk, res, strict=True):
            flat[i] = r
    return flat


# =========================================================================== verification (baseline and proof)


def _check_chart(doc: MetricDocument, chart: str, verifiers: list, docs: Mapping[str, MetricDocument],
                 budget: float, seed: int, want_geometry: bool, limited: Iterable = ()):
    """Run ``verifiers`` on the chart, then ``limited`` ones under a hard time limit of ``budget`` seconds."""
    from gravicat.engine.geometry import Geometry
    from gravicat.engine.runner import make_resolver, run_verifier
    from gravicat.format.metricfile import build_chart

    spec = build_chart(doc, chart, make_resolver({**docs, doc.id: doc}))
    geometry = Geometry(spec, budget=budget, seed=seed)
    results = []
    for v in verifiers:
        results.extend(run_verifier(v, geometry))
    results.extend(_run_limited(list(limited), geometry, budget))
    return results, (geometry if want_geometry else None)


def _run_limited(verifiers: list, geometry, seconds: float) -> list[CheckResult]:
    """Run verifiers in a forked child with a hard time limit for all of them together.

    The repair's own checks (verifiers with ``screens_repairs = True``) honour the proof budget; the others
    (observers, invariants, transforms, third-party verifiers) may compute closed forms of a
    mistyped metric for minutes, so a verifier not finished in time is reported ``inconclusive``
    (it did not pass, and a repair is judged as if it had not run before).
    """
    if not verifiers:
        return []
    from gravicat.engine.fork import run_forked
    from gravicat.engine.runner import result_from_json, run_verifier

    def task(emit):
        for v in verifiers:
            emit([r.to_json() | {"data": r.data} for r in run_verifier(v, geometry)])

    outcome = run_forked(task, cpu_seconds=seconds, wall_seconds=seconds)
    out: list[CheckResult] = [result_from_json(d) for batch in outcome.items for d in batch]
    done = len(outcome.items)
    for v in verifiers[done:]:
        out.append(CheckResult(check=v.name, status=Status.INCONCLUSIVE, method=Method.NONE,
                               detail=f"not finished within {seconds:g} s (the time limit repair gives each "
                                      "verifier that does not set screens_repairs)",
                               verifier=v.name, version=v.version))
    return out


def _proof_limit() -> float:
    """Seconds (CPU and wall) for checking one survivor: a wrong metric can be slow."""
    return _STATE["proof_budget"] * (len(_STATE["verifiers"]) + 2) + 10


def _proof_body(i: int) -> dict:
    job = _STATE["proofs"][i]
    try:
        doc = edited_document(job["doc"], job["chart"], job["texts"])
        others = [v for v in _STATE["others"] if v.name in job["others"]]
        results, _ = _check_chart(doc, job["chart"], _STATE["verifiers"], _STATE["docs"],
                                  _STATE["proof_budget"], _STATE["seed"], False, others)
    except CatalogError as exc:
        return {"i": i, "error": str(exc)}
    return {"i": i, "data": doc.data, "results": [r.to_json() | {"data": r.data} for r in results]}


def _unfinished_baseline(chart: str, verifiers: list, why: str) -> dict:
    """The baseline of a chart whose worker gave no result: every verifier inconclusive, saying why."""
    return {"chart": chart, "results": [
        CheckResult(check=v.name, status=Status.INCONCLUSIVE, method=Method.NONE,
                    detail=f"the baseline check did not finish ({why})", verifier=v.name,
                    version=v.version).to_json() | {"data": {}} for v in verifiers]}


def _baseline_task(chart: str) -> dict:
    keep = _STATE.get("in_process", False)
    results, geometry = _check_chart(_STATE["doc"], chart, _STATE["verifiers"], _STATE["docs"],
                                     _STATE["proof_budget"], _STATE["seed"], keep)
    if keep:
        _STATE.setdefault("geometries", {})[chart] = geometry
    return {"chart": chart, "results": [r.to_json() | {"data": r.data} for r in results]}


def _result_from_json(d: dict) -> CheckResult:
    from gravicat.engine.runner import result_from_json

    return result_from_json(d)


# =========================================================================== the search


def _repairable(check: str) -> bool:
    return check in ("field-equations", "signature") or check.startswith("limits:")


def _sample_points(model: _Model, geometry, k: int, seed: int) -> list[_PointEnv]:
    """The first ``k`` sample points of the failing chart's Geometry (those ``check`` evaluates)."""
    pts = list(geometry.sample_points()[:k]) if geometry is not None else []
    tries = 0
    while geometry is not None and len(pts) < k and tries < 3 * k:
        tries += 1
        pd = geometry.draw_point(need_inverse=False)
        if pd is None:
            break
        pts.append(pd)
    out = []
    for i, pd in enumerate(pts):
        point = point_from_sample(model, pd.sample, i, seed)
        if point is not None:
            out.append(point)
    return out


def _counterexample_points(model: _Model, failed: list[CheckResult], start: int, seed: int) -> list[_PointEnv]:
    """The points where the failing checks found their counterexamples, as extra screening points.

    They are the most telling points (a signature that degenerates at theta = pi/2 is only seen
    there). A point is used when it gives every coordinate and parameter a constant value.
    """
    out: list[_PointEnv] = []
    seen: set = set()
    constants = Names()
    for r in failed:
        point = (r.counterexample or {}).get("point") or {}
        if not all(x in point for x in (*model.coords, *model.params)):
            continue
        key = tuple(sorted((k, str(point[k])) for k in (*model.coords, *model.params)))
        if key in seen:
            continue
        seen.add(key)
        try:
            with _Prec(_PREC):
                ev = _Evaluator({}, {}, lambda *_: None, 0)
                values = {k: ev.ev(check_expression(str(point[k]), constants, source="counterexample", field=k)).v
                          for k in (*model.coords, *model.params)}
        except (CatalogError, _Undefined, ZeroDivisionError, ValueError):
            continue
        out.append(_PointEnv(model, values, start + len(out), seed))
    return out


def _claims(model: _Model, baseline: list[CheckResult], docs: Mapping[str, MetricDocument]) -> tuple[list, list]:
    """(claims to screen, names of the baseline checks that could not be screened)."""
    status = {r.check: r.status.value for r in baseline}
    failing, passing = [], []
    unscreened = []

    def put(claim, st):
        (failing if st == "fail" else passing).append(claim)

    st = status.get("field-equations")
    if st in ("pass", "fail") and model.claim != "none":
        put(_FieldEquations(model), st)
    st = status.get("signature")
    if st in ("pass", "fail"):
        put(_Signature(), st)
    data = model.doc.data
    for lname, lim in data["limits"].items():
        if lim["chart"] != model.chart:
            continue
        st = status.get(f"limits:{lname}")
        if st not in ("pass", "fail"):
            continue
        entry, _, tchart = lim["reduces-to"].partition(":")
        tdoc = model.doc if entry == model.doc.id else docs.get(entry)
        claim = None
        if tdoc is not None and tchart in tdoc.data["charts"]:
            target = _Model(tdoc, tchart)
            pnames = Names(symbols=frozenset(model.params))
            cnames = Names(symbols=frozenset(model.params) | frozenset(model.coords))
            if target.n == model.n and set(target.params) <= set(model.params) and not target.functions:
                claim = _Limit(lname, model,
                               {p: check_expression(t, pnames, source="", field="") for p, t in lim["set"].items()},
                               {x: check_expression(t, cnames, source="", field="")
                                for x, t in lim["coordinates"].items()}, target)
        if claim is None:
            unscreened.append(f"limits:{lname}")
            if st == "fail":
                continue
        else:
            put(claim, st)
    flat_checks = [r.check for r in baseline if r.check.startswith("limits:flat-when[")]
    pnames = Names(symbols=frozenset(model.params))
    for i, (name, subs) in enumerate(zip(flat_checks, data["flat-when"], strict=False)):
        st = status.get(name)
        if st in ("pass", "fail"):
            put(_Flat(name, i, {p: check_expression(t, pnames, source="", field="") for p, t in subs.items()}), st)
    st = status.get("limits:asymptotically-flat")
    if st in ("pass", "fail"):
        radial = radial_coordinate(model.coords)
        mass = mass_parameter(model.params)
        if radial is not None:
            put(_Asymptotic(radial, mass), st)
    order = {"_FieldEquations": 0, "_Signature": 1, "_Limit": 2, "_Flat": 3, "_Asymptotic": 4}
    passing.sort(key=lambda c: (c.__class__ is not _Signature, order[type(c).__name__]))
    return failing + passing, unscreened


def _edit_rank(cand: _Cand) -> tuple:
    return (len(cand.edits), sum(KINDS.index(e.kind) for e in cand.edits))


def find_repairs(
    doc: MetricDocument,
    verifiers: Mapping[str, Any] | Iterable[Any],
    *,
    docs: Mapping[str, MetricDocument] | None = None,
    charts: Iterable[str] | None = None,
    max_edits: int = 1,
    budget: float = DEFAULT_BUDGET,
    proof_budget: float = PROOF_BUDGET,
    jobs: int = 1,
    seed: int = 0,
    points: int = DEFAULT_POINTS,
    kinds: Iterable[str] = KINDS,
) -> RepairReport:
    """Look for single (or, with ``max_edits=2``, pairs of) edits that repair the failing checks of ``doc``.

    ``verifiers``: the registered verifiers (name -> verifier). Those that set
    ``screens_repairs = True`` (:func:`screens_repairs`) decide which checks fail and prove the survivors; the others
    (observers, invariants, transforms...) run on a failing chart and on each survivor under a
    hard time limit of ``proof_budget`` seconds, so that a repair never breaks a check that passed.
    ``docs``: other documents by id, for limits that name another entry (the bundled catalogue).
    ``budget``: seconds of wall time for screening the candidates of each chart;
    ``proof_budget``: seconds per symbolic proof (as ``check --budget``). ``jobs``: forked worker
    processes for the baseline, the screening and the proofs. Not thread-safe (module state is
    shared with the forked workers).
    """
    start = time.monotonic()
    if max_edits not in (1, 2):
        raise InputError("--max-edits", None, f"{max_edits} is not 1 or 2")
    kinds = tuple(kinds)
    for k in kinds:
        if k not in KINDS:
            raise InputError("kinds", None, f"unknown edit kind '{k}' (kinds: {', '.join(KINDS)})")
    pool = list(verifiers.values() if isinstance(verifiers, Mapping) else verifiers)
    chosen = [v for v in pool if screens_repairs(v)]
    others = [v for v in pool if not screens_repairs(v)]
    if not chosen:
        raise InputError("plugins", None, "none of the verifiers repair needs is loaded "
                         "(verifiers that set screens_repairs = True, such as field-equations): "
                         "is gravicat installed (pip install -e .)?")
    docs = dict(docs or {})
    names = list(charts) if charts else doc.chart_names
    for c in names:
        if c not in doc.chart_names:
            raise InputError(doc.source, f"charts.{c}", f"no such chart (charts: {', '.join(doc.chart_names)})")
    from gravicat.engine.runner import make_resolver
    from gravicat.format.metricfile import build_chart

    in_process = jobs <= 1 or len(names) <= 1
    if not in_process:
        resolve = make_resolver({**docs, doc.id: doc})
        for c in names:
            build_chart(doc, c, resolve)  # bad input (a line element that is not a quadratic form...) stops here
    _STATE.clear()
    _STATE.update(doc=doc, verifiers=chosen, all_verifiers=pool, others=others, docs=docs, proof_budget=proof_budget,
                  seed=seed, in_process=in_process)
    # 1. baseline
    limit = proof_budget * (4 * len(chosen) + 4) + 60  # a CPU cap only as a backstop: each proof has its budget
    outs = _pool_map(_baseline_task, names, 1 if in_process else jobs, cpu_seconds=limit,
                     failed=lambda chart, out: _unfinished_baseline(chart, chosen, _why(out, limit)))
    report = RepairReport(metric=doc.id, charts=[])
    for out in outs:
        report.charts.append(ChartRepair(chart=out["chart"],
                                         baseline=[_result_from_json(r) for r in out["results"]]))
    for cr in report.charts:
        cr.failing = [r.check for r in cr.baseline if r.status == Status.FAIL and _repairable(r.check)]
        if cr.failing:
            t0 = time.monotonic()
            _repair_chart(doc, cr, chosen, docs, max_edits, budget, proof_budget, jobs, seed, points, kinds)
            cr.seconds = time.monotonic() - t0
    report.seconds = time.monotonic() - start
    return report


def _repair_chart(doc, cr: ChartRepair, verifiers, docs, max_edits, budget, proof_budget, jobs, seed, points,
                  kinds) -> None:
    # a claim without its matter table ("electrovacuum needs a potential") is not a slip in an expression
    structural = [r for r in cr.baseline if r.check == "field-equations" and r.check in cr.failing
                  and r.method == Method.NONE]
    if structural:
        cr.note = (f"{structural[0].check} fails for a structural reason ({structural[0].detail}); "
                   "that is not a copying slip an edit of one expression can repair")
        return
    model = _Model(doc, cr.chart)
    claims, unscreened = _claims(model, cr.baseline, docs)
    if not any(c.name in cr.failing for c in claims):
        cr.note = f"the failing check(s) {', '.join(cr.failing)} cannot be screened by evaluation at points"
        return
    geometry = _STATE.get("geometries", {}).get(cr.chart)
    if geometry is None:
        _, geometry = _check_chart(doc, cr.chart, [], docs, proof_budget, seed, True)
    # the other verifiers (observers, invariants, transforms, third-party ones) complete the picture of
    # what passed before: a repair may not break any of them
    cr.baseline.extend(_run_limited(list(_STATE.get("others", ())), geometry, min(proof_budget, OTHERS_LIMIT)))
    pts = _sample_points(model, geometry, points, seed)
    pts += _counterexample_points(model, [r for r in cr.baseline if r.check in cr.failing], len(pts), seed)
    cr.points = len(pts)
    if not pts:
        cr.note = "no valid sample point could be drawn from the chart's domain"
        return
    screen = _Screen(model, pts, claims, set(cr.failing))
    screen.prepare()
    original_fp = None
    try:
        with _Prec(_PREC):
            original_fp = screen.fingerprint(None)
    except (_Undefined, _NotQuadratic, ZeroDivisionError):
        pass
    # 2. single edits
    deadline = time.monotonic() + budget  # the screening budget of this chart
    singles: list[_Cand] = []
    seen: set = set()
    for target in model.editable:
        for e in enumerate_edits(target, kinds):
            cand = _make_candidate(model, (e,))
            if cand is None:
                continue
            key = (target.key, cand.texts[target.key])
            if key in seen:
                continue
            seen.add(key)
            singles.append(cand)
    singles.sort(key=_edit_rank)
    cr.candidates = len(singles)
    results = _screen_all(screen, singles, jobs, deadline)
    cr.screened = sum(1 for r in results if r is not None)
    cr.exhausted = cr.screened < len(singles)
    survivors: list[_Cand] = []
    prints: dict = {}
    if original_fp is not None:
        prints[original_fp] = None
    for cand, r in zip(singles, results, strict=True):
        if r is not None and r[1] and r[3] not in prints:
            prints[r[3]] = cand
            survivors.append(cand)
    # 3. pairs, from the single edits that reduce the residual most
    if max_edits == 2 and not cr.exhausted and time.monotonic() < deadline:
        scored = sorted((r[2], i) for i, r in enumerate(results) if r is not None and not r[1] and math.isfinite(r[2]))
        top = [singles[i] for _, i in scored[:PAIR_POOL]]
        pairs: list[_Cand] = []
        pair_seen: set = set()
        for m in range(1, len(top)):
            for i in range(m):
                a, b = top[i].edits[0], top[m].edits[0]
                if a.key == b.key and a.path == b.path:
                    continue
                cand = _make_candidate(model, (a, b))
                if cand is None:
                    continue
                key = tuple(sorted(cand.texts.items()))
                if key in pair_seen or len(cand.trees) == 1 and (next(iter(cand.trees)), next(iter(
                        cand.texts.values()))) in seen:
                    continue
                pair_seen.add(key)
                pairs.append(cand)
        presults = _screen_all(screen, pairs, jobs, deadline)
        cr.pairs = sum(1 for r in presults if r is not None)
        cr.screened += cr.pairs
        cr.exhausted = cr.pairs < len(pairs)
        for cand, r in zip(pairs, presults, strict=True):
            if r is not None and r[1] and r[3] not in prints:
                prints[r[3]] = cand
                survivors.append(cand)
    cr.passed_screen = len(survivors)
    if unscreened:
        cr.note = f"not screened (checked in the proof only): {', '.join(unscreened)}"
    # 4. proof of the survivors, best ranked first (each re-parsed by the whitelist parser first)
    survivors = [c for c in (_check_candidate(model, s) for s in sorted(survivors, key=_edit_rank)) if c is not None]
    todo = survivors[:MAX_PROOFS]
    if len(survivors) > MAX_PROOFS:
        cr.note = (cr.note + "; " if cr.note else "") + (f"{len(survivors) - MAX_PROOFS} further screened "
                                                         f"candidates were not proved (limit {MAX_PROOFS})")
    # the other verifiers run again only where they decided something before (pass or fail)
    decided = {r.verifier for r in cr.baseline if r.status in (Status.PASS, Status.FAIL)}
    rerun = [v.name for v in _STATE.get("others", ()) if v.name in decided]
    skipped = [v.name for v in _STATE.get("others", ()) if v.name not in decided and any(
        r.verifier == v.name and r.status == Status.INCONCLUSIVE for r in cr.baseline)]
    if skipped and todo:
        cr.note = (cr.note + "; " if cr.note else "") + (f"not run again on the repaired chart "
                                                         f"(inconclusive before): {', '.join(skipped)}")
    jobs_data = []
    for cand in todo:
        jobs_data.append({"doc": doc, "chart": cr.chart, "others": rerun,
                          "texts": {model.targets[k].field: t for k, t in cand.texts.items()}})
    _STATE.update(proofs=jobs_data)
    limit = _proof_limit()
    outs = _pool_map(_proof_body, list(range(len(todo))), jobs, cpu_seconds=limit, wall_seconds=limit, forked=True,
                     failed=lambda i, out: {"i": i, "error": _why(out, limit, limit)})
    cr.proved = len(outs)
    failed_before = {r.check for r in cr.baseline if r.status in (Status.FAIL, Status.ERROR)}
    for cand, out in zip(todo, outs, strict=True):
        if "error" in out:
            continue
        results = [_result_from_json(r) for r in out["results"]]
        after = {r.check: r.status for r in results}
        if any(c not in after for c in cr.failing):
            continue  # a failing check must have run again (and, below, no longer fail)
        bad = {c for c, s in after.items() if s in (Status.FAIL, Status.ERROR)}
        if bad & set(cr.failing) or bad - failed_before:
            continue  # still failing, or breaks a check that did not fail before
        # the proof status: of the checks that failed (and are repaired) or passed before
        before = {r.check: r.status for r in cr.baseline}
        judged = [s for c, s in after.items() if c in cr.failing or before.get(c) == Status.PASS]
        worst = "inconclusive" if Status.INCONCLUSIVE in judged else "pass"
        repaired = MetricDocument(out["data"], doc.source)
        edits = []
        for e in cand.edits:
            t = model.targets[e.key]
            edits.append(EditInfo(field=t.field, kind=e.kind, detail=e.detail, original=t.text,
                                  suggested=cand.texts[e.key]))
        doubt = ""
        invariants = sorted(c for c in bad if c.startswith("invariants:"))
        if invariants and _flat_at_points(screen, cand):
            doubt = (f"the repaired chart is flat (Riemann = 0 at every sample point) while the declared "
                     f"{', '.join(invariants)} still fails: probably not the slip")
        cr.suggestions.append(Suggestion(chart=cr.chart, edits=edits, status=worst, checks=results,
                                         document=repaired, still_failing=sorted(bad), doubt=doubt))
    cr.suggestions.sort(key=suggestion_rank)
    doubtful = sum(1 for s in cr.suggestions if s.doubt)
    if doubtful:
        cr.note = (cr.note + "; " if cr.note else "") + (
            f"{doubtful} doubtful suggestion(s) make the chart flat while a declared invariant still fails")


def suggestion_rank(s: Suggestion) -> tuple:
    """Sort key of the suggestions of a chart: doubtful ones last; fewer edits; then the repairs that also
    mend other checks that failed (a transform, an observer, a published invariant); then proved before
    sampled; then how common the slip is (the order of :data:`KINDS`)."""
    return (bool(s.doubt), s.size, len(s.still_failing), s.status != "pass", sum(KINDS.index(e.kind) for e in s.edits))


def _flat_at_points(screen: _Screen, cand: _Cand) -> bool:
    """Is the candidate's Riemann tensor zero (every ball contains 0) at every screening point it is defined at?"""
    seen = 0
    with _Prec(_PREC):
        for p in screen.points:
            try:
                vals = screen.model.evaluate(p, cand.trees, screen.base("base", p, 2), 2)
                riemann = riemann_values(vals["g"])
            except (_Undefined, _NotQuadratic, ZeroDivisionError, ValueError):
                continue
            if not all(x.contains(0) for x in riemann):
                return False
            seen += 1
    return seen > 0
