"""Repair benchmark: recovery of injected slips over the bundled catalogue, and the Kerr timing target.

Not collected by the default test run. Run either of:

    python tests/benchmarks/bench_repair.py [--seed 0] [--jobs 1] [--entries kerr,schwarzschild] [--limit N]
    python -m pytest tests/benchmarks/bench_repair.py -s

Part 1, recovery. For every bundled entry and every edit kind (``gravicat.repair.KINDS``) one
random slip is injected (seeded: ``random.Random(f"{seed}:{entry}:{kind}")``) into one
expression of one chart, by ``gravicat.repair.corruptions`` (for ``drop-term``, which repairs a
stray term, the slip inserts a stray term; every other kind is its own inverse). Slips the
metric-file validator refuses are drawn again. Entries/kinds without a possible slip are
skipped, and further seeded slips are drawn until at least 200 corrupted metrics are run.
``find_repairs`` then runs on the corrupted chart. A case counts when the corruption actually
breaks the claim (a field-equation, signature or limit check fails); the original is
*recovered* when one reported repair gives the original chart back. That comparison is
independent of the repair module: sympy builds both charts (``build_chart``) and the
difference of every metric component and matter field is evaluated with sympy/mpmath at 40
digits at three sample points of the original chart (arbitrary functions get random values).
A reported repair that is not the original is a *false suggestion* (it satisfies every check,
so it is a genuine alternative metric, for instance the same metric with the sign of the mass
flipped when no check pins the sign). Targets (the issue): recovery >= 90 %; we print the
recovery rate, the false-suggestion count and the median time, and the median ratio of the
repair time to a plain ``check`` of the same corrupted chart measured in the same run.

Part 3, dropped divisors. Every chart of the bundled catalogue with a cosmological constant, and
every ``/3`` (a divisor of a term naming a parameter or a definition) in the expressions its claim is
built from: the ``/3`` is dropped (``Lambda*a**2*cos(theta)**2/3`` typed as
``Lambda*a**2*cos(theta)**2``, the slip of the issue), and the original must be recovered and ranked
first (target: every case). ``--divisors-only`` runs just this part (a few minutes at most).

Part 2, Kerr. One corrupted term in the Boyer-Lindquist chart (the g_t phi term with its factor
4 typed as 2), the whole file (both charts), ``--jobs 2``: every candidate screened and the
answer found within 10 s of wall time (target from the issue).
"""

from __future__ import annotations

import argparse
import random
import statistics
import sys
import tempfile
import time
from pathlib import Path

TARGET_RECOVERY = 0.90
TARGET_KERR_SECONDS = 10.0
MIN_CASES = 200


def _values(spec, pd, rng):
    import sympy as sp

    subs = {sym: sp.Float(val, 45) for sym, val in pd.sample.numeric.items()}
    return subs


def _function_subs(exprs, rng):
    import sympy as sp

    atoms = set()
    for e in exprs:
        atoms |= e.atoms(sp.Derivative)
    out = []
    for d in sorted(atoms, key=lambda d: -sum(c for _, c in d.variable_count)):
        out.append((d, sp.Rational(rng.randint(-60, 60), rng.choice((4, 7, 9)))))
    funcs = set()
    for e in exprs:
        funcs |= e.atoms(sp.core.function.AppliedUndef)
    for f in sorted(funcs, key=str):
        out.append((f, sp.Rational(rng.randint(5, 60), rng.choice((4, 7, 9)))))
    return out


def same_chart(original, repaired, chart: str, seed: int = 7) -> bool:
    """Both documents give the same metric and matter fields on ``chart`` (sympy, 40 digits, 3 points)."""
    import sympy as sp

    from gravicat.engine.geometry import Geometry
    from gravicat.format.metricfile import build_chart

    a, b = build_chart(original, chart), build_chart(repaired, chart)
    ea, eb = a.claim_expressions(), b.claim_expressions()
    if len(ea) != len(eb):
        return False
    diffs = [sp.sympify(x) - sp.sympify(y) for x, y in zip(ea, eb, strict=True)]
    rng = random.Random(seed)
    fsubs = _function_subs(diffs, rng)
    geo = Geometry(a, seed=seed, samples=3)
    points = geo.sample_points()
    if not points:
        return [sp.simplify(d) for d in diffs] == [0] * len(diffs)
    for pd in points:
        subs = _values(a, pd, rng)
        for d in diffs:
            e = d
            for old, new in fsubs:
                e = e.subs(old, new)
            v = sp.N(e.subs(subs), 40)
            if v.has(sp.zoo, sp.nan) or abs(complex(v)) > 1e-25:
                return False
    return True


def make_cases(seed: int, entries: list[str] | None, minimum: int):
    from gravicat.errors import CatalogError
    from gravicat.repair import KINDS, corruptions, edited_document
    from gravicat.store.revisions import iter_bundled_documents

    docs = {d.id: d for d in iter_bundled_documents()}
    ids = sorted(docs) if not entries else entries
    cases, skipped = [], []
    rounds = 0
    while rounds == 0 or (len(cases) < minimum and rounds < 4):
        for entry in ids:
            doc = docs[entry]
            for kind in KINDS:
                rng = random.Random(f"{seed}:{entry}:{kind}:{rounds}")
                charts = list(doc.chart_names)
                rng.shuffle(charts)
                case = None
                for chart in charts:
                    options = corruptions(doc, chart, kind)
                    rng.shuffle(options)
                    for fld, text in options[:12]:
                        try:
                            bad = edited_document(doc, chart, {fld: text})
                            from gravicat.format.metricfile import build_chart

                            build_chart(bad, chart)
                        except CatalogError:
                            continue
                        case = (entry, kind, chart, fld, text, doc, bad)
                        break
                    if case:
                        break
                if case:
                    cases.append(case)
                elif rounds == 0:
                    skipped.append((entry, kind))
        rounds += 1
        if entries:
            break
    return cases, skipped, docs


def _case(case, vs, docs, jobs, budget, send) -> None:
    """One corrupted metric: plain check (timed), then repair, then the comparison with the original."""
    from gravicat.engine.runner import check_chart, make_resolver
    from gravicat.repair import find_repairs, screens_repairs

    entry, kind, chart, fld, _text, doc, bad = case
    t0 = time.perf_counter()
    rep = check_chart(bad, chart, [v for v in vs.values() if screens_repairs(v)],
                      resolve=make_resolver({**docs, bad.id: bad}), budget=20.0)
    t_check = time.perf_counter() - t0
    broke = any(r.status.value == "fail" and (r.check in ("field-equations", "signature")
                                              or r.check.startswith("limits:")) for r in rep.results)
    send.send({"broke": broke, "check_seconds": t_check})
    t0 = time.perf_counter()
    report = find_repairs(bad, vs, docs=docs, charts=[chart], jobs=jobs, budget=budget)
    t_repair = time.perf_counter() - t0
    cr = report.charts[0]
    found = [same_chart(doc, s.document, chart) for s in cr.suggestions] if cr.failing else []
    send.send({"broke": bool(cr.failing), "recovered": any(found), "false": sum(1 for f in found if not f),
               "rank": found.index(True) + 1 if any(found) else None,
               "seconds": t_repair, "check_seconds": t_check, "candidates": cr.candidates,
               "exhausted": cr.exhausted, "suggestions": len(cr.suggestions), "note": cr.note})


def _run_case(case, vs, docs, jobs, budget, timeout) -> dict:
    """Run a case in a forked child with a time limit (the engine's own check can be slow on a slip),
    through the one child-process runner (:func:`gravicat.engine.fork.run_forked`)."""
    from gravicat.engine.fork import run_forked

    entry, kind, chart, fld = case[:4]
    row = {"entry": entry, "kind": kind, "chart": chart, "field": fld, "broke": False, "recovered": False,
           "false": 0, "seconds": 0.0, "check_seconds": 0.0, "note": ""}

    class _Send:  # what _case sends, emitted to the parent at once
        def __init__(self, emit):
            self.send = emit

    t0 = time.perf_counter()
    out = run_forked(lambda emit: _case(case, vs, docs, jobs, budget, _Send(emit)), cpu_seconds=timeout,
                     wall_seconds=timeout)
    for item in out.items:
        row.update(item)
    if not ("recovered" in row and "candidates" in row):
        row["timeout"] = True
        row["seconds"] = time.perf_counter() - t0
        row["note"] = (f"did not finish within {timeout:g} s" if out.limit else
                       out.error or "the case process ended without a result")
    return row


def run_recovery(seed: int, jobs: int, entries: list[str] | None, limit: int | None, budget: float,
                 timeout: float = 300.0) -> dict:
    from gravicat.registry import make_plugin_manager, verifiers

    pm = make_plugin_manager()
    vs = verifiers(pm)
    cases, skipped, docs = make_cases(seed, entries, MIN_CASES if not entries else 0)
    if limit:
        cases = cases[:limit]
    print(f"{len(cases)} corrupted metrics ({len(skipped)} entry/kind combinations have no possible slip: "
          f"{', '.join(f'{e}/{k}' for e, k in skipped[:12])}{' ...' if len(skipped) > 12 else ''})")
    rows = []
    for n, case in enumerate(cases, 1):
        entry, kind, chart, fld = case[:4]
        row = _run_case(case, vs, docs, jobs, budget, timeout)
        rows.append(row)
        if row.get("timeout"):
            mark = "TIMEOUT" if row["broke"] else "t/o-chk"
        else:
            mark = "-" if not row["broke"] else ("ok" if row["recovered"] else "MISSED")
        print(f"{n:4d} {entry:30s} {kind:16s} {chart:28s} {mark:7s} cand={row.get('candidates', 0):4d} "
              f"sugg={row.get('suggestions', 0)} false={row.get('false', 0)} {row.get('seconds', 0):6.2f}s "
              f"(check {row.get('check_seconds', 0):5.2f}s) {fld.split('.', 2)[-1][:30]}", flush=True)
    unknown = [r for r in rows if r.get("timeout") and not r["broke"]]
    counted = [r for r in rows if r["broke"]]  # a repair that timed out after the check failed counts as missed
    recovered = sum(1 for r in counted if r["recovered"])
    rate = recovered / len(counted) if counted else 0.0
    times = [r["seconds"] for r in counted if not r.get("timeout")]
    ratios = [r["seconds"] / r["check_seconds"] for r in counted if r["check_seconds"] > 0 and not r.get("timeout")]
    print()
    print(f"corrupted metrics run:            {len(rows)}")
    print(f"corruption broke the claim:       {len(counted)}")
    print(f"plain check did not finish in {timeout:g} s (not counted): {len(unknown)}"
          + "".join(f"\n  {r['entry']} {r['chart']} {r['kind']} {r['field']}" for r in unknown))
    print(f"original among the repairs:       {recovered} ({100 * rate:.1f} %; target {100 * TARGET_RECOVERY:.0f} %)")
    print(f"false suggestions (other metrics passing every check): {sum(r['false'] for r in counted)}")
    print(f"original ranked first:            {sum(1 for r in counted if r.get('rank') == 1)} of {recovered}")
    if times:
        print(f"median repair time:               {statistics.median(times):.2f} s "
              f"(max {max(times):.2f} s; {jobs} job(s))")
        print(f"median repair / check time ratio: {statistics.median(ratios):.1f}")
    by_kind = {}
    for r in counted:
        k = by_kind.setdefault(r["kind"], [0, 0])
        k[0] += 1
        k[1] += r["recovered"]
    for kind, (total, ok) in sorted(by_kind.items()):
        print(f"  {kind:16s} {ok}/{total}")
    missed = [r for r in counted if not r["recovered"]]
    for r in missed:
        print(f"  missed: {r['entry']} {r['chart']} {r['kind']} {r['field']} ({r['note'] or 'no note'})")
    return {"rate": rate, "cases": len(rows), "counted": len(counted), "rows": rows}


def run_kerr(jobs: int = 2) -> dict:
    from gravicat.engine.runner import bundled_documents, check_document, make_resolver
    from gravicat.format.metricfile import load_file
    from gravicat.registry import make_plugin_manager, verifiers
    from gravicat.repair import find_repairs
    from gravicat.store.revisions import bundled_files

    src = next(p for p in bundled_files() if p.name == "kerr.toml")
    text = src.read_text()
    old = "- 4*M*a*r*sin(theta)**2/Sigma*dt*dphi"
    assert old in text
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "kerr-typo.toml"
        path.write_text(text.replace(old, "- 2*M*a*r*sin(theta)**2/Sigma*dt*dphi"))
        pm = make_plugin_manager()
        vs = verifiers(pm)
        docs = bundled_documents()
        bad = load_file(path)
        t0 = time.perf_counter()
        check_document(bad, list(vs.values()), resolve=make_resolver({**docs, bad.id: bad}), budget=20.0)
        t_check = time.perf_counter() - t0
        t0 = time.perf_counter()
        report = find_repairs(bad, vs, docs=docs, jobs=jobs)
        wall = time.perf_counter() - t0
    cr = next(c for c in report.charts if c.chart == "boyer-lindquist")
    found = any("4 * M * a * r" in e.suggested for s in cr.suggestions for e in s.edits)
    print(f"Kerr, g_t phi factor 4 typed as 2, whole file, --jobs {jobs}: {wall:.2f} s wall "
          f"(target {TARGET_KERR_SECONDS:.0f} s); plain 'check' of all charts in the same run: {t_check:.2f} s "
          f"(ratio {wall / t_check:.2f})")
    print(f"  candidates {cr.candidates}, screened {cr.screened}, all screened: {not cr.exhausted}, "
          f"found: {found}, suggestions: {len(cr.suggestions)}")
    return {"seconds": wall, "found": found, "all_screened": not cr.exhausted and cr.screened == cr.candidates}


def divisor_cases():
    """(entry, chart, field, corrupted text, doc, bad): one /3 dropped in a chart with a cosmological constant."""
    from gravicat.errors import CatalogError
    from gravicat.format.metricfile import build_chart
    from gravicat.repair import _Model, corruptions, edited_document
    from gravicat.store.revisions import iter_bundled_documents

    cases = []
    for doc in sorted(iter_bundled_documents(), key=lambda d: d.id):
        for chart in doc.chart_names:
            if "cosmological-constant" not in doc.data["charts"][chart]:
                continue
            texts = {t.field: t.text for t in _Model(doc, chart).editable}
            for fld, text in corruptions(doc, chart, "small-factor"):
                old = texts[fld]
                # the corruption is "multiply a term by 3" that removed exactly one '/ 3'
                if old.count(" / 3") != text.count(" / 3") + 1 or old.replace(" / 3", "", 1) != text:
                    continue
                try:
                    bad = edited_document(doc, chart, {fld: text})
                    build_chart(bad, chart)
                except CatalogError:
                    continue
                cases.append((doc.id, chart, fld, text, doc, bad))
    return cases


def run_divisors(jobs: int, budget: float) -> dict:
    from gravicat.engine.runner import bundled_documents
    from gravicat.registry import make_plugin_manager, verifiers
    from gravicat.repair import find_repairs

    vs = verifiers(make_plugin_manager())
    docs = bundled_documents()
    cases = divisor_cases()
    print(f"dropped /3 in charts with a cosmological constant: {len(cases)} cases")
    first, broke, times = 0, 0, []
    for entry, chart, fld, text, doc, bad in cases:
        t0 = time.perf_counter()
        report = find_repairs(bad, vs, docs=docs, charts=[chart], jobs=jobs, budget=budget)
        seconds = time.perf_counter() - t0
        cr = report.charts[0]
        found = [same_chart(doc, s.document, chart) for s in cr.suggestions] if cr.failing else []
        broke += bool(cr.failing)
        ok = bool(found) and found[0]
        first += ok
        times.append(seconds)
        mark = "-" if not cr.failing else ("ok" if ok else ("ranked" if any(found) else "MISSED"))
        print(f"  {entry:30s} {chart:18s} {mark:7s} cand={cr.candidates:4d} sugg={len(cr.suggestions)} "
              f"{seconds:6.2f}s {fld.split('.', 2)[-1]}: {text[:50]}", flush=True)
    print(f"the slip broke the claim: {broke}; original recovered and ranked first: {first}"
          + (f"; median time {statistics.median(times):.2f} s" if times else ""))
    return {"cases": len(cases), "broke": broke, "first": first}


def test_dropped_divisor_target():
    out = run_divisors(1, 60.0)
    assert out["cases"] >= 5 and out["first"] == out["broke"]


def test_kerr_target():
    out = run_kerr(2)
    assert out["found"] and out["all_screened"]
    assert out["seconds"] <= TARGET_KERR_SECONDS


def test_recovery_target():
    out = run_recovery(0, 1, None, None, 60.0)
    assert out["cases"] >= MIN_CASES
    assert out["rate"] >= TARGET_RECOVERY


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--entries", default="", help="comma-separated entry ids (default: all bundled)")
    ap.add_argument("--limit", type=int, default=0)
    ap.add_argument("--budget", type=float, default=60.0)
    ap.add_argument("--timeout", type=float, default=300.0, help="seconds per corrupted metric (check + repair)")
    ap.add_argument("--skip-kerr", action="store_true")
    ap.add_argument("--skip-recovery", action="store_true")
    ap.add_argument("--divisors-only", action="store_true", help="only part 3 (dropped /3 of a cosmological "
                                                                  "constant)")
    args = ap.parse_args(argv)
    if args.divisors_only:
        d = run_divisors(args.jobs, args.budget)
        return 0 if d["first"] == d["broke"] else 1
    ok = True
    if not args.skip_kerr:
        k = run_kerr(2)
        ok = ok and k["found"] and k["all_screened"] and k["seconds"] <= TARGET_KERR_SECONDS
    if not args.skip_recovery:
        d = run_divisors(args.jobs, args.budget)
        ok = ok and d["first"] == d["broke"]
        r = run_recovery(args.seed, args.jobs, [e for e in args.entries.split(",") if e] or None,
                         args.limit or None, args.budget, args.timeout)
        ok = ok and r["rate"] >= TARGET_RECOVERY and bool(args.entries or args.limit or r["cases"] >= MIN_CASES)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
