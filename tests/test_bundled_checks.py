"""Every chart of the bundled reference catalogue passes every check of every built-in verifier.

What is checked are the entries' own claims (field equations, limits, flat-when substitutions,
declared invariants, observers, coordinate transforms), each taken from the publications cited in
the entry's file, proved exactly by the engine; signature and structure are checked on sampled
points and symbolically. No check may fail or crash; ``inconclusive`` is accepted only where
:data:`INCONCLUSIVE_ALLOWED` lists it with the reason, and every chart must take the exact fast
path (python-flint) unless :data:`FALLBACK_ALLOWED` says why not.

The charts are verified once, in a process pool of two workers (heaviest charts first), and each
chart is then one test. New files in ``catalog/data/spacetimes`` are picked up automatically.
"""

from __future__ import annotations

import multiprocessing
from concurrent.futures import ProcessPoolExecutor

import pytest

from gravicat.engine.runner import bundled_documents

DOCS = bundled_documents()
CHARTS = [(entry, chart) for entry, doc in sorted(DOCS.items()) for chart in doc.chart_names]

# (entry, chart, check) -> why an inconclusive result is acceptable there. Empty: every check of
# every bundled chart is decided (pass or skipped) within the default budget.
INCONCLUSIVE_ALLOWED: dict[tuple[str, str, str], str] = {}

# (entry, chart) -> why the chart may leave the fast path. Empty: the catalogue's square roots
# (nested ones included), exponentials, hyperbolic functions, LambertW, symbolic powers and
# arbitrary functions all have exact generators.
FALLBACK_ALLOWED: dict[tuple[str, str], str] = {}

# checks that apply to every chart and must pass outright (a skip would hide a missing check)
ALWAYS = ("structure", "signature", "field-equations", "invariants")

# entry -> why none of its 4-dimensional charts declares a Killing vector (issue 15: every other entry does)
KILLING_UNDECLARED: dict[str, str] = {
    "szekeres-quasi-spherical": "a Szekeres space-time with a dipole has no Killing vectors in general "
                                "(Bonnor, Sulaiman & Tomimura 1977; recalled from memory)",
}


def _verify(unit):
    entry, chart = unit
    from gravicat.engine.runner import check_chart, make_resolver
    from gravicat.registry import make_plugin_manager, verifiers

    chosen = list(verifiers(make_plugin_manager()).values())
    report = check_chart(DOCS[entry], chart, chosen, resolve=make_resolver(DOCS))
    results = [(r.check, r.status.value, r.method.value, r.detail) for r in report.results]
    return entry, chart, report.path, [v.name for v in chosen], results


def _weight(unit):
    entry, chart = unit
    return len(repr(DOCS[entry].data["charts"][chart]))


@pytest.fixture(scope="module")
def reports():
    order = sorted(CHARTS, key=_weight, reverse=True)
    with ProcessPoolExecutor(max_workers=2, mp_context=multiprocessing.get_context("fork")) as pool:
        return {(e, c): (path, names, results) for e, c, path, names, results in pool.map(_verify, order)}


def test_the_allow_lists_name_real_charts():
    charts = set(CHARTS)
    assert all((e, c) in charts for e, c, _check in INCONCLUSIVE_ALLOWED), INCONCLUSIVE_ALLOWED
    assert all(key in charts for key in FALLBACK_ALLOWED), FALLBACK_ALLOWED


@pytest.mark.parametrize(("entry", "chart"), CHARTS, ids=[f"{e}:{c}" for e, c in CHARTS])
def test_every_check_passes(reports, entry, chart):
    path, names, results = reports[entry, chart]
    problems = []
    for check, status, _method, detail in results:
        if status in ("fail", "error"):
            problems.append(f"{check}: {status}: {detail}")
        elif status == "inconclusive" and (entry, chart, check) not in INCONCLUSIVE_ALLOWED:
            problems.append(f"{check}: inconclusive (not in INCONCLUSIVE_ALLOWED): {detail}")
    assert not problems, "\n".join(problems)
    # every verifier reported on this chart, and the universal checks passed outright
    reported = {check.split(":", 1)[0] for check, *_ in results}
    assert reported == set(names), sorted(set(names) - reported)
    for name in ALWAYS:
        assert any(check == name and status == "pass" for check, status, *_ in results), (name, results)
    # a pass of the claimed field equations is an exact proof, never a sampled one
    fe = next(r for r in results if r[0] == "field-equations")
    assert fe[2] == "symbolic", fe
    if (entry, chart) not in FALLBACK_ALLOWED:
        assert path == "flint", f"{entry}:{chart} left the fast path"
    # every declaration of the chart (petrov-type, killing, killing-tensors, energy-conditions) passed, none skipped
    c = DOCS[entry].data["charts"][chart]
    declared = (["petrov"] if "petrov-type" in c else []) + [f"killing:{k}" for k in c.get("killing", {})]
    declared += [f"killing:tensor:{k}" for k in c.get("killing-tensors", {})]
    declared += [f"energy-conditions:{k}" for k in c.get("energy-conditions", {})]
    passed = {check for check, status, *_ in results if status == "pass"}
    assert not set(declared) - passed, sorted(set(declared) - passed)


def test_every_four_dimensional_chart_declares_its_petrov_type():
    missing = sorted(f"{e}:{c}" for e, c in CHARTS if len(DOCS[e].data["charts"][c]["coordinates"]) == 4
                     and "petrov-type" not in DOCS[e].data["charts"][c])
    assert not missing, missing


def test_every_four_dimensional_entry_declares_its_killing_vectors():
    missing = sorted(e for e, doc in DOCS.items()
                     if any(len(c["coordinates"]) == 4 for c in doc.data["charts"].values())
                     and not any(c.get("killing") for c in doc.data["charts"].values()) and e not in KILLING_UNDECLARED)
    assert not missing, missing
    assert all(e in DOCS for e in KILLING_UNDECLARED), KILLING_UNDECLARED
