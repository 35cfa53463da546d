"""Verification of stored entries: the work units and running them under CPU-time caps.

A unit is one (revision, chart) with the verifiers that still need results for its content
(plain data, see :func:`gravicat.engine.runner.run_unit`). :func:`run_units` runs each unit in
its own forked child through :mod:`gravicat.engine.fork` under the runner's cap
(:func:`gravicat.engine.runner.chart_cap`); a unit that reaches its cap, or whose child dies,
reports every verifier ``inconclusive`` / ``error`` with the reason, never a silent gap.
"""

from __future__ import annotations

from typing import Any


def units_for(session, revisions, chosen, *, force: bool, budget: float,
              blocked: tuple[str, ...] | list[str]) -> tuple[list[dict[str, Any]], dict[int, tuple[str, str]]]:
    """The units of work for ``revisions`` (skipping stored (chart, verifier, version) unless
    ``force``), and revision id -> (entry id, content hash) for the summary."""
    from gravicat.store import revisions as store

    docs = {r.entry.slug: r.document for r in store.list_entries(session)}
    units, keys = [], {}
    for rev in revisions:
        done = set() if force else store.stored_versions(session, rev)
        keys[rev.id] = (rev.entry.slug, rev.hash)
        for chart in rev.document["charts"]:
            todo = [v.name for v in chosen if (chart, v.name, v.version) not in done]
            if todo:
                units.append({"key": rev.id, "chart": chart, "document": rev.document,
                              "source": f"catalogue:{rev.entry.slug}@{rev.hash[:12]}", "verifiers": todo,
                              "docs": docs, "blocked": list(blocked), "budget": budget})
    return units, keys


def run_units(units: list[dict[str, Any]], jobs: int, chosen) -> list[dict[str, Any]]:
    """Run every unit in a forked child (at most ``jobs`` at a time) under its CPU-time cap; one output
    per unit, as :func:`gravicat.engine.runner.run_unit` returns it, in the units' order."""
    from gravicat.engine import fork
    from gravicat.engine.runner import _unreported, chart_cap, run_unit
    from gravicat.format.metricfile import MetricDocument

    if not units:
        return []
    import gravicat.engine.geometry  # noqa: F401 - sympy and flint once, inherited by every child

    caps = [chart_cap(MetricDocument(u["document"], u["source"]), u["chart"], len(u["verifiers"]), u["budget"])
            for u in units]
    # the largest charts start first, so that a long one does not end up last on a core
    order = sorted(range(len(units)), key=lambda k: -len(str(units[k]["document"]["charts"][units[k]["chart"]])))
    outs = fork.run_many([lambda emit, u=units[k]: run_unit(u) for k in order], jobs=jobs,
                         cpu_seconds=[caps[k] for k in order])
    by_unit = {k: out for k, out in zip(order, outs, strict=True)}
    results = []
    for k, unit in enumerate(units):
        out = by_unit[k]
        if out.finished:
            results.append(out.value)
            continue
        if out.error is not None:
            out.reraise()
        wanted = [v for v in chosen if v.name in unit["verifiers"]]
        missing = _unreported(wanted, set(), caps[k], out)
        results.append({"key": unit["key"], "chart": unit["chart"], "path": "", "seconds": out.seconds,
                        "results": [r.to_json() | {"data": r.data} for r in missing]})
    return results
