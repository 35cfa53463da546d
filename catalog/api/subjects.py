"""One subject syntax for every command: ``FILE[:CHART]`` or ``ID[@REVISION][:CHART]``.

A *subject* names the metric a command works on. It is read by one rule, in this order:

1. the whole text is the path of a file that exists: that file (a path that itself contains
   ``:`` works this way);
2. the text after the **last** ``:`` is a chart name (no ``/`` or ``\\``) and the text before
   it is a file that exists or ends in ``.toml`` / ``.json``: that file and that chart;
3. the text ends in ``.toml`` / ``.json``, or contains ``/`` or ``\\``, or starts with ``.`` or
   ``~``: a file (which then must exist: "no such file");
4. otherwise an entry: ``ID`` (lower-case letters, digits, ``-``), optionally ``@REVISION`` (a
   revision number, or the first characters of its hash) and ``:CHART``.

Windows drive letters (``C:\\data\\kerr.toml``, ``C:/data/kerr.toml:boyer-lindquist``) follow
from rules 1-3: the chart separator is only the last ``:``, and the text after a drive letter's
``:`` starts with a slash, so it is never read as a chart. An entry id never contains ``/``, ``.``
or ``:``, so nothing written as a path is ever looked up in the catalogue.

:func:`parse_subject` only reads the text (no file or database is opened beyond checking that
a path exists); :func:`resolve_subject` loads the document: a file through the plugins' readers,
an entry from the catalogue (one session). Errors are one line and name the subject, e.g.
``kerr@12ab: no revision of kerr starts with 12ab``.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gravicat.errors import InputError, NotFound

if TYPE_CHECKING:
    from sqlalchemy.orm import Session

    from gravicat.format.metricfile import MetricDocument

FILE_SUFFIXES = (".toml", ".json")
ENTRY = re.compile(r"^([a-z0-9][a-z0-9-]{0,79})(?:@([0-9A-Za-z]+))?(?::([^:/\\\s]+))?$")
CHART = re.compile(r"^[^:/\\\s]+$")
FORMS = "FILE[:CHART] or ID[@REVISION][:CHART]"


@dataclass(frozen=True)
class SubjectRef:
    """A parsed subject: either ``path`` (a file) or ``entry`` (+ ``revision``), with ``chart``."""

    text: str
    path: Path | None = None
    entry: str | None = None
    revision: str | None = None
    chart: str | None = None

    @property
    def is_file(self) -> bool:
        return self.path is not None


@dataclass
class Resolved:
    """A subject with its document loaded: ``revision`` is the stored revision (None for a file),
    ``chart`` the chart the subject (or the ``--chart`` option) names, else None; ``checks`` the
    stored check results of that revision (JSON rows; None for a file)."""

    ref: SubjectRef
    document: MetricDocument
    revision: Any = None
    chart: str | None = None
    revision_hash: str | None = None
    revision_number: int | None = None
    checks: list[dict] | None = None

    @property
    def is_file(self) -> bool:
        return self.ref.is_file


MAX_SUBJECT = 4096  # characters of a subject: the longest path Linux opens (PATH_MAX)


def _looks_like_file(text: str) -> bool:
    return (text.lower().endswith(FILE_SUFFIXES) or "/" in text or "\\" in text
            or text.startswith((".", "~")))


def parse_subject(text: str, *, chart: str | None = None, revision: str | None = None) -> SubjectRef:
    """Read ``text`` by the module's rule. ``chart`` / ``revision`` are the values of a command's
    ``--chart`` / ``--revision`` options: the same as ``:CHART`` / ``@REVISION``; both given and
    different is an :class:`InputError`."""
    if not isinstance(text, str) or not text.strip():
        raise InputError("subject", None, f"empty; give {FORMS}")
    text = text.strip()
    if len(text) > MAX_SUBJECT:  # issue 14 item 10: never an OSError "File name too long"
        raise InputError(text[:40] + "...", None, f"is {len(text)} characters long (limit {MAX_SUBJECT})")
    if revision is not None and not revision.strip():  # issue 14 item 12: 'revert kerr ""'
        raise InputError("REVISION", None, "is empty; give a revision number or a hash prefix")
    try:
        ref = _parse(text)
    except (OSError, ValueError) as exc:  # a path component too long, a NUL in the text
        reason = getattr(exc, "strerror", None) or "not a usable file name"
        raise InputError(text[:80], None, f"not a metric file or an entry ({reason})") from None
    if chart is not None:
        if ref.chart is not None and ref.chart != chart:
            raise InputError(text, None, f"names chart '{ref.chart}' but --chart is '{chart}'; give one")
        ref = SubjectRef(ref.text, ref.path, ref.entry, ref.revision, chart)
    if revision is not None:
        if ref.is_file:
            raise InputError("--revision", None, "applies to catalogue entries, not to a file")
        if ref.revision is not None and ref.revision != revision:
            raise InputError(text, None, f"names revision '{ref.revision}' but --revision is '{revision}'; give one")
        ref = SubjectRef(ref.text, ref.path, ref.entry, revision, ref.chart)
    return ref


def _parse(text: str) -> SubjectRef:
    whole = Path(text).expanduser()
    if whole.is_file():
        return SubjectRef(text, path=whole)
    head, sep, tail = text.rpartition(":")
    if sep and head and CHART.match(tail) and not (len(head) == 1 and head.isalpha()):
        base = Path(head).expanduser()
        if base.is_file() or head.lower().endswith(FILE_SUFFIXES):
            return SubjectRef(text, path=base, chart=tail)
    if _looks_like_file(text):
        return SubjectRef(text, path=whole)
    m = ENTRY.match(text)
    if not m:
        raise InputError(text, None, f"not a metric file or an entry ({FORMS}, e.g. kerr@3f2a:boyer-lindquist)")
    slug, rev, chart = m.groups()
    return SubjectRef(text, entry=slug, revision=rev, chart=chart)


def find_revision(session: Session, ref: SubjectRef):
    """The stored revision an entry subject names (latest unless ``@REVISION``), with one-line errors
    naming the subject: unknown entry, no matching revision, an ambiguous hash prefix."""
    from sqlalchemy import select

    from gravicat.store import revisions as store
    from gravicat.store.models import Entry, Revision

    slug, rev = ref.entry, ref.revision
    entry = session.scalars(select(Entry).where(Entry.slug == slug)).first()
    if entry is None:
        raise NotFound(f"{ref.text}: no entry '{slug}' in the catalogue (see 'gravicat list')")
    if rev is None:
        found = store.head(session, slug)
        if found is None:  # pragma: no cover - an entry always has a revision
            raise NotFound(f"{ref.text}: entry '{slug}' has no revision")
        return found
    q = select(Revision).where(Revision.entry_id == entry.id)
    if rev.isdigit() and len(rev) < 6:
        matches = list(session.scalars(q.where(Revision.number == int(rev))))
        what = f"no revision {rev} of {slug}"
    else:
        # a hash prefix is compared as text, never as a LIKE pattern ('%' and '_' are literal: issue 14 item 12)
        from sqlalchemy import func

        if not rev or any(c not in "0123456789abcdef" for c in rev.lower()):
            raise NotFound(f"{ref.text}: '{rev}' is not a revision number or a hash prefix "
                           f"(see 'gravicat history {slug}')")
        matches = list(session.scalars(q.where(func.substr(Revision.hash, 1, len(rev)) == rev.lower())))
        what = f"no revision of {slug} starts with {rev}"
    if not matches:
        raise NotFound(f"{ref.text}: {what} (see 'gravicat history {slug}')")
    hashes = sorted({m.hash for m in matches})
    if len(hashes) > 1:
        shown = ", ".join(h[:12] for h in hashes[:4]) + (", ..." if len(hashes) > 4 else "")
        raise InputError(ref.text, None, f"'{rev}' matches {len(hashes)} revisions of {slug} ({shown}); "
                                         "give more characters")
    return matches[-1]


def check_chart(ref: SubjectRef, doc: MetricDocument) -> str | None:
    """``ref.chart`` if ``doc`` has it (None when no chart is named), else a one-line
    :class:`NotFound` listing the charts."""
    if ref.chart is not None and ref.chart not in doc.chart_names:
        raise NotFound(f"{ref.text}: no chart '{ref.chart}' (charts: {', '.join(doc.chart_names)})")
    return ref.chart


def resolve_subject(ref: SubjectRef | str, *, plugins=None, session: Session | None = None) -> Resolved:
    """Load what ``ref`` names. ``plugins`` is the plugin manager whose readers read a file;
    ``session`` an open database session (needed only for an entry: the stored revision returned
    belongs to it, while ``revision_hash`` / ``revision_number`` stay readable afterwards)."""
    from gravicat.format.metricfile import load_file

    if isinstance(ref, str):
        ref = parse_subject(ref)
    if ref.is_file:
        doc = load_file(ref.path, plugins)
        return Resolved(ref, doc, None, check_chart(ref, doc))
    if session is None:
        raise InputError(ref.text, None, "names a catalogue entry, but no catalogue is open here")
    from gravicat.store import revisions as store

    rev = find_revision(session, ref)
    doc = store.document_of(rev)
    checks = [store.record_to_json(r) for r in store.results_for(session, rev)]
    return Resolved(ref, doc, rev, check_chart(ref, doc), rev.hash, rev.number, checks)
