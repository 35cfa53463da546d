"""Catalogue operations on a SQLAlchemy ``Session``. Nothing here is global.

Callers own the transaction (the CLI wraps each command in ``session.begin()``),
so a failed import of several files writes nothing at all.
"""

from __future__ import annotations

from dataclasses import dataclass

from sqlalchemy import func, or_, select
from sqlalchemy.orm import Session, selectinload

from gravicat.errors import Conflict, InputError, NotFound
from gravicat.format.bundled import (  # noqa: F401  (the one reader)
    bundled_files,
    initial_data_files,
    iter_all_bundled_documents,
    iter_bundled_documents,
)
from gravicat.format.metricfile import MetricDocument
from gravicat.store.models import Chart, CheckRecord, Entry, Parameter, Provenance, Reference, Revision, Tag


@dataclass(frozen=True)
class Stored:
    """What :func:`add_document` did: ``action`` is ``new``, ``revised`` or ``unchanged``."""

    slug: str
    action: str
    number: int
    hash: str


def head(session: Session, slug: str) -> Revision | None:
    """The latest revision of ``slug``, or None."""
    return session.scalars(
        select(Revision).join(Entry, Revision.entry_id == Entry.id)
        .where(Entry.slug == slug).order_by(Revision.number.desc()).limit(1)
    ).first()


def add_document(session: Session, doc: MetricDocument, *, author: str, message: str = "",
                 tool_version: str = "") -> Stored:
    """Store ``doc`` as a new entry, or as a new revision when its content changed.

    Concurrent writers get a well-defined order, the same on SQLite and PostgreSQL: the
    entry row is locked before its head is read (``SELECT ... FOR UPDATE``; SQLite
    serialises whole write transactions), so of two writers of one entry the second
    waits and stores its document as the next revision, with the first one's as parent.
    Two writers creating the same new entry race on its unique id: the loser re-reads
    the entry and stores its document as revision 2 (or finds it unchanged). The unique
    (entry, parent) and (entry, number) constraints stay the final guard: a write that
    still collides raises :class:`~gravicat.errors.Conflict` and writes nothing.
    """
    from sqlalchemy.exc import IntegrityError

    for attempt in (1, 2):
        try:
            with session.begin_nested():
                return _add_document(session, doc, author=author, message=message, tool_version=tool_version)
        except IntegrityError:
            if attempt == 2:
                raise Conflict(f"{doc.source}: entry '{doc.id}' was changed by another writer at the same "
                               "moment; nothing was written, run the command again") from None
    raise AssertionError("unreachable")  # pragma: no cover


def _add_document(session: Session, doc: MetricDocument, *, author: str, message: str,
                  tool_version: str) -> Stored:
    digest = doc.hash
    entry = session.scalars(select(Entry).where(Entry.slug == doc.id).with_for_update()).first()
    parent = None
    if entry is None:
        entry = Entry(slug=doc.id)
        session.add(entry)
        session.flush()  # a concurrent creator of the same id makes this fail (and the caller retry)
        number, action = 1, "new"
    else:
        parent = head(session, doc.id)
        if parent is not None and parent.hash == digest:
            return Stored(doc.id, "unchanged", parent.number, digest)
        number, action = (parent.number + 1 if parent else 1), "revised"
    data = doc.data
    rev = Revision(entry=entry, parent_id=parent.id if parent else None, number=number, hash=digest,
                   title=data["title"], summary=data["summary"], field_equations=data["field-equations"],
                   document=data, message=message)
    rev.provenance = Provenance(author=author, source=doc.source, tool_version=tool_version)
    rev.charts = [Chart(position=i, name=name, coordinates=c["coordinates"], domain=c["domain"],
                        line_element=c.get("line-element"))
                  for i, (name, c) in enumerate(data["charts"].items())]
    rev.parameters = [Parameter(position=i, name=name, description=p["description"], assume=p["assume"],
                                range=p.get("range"), default=p.get("default"))
                      for i, (name, p) in enumerate(data["parameters"].items())]
    rev.tags = [Tag(name=t) for t in data["tags"]]
    rev.references = [Reference(position=i, citation=r["citation"], doi=r.get("doi"))
                      for i, r in enumerate(data["references"])]
    session.add(rev)
    session.flush()
    return Stored(doc.id, action, number, digest)


def _latest_ids():
    return (select(func.max(Revision.id).label("id")).group_by(Revision.entry_id)).scalar_subquery()


def list_entries(session: Session, *, tag: str | None = None, equations: str | None = None,
                 param: str | None = None, search: str | None = None) -> list[Revision]:
    """Latest revisions of all entries matching every given filter, sorted by id (slug)."""
    q = (select(Revision).join(Entry, Revision.entry_id == Entry.id)
         .where(Revision.id.in_(_latest_ids()))
         .options(selectinload(Revision.tags), selectinload(Revision.charts),
                  selectinload(Revision.parameters), selectinload(Revision.entry)))
    if tag:
        q = q.where(Revision.id.in_(select(Tag.revision_id).where(Tag.name == tag)))
    if equations:
        q = q.where(Revision.field_equations == equations)
    if param:
        q = q.where(Revision.id.in_(select(Parameter.revision_id).where(Parameter.name == param)))
    if search:
        like = f"%{search.lower()}%"
        q = q.where(or_(func.lower(Revision.title).like(like), func.lower(Revision.summary).like(like),
                        func.lower(Entry.slug).like(like)))
    return list(session.scalars(q.order_by(Entry.slug)))


def revision(session: Session, slug: str, rev: str | None = None) -> Revision:
    """The revision of ``slug`` whose hash starts with ``rev`` (or whose number is ``rev``); latest if None."""
    entry = session.scalars(select(Entry).where(Entry.slug == slug)).first()
    if entry is None:
        raise NotFound(f"no entry '{slug}' in the catalogue (see 'gravicat list')")
    if rev is None:
        found = head(session, slug)
        if found is None:  # pragma: no cover - an entry always has a revision
            raise NotFound(f"entry '{slug}' has no revision")
        return found
    q = select(Revision).where(Revision.entry_id == entry.id)
    if rev.isdigit() and len(rev) < 6:
        matches = list(session.scalars(q.where(Revision.number == int(rev))))
    else:  # a plain prefix comparison: % and _ are not wildcards
        matches = list(session.scalars(q.where(func.substr(Revision.hash, 1, len(rev)) == rev.lower())))
    if not matches:
        raise NotFound(f"entry '{slug}' has no revision '{rev}' (see 'gravicat show {slug}')")
    if len({m.hash for m in matches}) > 1:
        raise InputError("--revision", None, f"'{rev}' matches several revisions of '{slug}'; give more characters")
    return matches[-1]


def document_of(rev: Revision) -> MetricDocument:
    """The validated document a revision holds."""
    source = rev.provenance.source if rev.provenance else f"{rev.entry.slug}@{rev.hash[:12]}"
    return MetricDocument(rev.document, source)


def remove_entry(session: Session, slug: str) -> int:
    """Delete an entry with all its revisions and results; returns the number of revisions removed."""
    entry = session.scalars(select(Entry).where(Entry.slug == slug)).first()
    if entry is None:
        raise NotFound(f"no entry '{slug}' in the catalogue (see 'gravicat list')")
    count = len(entry.revisions)
    session.delete(entry)
    session.flush()
    return count


def _same_content(digest: str):
    """The ids of every revision whose content hash is ``digest`` (a subquery).

    Check results belong to content, not to a revision row: the hash covers the whole canonical
    document (its id included), so a revision stored again with identical content (a ``revert``,
    or re-adding an older file) is the same metric, and the results of any revision with that
    content are its results.
    """
    return select(Revision.id).where(Revision.hash == digest).scalar_subquery()


def _newest(rows) -> list[CheckRecord]:
    latest: dict[tuple[str, str], CheckRecord] = {}
    for row in rows:  # ordered by id: a later row wins
        latest[(row.chart, row.check)] = row
    return list(latest.values())


def results_for(session: Session, rev: Revision) -> list[CheckRecord]:
    """Stored results of a revision's content: for each (chart, check) the newest row stored
    against any revision with the same content hash (see :func:`_same_content`)."""
    rows = session.scalars(select(CheckRecord).where(CheckRecord.revision_id.in_(_same_content(rev.hash)))
                           .order_by(CheckRecord.id)).all()
    return _newest(rows)


def results_of_content(session: Session, digest: str) -> list[CheckRecord] | None:
    """Stored results of the content with hash ``digest`` (newest per chart and check), or None
    when no revision of the catalogue has that content."""
    if session.scalars(select(Revision.id).where(Revision.hash == digest).limit(1)).first() is None:
        return None
    rows = session.scalars(select(CheckRecord).where(CheckRecord.revision_id.in_(_same_content(digest)))
                           .order_by(CheckRecord.id)).all()
    return _newest(rows)


def save_results(session: Session, rev: Revision, chart: str, results) -> None:
    """Store results of one chart of a revision (rows are only ever added)."""
    for r in results:
        session.add(CheckRecord(revision_id=rev.id, chart=chart, check=r.check, verifier=r.verifier,
                                verifier_version=r.version, status=r.status, method=r.method, detail=r.detail,
                                counterexample=_jsonable(r.counterexample), seconds=float(r.seconds)))
    session.flush()


def _jsonable(value):
    import json

    return None if value is None else json.loads(json.dumps(value, default=str))


def stored_versions(session: Session, rev: Revision) -> set[tuple[str, str, str]]:
    """(chart, verifier, version) triples that already have results for ``rev``'s content."""
    rows = session.execute(select(CheckRecord.chart, CheckRecord.verifier, CheckRecord.verifier_version)
                           .where(CheckRecord.revision_id.in_(_same_content(rev.hash))).distinct())
    return {tuple(r) for r in rows}


def status_by_revision(session: Session, revision_ids: list[int]) -> dict[int, str]:
    """Overall status of each revision's content from its newest result per (chart, check), over every
    revision with the same content hash; a revision without any result is absent (unverified)."""
    from gravicat.checks import worst

    ids = list(revision_ids)
    if not ids:
        return {}
    hash_of = dict(session.execute(select(Revision.id, Revision.hash).where(Revision.id.in_(ids))).all())
    rows = session.execute(
        select(Revision.hash, CheckRecord.chart, CheckRecord.check, CheckRecord.status)
        .join(Revision, CheckRecord.revision_id == Revision.id)
        .where(Revision.hash.in_(set(hash_of.values()))).order_by(CheckRecord.id))
    newest: dict[str, dict[tuple[str, str], object]] = {}
    for digest, chart, check, status in rows:
        newest.setdefault(digest, {})[(chart, check)] = status
    by_hash = {digest: worst(found.values()).value for digest, found in newest.items()}
    return {rid: by_hash[digest] for rid, digest in hash_of.items() if digest in by_hash}


def record_to_json(row: CheckRecord) -> dict:
    return {
        "chart": row.chart,
        "check": row.check,
        "status": row.status.value,
        "method": row.method.value,
        "detail": row.detail,
        "counterexample": row.counterexample,
        "seconds": row.seconds,
        "verifier": row.verifier,
        "version": row.verifier_version,
        "created_at": row.created_at.isoformat(),
    }


def count_entries(session: Session) -> int:
    return session.scalar(select(func.count(Entry.id))) or 0

