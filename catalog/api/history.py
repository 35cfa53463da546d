"""Revision history of an entry: summaries, field-level diffs, symbolic metric differences, revert.

Revisions are immutable rows (``gravicat.store.models.Revision``); nothing here
updates or deletes one. :func:`revert` stores an old revision's document again
as a new revision (same content hash, next number), so the history only grows.

Library functions take a SQLAlchemy ``Session``; the CLI owns the transaction.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session, selectinload

from gravicat.errors import InputError, NotFound
from gravicat.format.metricfile import MetricDocument
from gravicat.store.models import Entry, Revision

TOP_ORDER = ("title", "summary", "field-equations", "tags", "references", "notes", "flat-when", "parameters",
             "charts", "limits")


@dataclass(frozen=True)
class FieldChange:
    """One changed field: ``path`` is dotted (``charts.static.domain``); ``kind`` is added, removed or changed."""

    path: str
    kind: str
    old: Any = None
    new: Any = None

    def to_json(self) -> dict[str, Any]:
        return {"path": self.path, "change": self.kind, "old": self.old, "new": self.new}


@dataclass(frozen=True)
class MetricChange:
    """The symbolic difference new - old of one metric component of a chart present in both revisions."""

    chart: str
    component: str  # "g[t,r]"
    difference: str  # sympy text, "" when the chart cannot be compared component by component
    note: str = ""

    def to_json(self) -> dict[str, Any]:
        return {"chart": self.chart, "component": self.component, "difference": self.difference, "note": self.note}


@dataclass(frozen=True)
class CheckChange:
    """A stored check result that differs between two revisions (status ``None`` = no result stored)."""

    chart: str
    check: str
    old: str | None
    new: str | None
    detail: str = ""

    def to_json(self) -> dict[str, Any]:
        return {"chart": self.chart, "check": self.check, "old": self.old, "new": self.new, "detail": self.detail}


@dataclass
class Diff:
    slug: str
    old: Revision | None
    new: Revision
    fields: list[FieldChange] = field(default_factory=list)
    metric: list[MetricChange] = field(default_factory=list)
    checks: list[CheckChange] = field(default_factory=list)


# --------------------------------------------------------------------------- revisions


def revisions(session: Session, slug: str) -> list[Revision]:
    """Every revision of ``slug``, oldest first (provenance loaded)."""
    entry = session.scalars(select(Entry).where(Entry.slug == slug)).first()
    if entry is None:
        raise NotFound(f"no entry '{slug}' in the catalogue (see 'gravicat list')")
    return list(session.scalars(select(Revision).where(Revision.entry_id == entry.id)
                                .options(selectinload(Revision.provenance)).order_by(Revision.number)))


def previous(session: Session, rev: Revision) -> Revision | None:
    """The revision before ``rev`` (by number), or None for the first."""
    return session.scalars(select(Revision).where(Revision.entry_id == rev.entry_id,
                                                  Revision.number < rev.number)
                           .order_by(Revision.number.desc()).limit(1)).first()


# --------------------------------------------------------------------------- field-level diff


def field_diff(old: dict[str, Any] | None, new: dict[str, Any]) -> list[FieldChange]:
    """Field-level differences between two canonical documents (``old`` None: everything is added)."""
    out: list[FieldChange] = []
    old = old or {}
    keys = [k for k in TOP_ORDER if k in old or k in new] + sorted(
        k for k in set(old) | set(new) if k not in TOP_ORDER and k not in ("format", "id"))
    for key in keys:
        _walk(key, old.get(key, _MISSING), new.get(key, _MISSING), out)
    return out


class _Missing:
    def __repr__(self) -> str:  # pragma: no cover - debugging aid
        return "<missing>"


_MISSING = _Missing()


def _walk(path: str, a: Any, b: Any, out: list[FieldChange]) -> None:
    if a is _MISSING and b is _MISSING:
        return
    if a is _MISSING:
        out.append(FieldChange(path, "added", None, b))
        return
    if b is _MISSING:
        out.append(FieldChange(path, "removed", a, None))
        return
    if a == b:
        return
    if isinstance(a, dict) and isinstance(b, dict):
        for key in list(a) + [k for k in b if k not in a]:
            _walk(f"{path}.{key}", a.get(key, _MISSING), b.get(key, _MISSING), out)
        return
    if path == "tags" and isinstance(a, list) and isinstance(b, list):
        for t in sorted(set(b) - set(a)):
            out.append(FieldChange(f"tags[{t}]", "added", None, t))
        for t in sorted(set(a) - set(b)):
            out.append(FieldChange(f"tags[{t}]", "removed", t, None))
        return
    out.append(FieldChange(path, "changed", a, b))


def summarize(changes: list[FieldChange]) -> str:
    """A short human summary of field changes: 'chart static: line-element, domain; parameter Q added; +tag charged'."""
    if not changes:
        return "no content change"
    groups: dict[str, list[str]] = {}
    order: list[str] = []

    def note(group: str, text: str) -> None:
        if group not in groups:
            groups[group] = []
            order.append(group)
        if text not in groups[group]:
            groups[group].append(text)

    for ch in changes:
        parts = ch.path.split(".")
        head = parts[0]
        if head.startswith("tags["):
            note("tags", ("+" if ch.kind == "added" else "-") + head[5:-1])
        elif head in ("charts", "parameters", "limits") and len(parts) >= 2:
            label = {"charts": "chart", "parameters": "parameter", "limits": "limit"}[head]
            group = f"{label} {parts[1]}"
            if len(parts) == 2:
                note(group, ch.kind)
            else:
                note(group, parts[2] + ("" if ch.kind == "changed" else f" {ch.kind}"))
        else:
            note(head, ch.kind)
    items = []
    for g in order:
        vals = groups[g]
        if g == "tags":
            items.append("tags " + " ".join(vals))
        elif vals in (["added"], ["removed"]):
            items.append(f"{g} {vals[0]}")
        elif vals == ["changed"]:
            items.append(f"{g} changed")
        else:
            items.append(f"{g}: {', '.join(vals)}")
    return "; ".join(items)


# --------------------------------------------------------------------------- metric differences


def metric_changes(old: dict[str, Any], new: dict[str, Any], *, budget: float = 10.0) -> list[MetricChange]:
    """The symbolic difference g_new - g_old of every chart present in both documents.

    Components are compared in the same symbols (coordinates by name, parameters by
    name). A difference that ``cancel`` leaves non-zero is then tried by the exact
    proof engine (a rewritten but equal component is not reported); one that stays
    non-zero is reported with the engine's verdict in ``note``.
    """
    import sympy as sp

    from gravicat.format.metricfile import build_chart

    out: list[MetricChange] = []
    for chart, c_new in new.get("charts", {}).items():
        c_old = old.get("charts", {}).get(chart)
        if c_old is None:
            continue
        same_text = {k: c_old.get(k) for k in ("line-element", "metric", "define", "functions")} == \
                    {k: c_new.get(k) for k in ("line-element", "metric", "define", "functions")}
        if same_text and old.get("parameters") == new.get("parameters"):
            continue
        if c_old["coordinates"] != c_new["coordinates"]:
            out.append(MetricChange(chart, "*", "", f"coordinates changed from {', '.join(c_old['coordinates'])} "
                                                    f"to {', '.join(c_new['coordinates'])}: no component-wise "
                                                    "difference"))
            continue
        a = build_chart(MetricDocument(old, f"{old['id']} (old)"), chart)
        b = build_chart(MetricDocument(new, f"{new['id']} (new)"), chart)
        by_name = {str(p): p for p in a.params}
        rename = {p: by_name[str(p)] for p in b.params if str(p) in by_name and by_name[str(p)] != p}
        names = [str(x) for x in a.coords]
        diffs = {}
        for i in range(len(names)):
            for j in range(i, len(names)):
                d = sp.sympify(b.metric[i, j]).xreplace(rename) - sp.sympify(a.metric[i, j])
                if d != 0:
                    d = sp.cancel(d)
                if d != 0:
                    diffs[f"g[{names[i]},{names[j]}]"] = d
        if not diffs:
            continue
        notes = _decide_nonzero(diffs, a, budget)
        for comp, d in diffs.items():
            verdict = notes.get(comp, "")
            if verdict == "zero":
                continue
            out.append(MetricChange(chart, comp, sp.sstr(sp.factor(d) if _small(d) else d), verdict))
    return out


def _small(expr) -> bool:
    return len(str(expr)) < 2_000


def _decide_nonzero(diffs: dict, spec, budget: float) -> dict[str, str]:
    """component -> "zero" (proved equal), "" (proved different) or a note (not decided)."""
    from gravicat.engine.geometry import prove_zero

    out = {}
    for comp, d in diffs.items():
        outcome = prove_zero({comp: d}, spec.coords, spec.params, tuple(spec.param_ranges) + tuple(spec.domain),
                             budget=budget, what="the old and new component")
        if outcome.status == "pass":
            out[comp] = "zero"
        elif outcome.status == "fail":
            out[comp] = ""
        else:
            out[comp] = "not decided: " + outcome.detail
    return out


# --------------------------------------------------------------------------- check results


def check_changes(session: Session, old: Revision | None, new: Revision) -> list[CheckChange]:
    """Stored results whose status differs between two revisions (newest result per chart and check)."""
    from gravicat.store import revisions as store

    before = {(r.chart, r.check): r for r in store.results_for(session, old)} if old is not None else {}
    after = {(r.chart, r.check): r for r in store.results_for(session, new)}
    out = []
    for key in sorted(set(before) | set(after)):
        a, b = before.get(key), after.get(key)
        sa = a.status.value if a is not None else None
        sb = b.status.value if b is not None else None
        if sa != sb:
            out.append(CheckChange(key[0], key[1], sa, sb, (b or a).detail))
    return out


def check_counts(session: Session, rev: Revision) -> dict[str, int]:
    """Number of stored results per status (newest per chart and check)."""
    from gravicat.store import revisions as store

    counts: dict[str, int] = {}
    for r in store.results_for(session, rev):
        counts[r.status.value] = counts.get(r.status.value, 0) + 1
    return counts


# --------------------------------------------------------------------------- diff and revert


def diff(session: Session, slug: str, rev_a: str | None = None, rev_b: str | None = None, *,
         budget: float = 10.0) -> Diff:
    """Field-level diff of two revisions of ``slug``.

    No revision given: the latest against its predecessor. One: that revision
    against the latest. Two: the first against the second.
    """
    from gravicat.store import revisions as store

    if rev_b is None:
        new = store.revision(session, slug, None)
        old = store.revision(session, slug, rev_a) if rev_a is not None else previous(session, new)
    else:
        old = store.revision(session, slug, rev_a)
        new = store.revision(session, slug, rev_b)
    result = Diff(slug, old, new)
    if old is None:
        return result
    result.fields = field_diff(old.document, new.document)
    result.metric = metric_changes(old.document, new.document, budget=budget)
    result.checks = check_changes(session, old, new)
    return result


def revert(session: Session, slug: str, rev: str, *, author: str, message: str = "",
           tool_version: str = "") -> tuple[Revision, Any]:
    """Store revision ``rev`` of ``slug`` again as the newest revision (nothing is deleted).

    Returns the restored old revision and the :class:`gravicat.store.revisions.Stored` outcome;
    its ``action`` is ``unchanged`` when the latest revision already has that content.
    """
    from gravicat.store import revisions as store

    old = store.revision(session, slug, rev)
    latest = store.revision(session, slug, None)
    if old.id == latest.id:
        raise InputError("REV", None, f"revision {old.number} is already the latest revision of '{slug}'")
    doc = MetricDocument(dict(old.document), f"revert of {slug} revision {old.number} ({old.hash[:12]})")
    text = f"revert to {old.number}" + (f": {message}" if message else "")
    stored = store.add_document(session, doc, author=author, message=text, tool_version=tool_version)
    return old, stored


def history_rows(session: Session, slug: str) -> list[dict[str, Any]]:
    """One dict per revision, newest first: number, hash, date, author, source, message, summary, status."""
    from gravicat.store import revisions as store

    revs = revisions(session, slug)
    statuses = store.status_by_revision(session, [r.id for r in revs])
    rows = []
    prev: Revision | None = None
    first_with_hash: dict[str, Revision] = {}
    for rev in revs:
        prov = rev.provenance
        changes = field_diff(prev.document if prev is not None else None, rev.document)
        same = first_with_hash.get(rev.hash)
        own = statuses.get(rev.id)
        row = {
            "number": rev.number,
            "hash": rev.hash,
            "parent": prev.hash if prev is not None else None,
            "created_at": rev.created_at.isoformat(),
            "author": prov.author if prov else None,
            "source": prov.source if prov else None,
            "tool_version": prov.tool_version if prov else None,
            "message": rev.message,
            "summary": "created" if prev is None else summarize(changes),
            "changed_fields": [c.path for c in changes] if prev is not None else [],
            "status": own or "unverified",
            "checks": check_counts(session, rev),
            "same_content_as": same.number if same is not None else None,
            "status_of_same_content": (statuses.get(same.id) or "unverified") if same is not None else None,
        }
        rows.append(row)
        first_with_hash.setdefault(rev.hash, rev)
        prev = rev
    return list(reversed(rows))
