"""Catalogue search: every filter of ``gravicat find`` (and ``list``) combined, sorted and paged.

:func:`find_entries` takes a SQLAlchemy ``Session`` and a :class:`Query`; all
filters must hold (AND). Each filter is one SQL condition on the latest
revision of each entry, so the database does the work and only one page of
rows is loaded:

* ``tags`` (all of them), ``equations`` (any of them), ``params`` (all),
  ``coordinates`` (some chart has each name), ``reference`` (text in a
  citation or DOI), ``text`` (every word in the id, title or summary);
* ``status``: the overall check status of the latest revision, as
  ``gravicat list`` shows it (worst of the newest result per chart and check;
  ``unverified`` when nothing is stored); ``verified`` is ``pass``;
* ``transform_to``: some chart declares a coordinate transform to a chart of
  that name;
* ``reduces_to``: ``ENTRY`` or ``ENTRY:CHART``; the entry declares a limit
  that reduces to it, directly or through a chain of limits (Kerr–Newman →
  Kerr → Schwarzschild) unless ``direct``.

The last two live inside the stored document (there is no projection table
for them): a ``LIKE`` on the document text narrows the candidates and the
parsed documents of those candidates decide.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from sqlalchemy import Text, and_, case, cast, func, or_, select
from sqlalchemy.orm import Session, selectinload

from gravicat.checks import SEVERITY, Status
from gravicat.errors import InputError
from gravicat.store.models import Chart, CheckRecord, Entry, Parameter, Reference, Revision, Tag

STATUSES = ("pass", "fail", "inconclusive", "error", "skipped", "unverified", "verified")
SORTS = ("id", "title", "updated")
MAX_CHAIN = 12  # longest chain of limits followed for reduces_to


@dataclass(frozen=True)
class Query:
    """A search; empty fields do not filter. ``limit=None`` returns every match."""

    tags: tuple[str, ...] = ()
    equations: tuple[str, ...] = ()
    status: str | None = None
    params: tuple[str, ...] = ()
    coordinates: tuple[str, ...] = ()
    reference: str | None = None
    text: str | None = None
    transform_to: str | None = None
    reduces_to: str | None = None
    direct: bool = False
    sort: str = "id"
    limit: int | None = 50
    offset: int = 0


@dataclass
class Hit:
    """One result: the latest revision, its overall status and, for ``reduces_to``, the chain of limits."""

    revision: Revision
    status: str
    via: list[str] = field(default_factory=list)  # "ENTRY:CHART" steps from this entry to the target

    @property
    def slug(self) -> str:
        return self.revision.entry.slug


@dataclass
class Page:
    total: int
    offset: int
    limit: int | None
    hits: list[Hit]


def _like_escape(text: str) -> str:
    return text.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")


def _contains(column, text: str):
    """Case-insensitive substring test, with LIKE wildcards in ``text`` taken literally."""
    return func.lower(column).like(f"%{_like_escape(text.lower())}%", escape="\\")


def latest_ids():
    """Subquery: the id of the latest revision of every entry."""
    return select(func.max(Revision.id)).group_by(Revision.entry_id).scalar_subquery()


def _severity():
    return case(*((CheckRecord.status == s, n) for s, n in SEVERITY.items()), else_=len(SEVERITY))


def validate(query: Query) -> Query:
    """Refuse unknown option values with a one-line error naming the option."""
    from gravicat.format.metricfile import FIELD_EQUATIONS, SLUG

    for eq in query.equations:
        if eq not in FIELD_EQUATIONS:
            raise InputError("--equations", None, f"'{eq}' is not one of {', '.join(FIELD_EQUATIONS)}")
    if query.status is not None and query.status not in STATUSES:
        raise InputError("--status", None, f"'{query.status}' is not one of {', '.join(STATUSES)}")
    if query.sort not in SORTS:
        raise InputError("--sort", None, f"'{query.sort}' is not one of {', '.join(SORTS)}")
    if query.limit is not None and query.limit < 1:
        raise InputError("--limit", None, "must be at least 1")
    if query.offset < 0:
        raise InputError("--page", None, "must be at least 1")
    if query.reduces_to is not None:
        entry, _, chart = query.reduces_to.partition(":")
        if not SLUG.match(entry) or (chart and not SLUG.match(chart)):
            raise InputError("--reduces-to", None, f"'{query.reduces_to}' is not ENTRY or ENTRY:CHART")
    if query.transform_to is not None and not SLUG.match(query.transform_to):
        raise InputError("--transform-to", None, f"'{query.transform_to}' is not a chart name")
    return query


def find_entries(session: Session, query: Query) -> Page:
    """Latest revisions of the entries matching every filter of ``query``, sorted and paged.

    The filters are evaluated once, as one SQL query returning the matching ids in order;
    a status filter then keeps the ids whose overall status (computed in SQL over the check
    results of those candidates only) is the one asked for; one page of rows is loaded.
    """
    validate(query)
    conds = [Revision.id.in_(latest_ids())]
    for tag in query.tags:
        conds.append(Revision.id.in_(select(Tag.revision_id).where(Tag.name == tag)))
    if query.equations:
        conds.append(Revision.field_equations.in_(list(query.equations)))
    for name in query.params:
        conds.append(Revision.id.in_(select(Parameter.revision_id).where(Parameter.name == name)))
    for name in query.coordinates:
        # the JSON list is stored as text; a quoted name cannot match inside another name
        conds.append(Revision.id.in_(select(Chart.revision_id).where(
            cast(Chart.coordinates, Text).like(f'%"{_like_escape(name)}"%', escape="\\"))))
    if query.reference:
        conds.append(Revision.id.in_(select(Reference.revision_id).where(or_(
            _contains(Reference.citation, query.reference), _contains(Reference.doi, query.reference)))))
    if query.text:
        for word in query.text.split():
            conds.append(or_(_contains(Entry.slug, word), _contains(Revision.title, word),
                             _contains(Revision.summary, word)))
    via: dict[int, list[str]] = {}
    if query.transform_to is not None:
        ids = _with_transform_to(session, conds, query.transform_to)
        conds.append(Revision.id.in_(ids) if ids else Revision.id.is_(None))
    if query.reduces_to is not None:
        via = _reducing_to(session, conds, query.reduces_to, query.direct)
        conds.append(Revision.id.in_(list(via)) if via else Revision.id.is_(None))

    where = and_(*conds)
    order = {"id": (Entry.slug,), "title": (func.lower(Revision.title), Entry.slug),
             "updated": (Revision.created_at.desc(), Entry.slug)}[query.sort]
    ids = list(session.scalars(select(Revision.id).join(Entry, Revision.entry_id == Entry.id)
                               .where(where).order_by(*order)))
    statuses: dict[int, str] | None = None
    if query.status is not None and ids:
        wanted = "pass" if query.status == "verified" else query.status
        candidates = select(Revision.id).join(Entry, Revision.entry_id == Entry.id).where(where)
        statuses = _status_of(session, Revision.id.in_(candidates))
        ids = [i for i in ids if statuses.get(i, "unverified") == wanted]
    total = len(ids)
    end = None if query.limit is None else query.offset + query.limit
    page_ids = ids[query.offset:end]
    revs = {r.id: r for r in session.scalars(
        select(Revision).where(Revision.id.in_(page_ids))
        .options(selectinload(Revision.tags), selectinload(Revision.charts),
                 selectinload(Revision.parameters), selectinload(Revision.entry)))} if page_ids else {}
    if statuses is None:
        statuses = overall_status(session, page_ids)
    hits = [Hit(revs[i], statuses.get(i, "unverified"), via.get(i, [])) for i in page_ids]
    return Page(total=total, offset=query.offset, limit=query.limit, hits=hits)


def overall_status(session: Session, revision_ids: list[int]) -> dict[int, str]:
    """Overall status per revision (worst of the newest result per chart and check); absent = unverified."""
    if not revision_ids:
        return {}
    return _status_of(session, Revision.id.in_(list(revision_ids)))


def _status_of(session: Session, which) -> dict[int, str]:
    """Overall status of the revisions selected by the condition ``which`` on revision rows.

    Results belong to content: every revision with the same content hash shares them (a reverted
    revision is as verified as the identical content was), as in ``store.status_by_revision``."""
    hash_of = dict(session.execute(select(Revision.id, Revision.hash).where(which)).all())
    if not hash_of:
        return {}
    same = Revision.hash.in_(set(hash_of.values()))
    newest = (select(func.max(CheckRecord.id)).join(Revision, CheckRecord.revision_id == Revision.id).where(same)
              .group_by(Revision.hash, CheckRecord.chart, CheckRecord.check))
    rows = session.execute(select(Revision.hash, func.max(_severity()))
                           .join(Revision, CheckRecord.revision_id == Revision.id)
                           .where(CheckRecord.id.in_(newest)).group_by(Revision.hash))
    names = {n: s.value for s, n in SEVERITY.items()}
    by_hash = {digest: names.get(sev, Status.ERROR.value) for digest, sev in rows}
    return {rid: by_hash[digest] for rid, digest in hash_of.items() if digest in by_hash}


def _documents(session: Session, conds, patterns: list[str]) -> list[tuple[int, str, dict]]:
    """(revision id, slug, document) of the rows matching ``conds`` whose document text contains a pattern."""
    text = cast(Revision.document, Text)
    like = or_(*(text.like(f"%{_like_escape(p)}%", escape="\\") for p in patterns))
    rows = session.execute(select(Revision.id, Entry.slug, Revision.document)
                           .join(Entry, Revision.entry_id == Entry.id).where(and_(*conds), like))
    return [(rid, slug, doc) for rid, slug, doc in rows]


def _with_transform_to(session: Session, conds, chart: str) -> list[int]:
    out = []
    for rid, _slug, doc in _documents(session, conds, [f'"{chart}"']):
        if any(chart in c.get("transforms", {}) for c in doc.get("charts", {}).values()):
            out.append(rid)
    return out


def _reducing_to(session: Session, conds, target: str, direct: bool) -> dict[int, list[str]]:
    """Revision id -> chain of "ENTRY:CHART" limit targets leading from that entry to ``target``.

    One pass over the documents that declare a limit reads the graph of limits (only the
    text from the first ``"reduces-to"`` key on is transferred: limits come last in a stored
    document, and a slug cannot contain a quote); a breadth-first walk from ``target``
    gives the shortest chain. The first step must hit ``target`` exactly (its chart too,
    when given); a chain continues through any chart of an intermediate entry, since every
    chart of an entry is the same spacetime. Intermediate entries need not pass the other
    filters; the results do.
    """
    import re

    entry, _, chart = target.partition(":")
    text = cast(Revision.document, Text)
    find = func.strpos if session.get_bind().dialect.name == "postgresql" else func.instr
    pos = find(text, '"reduces-to"')  # limits come last in a stored document: read from the first one
    where = [Revision.id.in_(latest_ids()), pos > 0]
    if direct:  # only the documents naming the target can matter
        where.append(or_(*(text.like(f'%"reduces-to":{space}"{_like_escape(entry)}:%', escape="\\")
                           for space in ("", " "))))
    rows = session.execute(select(Revision.id, Entry.slug, func.substr(text, pos))
                           .join(Entry, Revision.entry_id == Entry.id).where(*where))
    target_re = re.compile(r'"reduces-to":\s*"([a-z0-9-]+:[a-z0-9-]+)"')
    reducing: dict[str, list[tuple[str, str]]] = {}  # target entry -> [(source slug, "ENTRY:CHART")]
    ids: dict[str, int] = {}
    for rid, slug, tail in rows:
        ids[slug] = rid
        for ref in target_re.findall(tail or ""):
            te, _, tc = ref.partition(":")
            if te == entry and chart and tc != chart:
                continue
            reducing.setdefault(te, []).append((slug, ref))
    found: dict[str, list[str]] = {}
    frontier = [(entry, [])]
    for _depth in range(MAX_CHAIN):
        nxt = []
        for te, chain in frontier:
            for slug, ref in reducing.get(te, ()):
                if slug == entry or slug in found:
                    continue
                found[slug] = [ref, *chain]
                nxt.append((slug, found[slug]))
        if direct or not nxt:
            break
        frontier = nxt
    if not found:
        return {}
    # keep only the entries that also pass the other filters
    allowed = set(session.scalars(select(Revision.id).join(Entry, Revision.entry_id == Entry.id)
                                  .where(and_(*conds), Revision.id.in_([ids[s] for s in found]))))
    return {ids[s]: chain for s, chain in found.items() if ids[s] in allowed}
