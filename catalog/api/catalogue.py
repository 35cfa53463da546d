"""The catalogue as a Python object: open, get, add, verify, find, history.

:class:`Catalogue` wraps a database (SQLite file, or PostgreSQL for a group) and does what the
commands do, through the same library functions: the store (:mod:`gravicat.store.revisions`,
:mod:`gravicat.store.search`), the runner (:mod:`gravicat.engine.runner`) and the child-process
runner with its CPU-time caps (:mod:`gravicat.engine.fork`). Every call is one transaction, so
a failed call writes nothing.

Subjects follow the project's one syntax (:mod:`gravicat.api.subjects`), ``FILE[:CHART]`` or
``ID[@REVISION][:CHART]``: ``cat.get("kerr")`` is the latest revision, ``cat.get("kerr@3f2a")``
the revision whose hash starts with ``3f2a`` (or revision number 3 with ``kerr@3``),
``cat.get("kerr:boyer-lindquist")`` that chart; ``cat.get("my-metric.toml")`` reads a file.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gravicat.api.entry import Chart, Entry, load_file
from gravicat.errors import InputError

if TYPE_CHECKING:
    from sqlalchemy.engine import Engine
    from sqlalchemy.orm import Session

    from gravicat.format.metricfile import MetricDocument


def configured(**given):
    """The user's settings with one precedence, as the command line resolves them (argument >
    ``GRAVICAT_*`` environment variable > ``config.toml`` > default): the only place the API reads
    them. ``given`` are :func:`gravicat.config.load_settings` arguments (None = not given)."""
    from gravicat.config import load_settings

    return load_settings(**given)


def _entry_ref(subject: str, what: str):
    """The parsed subject (:func:`gravicat.api.subjects.parse_subject`), which must name a
    catalogue entry: a file is refused with a one-line error saying what to do."""
    from gravicat.api.subjects import parse_subject

    ref = parse_subject(subject)
    if ref.is_file:
        raise InputError(subject, None, f"names a file; {what} works on catalogue entries (add the file first)")
    return ref


# PostgreSQL: insufficient_privilege, read_only_sql_transaction (a standby, default_transaction_read_only)
_READ_ONLY_STATES = {"42501", "25006"}


def database_failure(exc: Exception):
    """A SQLAlchemy failure as the one-line :class:`gravicat.DatabaseError` users see, else None
    (anything else is a bug and keeps its traceback)."""
    if not type(exc).__module__.startswith("sqlalchemy"):
        return None
    from sqlalchemy.exc import DBAPIError, IntegrityError, OperationalError

    from gravicat.errors import DatabaseError

    orig = getattr(exc, "orig", None)
    if isinstance(exc, DBAPIError) and (getattr(orig, "sqlstate", None) in _READ_ONLY_STATES
                                        or getattr(orig, "sqlite_errorname", None) == "SQLITE_READONLY"):
        # a role allowed only to read a shared catalogue, a read-only server, a read-only file
        return DatabaseError(f"the catalogue is read-only for this user: {str(orig).splitlines()[0]}; "
                             "this command needs write access, nothing was written")
    if isinstance(exc, IntegrityError):
        return DatabaseError(f"the database refused the change (a concurrent edit?): "
                             f"{str(exc.orig).splitlines()[0]}; nothing was written, try again")
    if isinstance(exc, OperationalError):
        return DatabaseError(f"database error: {str(exc.orig).splitlines()[0]}; nothing was written")
    return None


@dataclass
class Verified:
    """What :meth:`Catalogue.verify` did for one entry: ``status`` is the overall stored status of
    the revision's content after the run, ``computed`` the number of charts computed (0: every
    result was already stored and reused), ``checks`` the stored result dicts (as ``gravicat
    verify --json`` shows them)."""

    id: str
    revision: str
    status: str
    computed: int
    checks: list[dict[str, Any]] = field(default_factory=list, repr=False)

    def to_json(self) -> dict[str, Any]:
        return {"metric": self.id, "revision": self.revision, "status": self.status, "computed": self.computed,
                "checks": self.checks}


class VerifyReport(list):
    """What :meth:`Catalogue.verify` returns: a list of :class:`Verified`, one per entry, and with a
    cluster, ``cluster``: the run's summary, the ``cluster`` object of ``verify --json`` (units,
    done, stored, failures, workers, timings); None for a run in local children."""

    def __init__(self, items: Iterable[Verified] = (), *, cluster: dict[str, Any] | None = None):
        super().__init__(items)
        self.cluster = cluster


class Catalogue:
    """A gravicat catalogue.

    ``Catalogue()`` opens the configured one (``GRAVICAT_DB``, then ``config.toml``, then the
    default SQLite file in the user's data folder, as the command line does); ``Catalogue(url)``
    opens a SQLAlchemy URL (``sqlite:///path/catalogue.sqlite``,
    ``postgresql+psycopg://user@host/dbname``). Nothing is opened until first used. A SQLite
    catalogue is upgraded to this version's schema on first use; a PostgreSQL one must be
    initialised (or upgraded) with :meth:`init` or ``gravicat init``. ``disable_plugins`` blocks
    plugins by entry-point name, like ``--disable-plugin``. ``memory_cap`` (``"3GiB"``, ``"512MiB"``,
    ``"none"``) overrides the ``memory-cap`` setting (``GRAVICAT_MEMORY_CAP``, ``config.toml``): the
    address space each child process of a check or verification may add; it applies to every child
    this process starts from then on.

    Use it as a context manager, or call :meth:`close`, to release its connections.
    """

    def __init__(self, url: str | None = None, *, disable_plugins: Iterable[str] | None = None,
                 memory_cap: str | int | None = None):
        from gravicat.engine.fork import DEFAULT_MEMORY_CAP_BYTES, set_memory_cap

        self.settings = configured(database=url, disable_plugins=list(disable_plugins or []) or None,
                                   memory_cap=memory_cap)
        self.url = self.settings.database
        cap = self.settings.memory_cap
        set_memory_cap(DEFAULT_MEMORY_CAP_BYTES if cap is None else cap)
        self._ready = False

    def __repr__(self) -> str:
        from gravicat.store.db import safe_url

        return f"<Catalogue {safe_url(self.url)}>"

    def __enter__(self) -> Catalogue:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # -- connections ----------------------------------------------------------
    @cached_property
    def engine(self) -> Engine:
        """The SQLAlchemy engine (opened on first use)."""
        from gravicat.store.db import make_engine

        return make_engine(self.url)

    @cached_property
    def plugins(self):
        """The plugin manager (every installed plugin except the disabled ones)."""
        from gravicat.registry import make_plugin_manager

        return make_plugin_manager(blocked=self.settings.disable_plugins)

    def close(self) -> None:
        """Release the database connections (the catalogue can still be used; it reconnects)."""
        if "engine" in self.__dict__:
            self.engine.dispose()

    def _release(self) -> None:
        """Drop pooled connections before forking children (they must not share a socket)."""
        self.close()

    @contextmanager
    def session(self, *, create: bool = False) -> Iterator[Session]:
        """One transaction: everything in the block is written, or nothing (library use of the store)."""
        from sqlalchemy.orm import Session

        engine = self._open(create=create)
        try:
            with Session(engine) as session, session.begin():
                yield session
        except Exception as exc:
            converted = database_failure(exc)
            if converted is None:
                raise
            raise converted from None

    def _open(self, *, create: bool = False) -> Engine:
        from gravicat.store.db import ensure_schema

        engine = self.engine
        if create or not self._ready:
            ensure_schema(engine, may_upgrade=create or engine.dialect.name == "sqlite", may_create=create)
            self._ready = True
        return engine

    def init(self, *, bundled: bool = True) -> dict[str, int]:
        """Create (or upgrade) the catalogue and load the bundled reference entries, like
        ``gravicat init``; returns counts ``{"new", "revised", "unchanged", "total"}``.
        Loading is idempotent: an unchanged bundled file stores nothing."""
        from gravicat import __version__
        from gravicat.store import revisions as store

        docs = list(store.iter_all_bundled_documents()) if bundled else []
        counts = {"new": 0, "revised": 0, "unchanged": 0}
        with self.session(create=True) as s:
            for doc in docs:
                counts[store.add_document(s, doc, author="gravicat (bundled)", message="bundled catalogue",
                                          tool_version=__version__).action] += 1
            counts["total"] = store.count_entries(s)
        return counts

    # -- reading ----------------------------------------------------------------
    def get(self, subject: str) -> Entry | Chart:
        """What ``subject`` names: the entry ``ID[@REVISION]`` (latest revision by default), or its
        chart with ``:CHART``; a metric file (``FILE[:CHART]``) gives an entry read from the file.

        Unknown ids, revisions and charts are :class:`gravicat.NotFound` (one line, naming the
        subject); a malformed subject or an ambiguous revision prefix is an :class:`gravicat.InputError`.
        """
        from gravicat.api.subjects import check_chart, find_revision, parse_subject

        ref = parse_subject(subject)
        if ref.is_file:
            entry = load_file(ref.path, plugins=self.plugins)
        else:
            with self.session() as s:
                entry = self._entry(find_revision(s, ref))
        chart = check_chart(ref, entry.document)
        return entry.chart(chart) if chart else entry

    def entry(self, subject: str) -> Entry:
        """Like :meth:`get`, but always the :class:`Entry` (a ``:CHART`` part is refused)."""
        found = self.get(subject)
        if isinstance(found, Chart):
            raise InputError(subject, None, "names a chart; give the entry (ID[@REVISION])")
        return found

    def _entry(self, rev) -> Entry:
        from gravicat.format.metricfile import MetricDocument

        doc = MetricDocument(rev.document, f"catalogue:{rev.entry.slug}@{rev.hash[:12]}")
        return Entry(doc, catalogue=self, number=rev.number, plugins=self.plugins)

    def ids(self) -> list[str]:
        """Every entry id, sorted."""
        from gravicat.store import revisions as store

        with self.session() as s:
            return [r.entry.slug for r in store.list_entries(s)]

    def __iter__(self) -> Iterator[Entry]:
        """The latest revision of every entry, sorted by id."""
        from gravicat.store import revisions as store

        with self.session() as s:
            entries = [self._entry(r) for r in store.list_entries(s)]
        return iter(entries)

    def __len__(self) -> int:
        from gravicat.store import revisions as store

        with self.session() as s:
            return store.count_entries(s)

    def __contains__(self, slug: object) -> bool:
        from gravicat.store import revisions as store

        if not isinstance(slug, str):
            return False
        with self.session() as s:
            return store.head(s, slug) is not None

    def find(self, *words: str, tag: str | Iterable[str] | None = None, equations: str | Iterable[str] | None = None,
             status: str | None = None, param: str | Iterable[str] | None = None,
             coordinate: str | Iterable[str] | None = None, reference: str | None = None,
             transform_to: str | None = None, reduces_to: str | None = None, direct: bool = False,
             sort: str = "id", limit: int | None = None) -> list[Entry]:
        """Latest revisions matching every filter, as ``gravicat find`` searches (one SQL query).

        ``words`` must all appear in the id, title or summary; ``tag`` (all of them), ``equations``
        (any), ``param`` and ``coordinate`` (all) take one value or several; ``status`` is the
        stored overall status (``verified`` = ``pass``, ``unverified``...); ``reduces_to`` is
        ``ENTRY[:CHART]`` (through chains of limits unless ``direct``). Sorted by ``id``, ``title``
        or ``updated``; ``limit=None`` returns every match.
        """
        from gravicat.store.search import Query, find_entries

        def many(v) -> tuple[str, ...]:
            return () if v is None else (v,) if isinstance(v, str) else tuple(v)

        query = Query(tags=many(tag), equations=many(equations), status=status, params=many(param),
                      coordinates=many(coordinate), reference=reference, text=" ".join(words) or None,
                      transform_to=transform_to, reduces_to=reduces_to, direct=direct, sort=sort, limit=limit)
        with self.session() as s:
            return [self._entry(h.revision) for h in find_entries(s, query).hits]

    def history(self, slug: str) -> list[dict[str, Any]]:
        """The revisions of ``slug``, newest first, as ``gravicat history --json`` lists them (number,
        hash, created_at, author, source, message, summary of the changes, status...)."""
        from gravicat.api import history as hist

        with self.session() as s:
            return hist.history_rows(s, _entry_ref(slug, "history").entry)

    def results(self, subject: str | Entry) -> list[dict[str, Any]]:
        """The stored check results of an entry's revision (for each chart and check the newest), as
        ``gravicat show --json`` lists them."""
        from gravicat.api.subjects import find_revision, parse_subject
        from gravicat.store import revisions as store

        ref = parse_subject(f"{subject.id}@{subject.revision}" if isinstance(subject, Entry) else subject)
        if ref.is_file:
            return []
        with self.session() as s:
            return [store.record_to_json(r) for r in store.results_for(s, find_revision(s, ref))]

    def status(self, subject: str | Entry) -> str:
        """The stored overall status of an entry's revision (``unverified`` when nothing is stored)."""
        from gravicat.checks import worst

        rows = self.results(subject)
        return worst(r["status"] for r in rows).value if rows else "unverified"

    def _limit_targets(self, doc: MetricDocument) -> dict[str, MetricDocument]:
        """The latest catalogue documents of the other entries ``doc``'s limits name (id -> document):
        the catalogue's place in the one order of limit targets (the document, the catalogue, the
        bundled files)."""
        from gravicat.format.metricfile import MetricDocument
        from gravicat.store import revisions as store

        wanted = sorted({lim["reduces-to"].partition(":")[0] for lim in doc.data["limits"].values()} - {doc.id})
        if not wanted:
            return {}
        found = {}
        with self.session() as s:
            for slug in wanted:
                rev = store.head(s, slug)
                if rev is not None:
                    found[slug] = MetricDocument(rev.document, f"catalogue:{slug}@{rev.hash[:12]}")
        self._release()
        return found

    # -- writing ------------------------------------------------------------------
    def add(self, item: Entry | str | Path, *, author: str | None = None, message: str = "") -> Entry:
        """Store an entry (or a metric file, read with :func:`gravicat.load_file`): a new entry, a new
        revision when its content changed, nothing when it is unchanged. Returns the stored
        :class:`Entry`. ``author`` defaults to the configured author (``GRAVICAT_AUTHOR``, login name)."""
        from gravicat import __version__
        from gravicat.store import revisions as store

        entry = item if isinstance(item, Entry) else load_file(item, plugins=self.plugins)
        who = configured(author=author).author
        with self.session() as s:
            store.add_document(s, entry.document, author=who, message=message, tool_version=__version__)
            return self._entry(store.head(s, entry.id))

    def check(self, subject: str | Entry, *, only: list[str] | None = None, budget: float = 20.0,
              jobs: int | None = None):
        """Check a subject (``FILE[:CHART]``, ``ID[@REVISION][:CHART]`` or an :class:`Entry`) as
        ``gravicat check`` does, with this catalogue as the place limit targets are looked up after
        the document itself (then the bundled catalogue); nothing is stored. Returns
        :class:`gravicat.CheckResults`."""
        found = self.get(subject) if isinstance(subject, str) else subject
        if isinstance(found, Chart):
            return found.entry.check(charts=[found.name], only=only, budget=budget, jobs=jobs, catalogue=self)
        return found.check(only=only, budget=budget, jobs=jobs, catalogue=self)

    def verify(self, *subjects: str, all: bool = False, force: bool = False, budget: float = 20.0,  # noqa: A002
               jobs: int = 1, cluster: str | None = None) -> VerifyReport:
        """Verify entries and store the results against their revision, like ``gravicat verify``.

        ``subjects`` are ``ID[@REVISION]``; ``all=True`` takes every entry. Results already stored for
        the same content and verifier version are reused unless ``force``. Each chart runs in its own
        forked process (``jobs`` at a time) under the runner's CPU-time cap (10 s + ``budget`` per
        check); a chart that reaches it stores ``inconclusive`` results saying so.

        ``cluster``: a Dask scheduler address (``"tcp://host:8786"``) or ``"local:N"`` (N local worker
        processes, started and stopped by the call), as ``verify --cluster``; None takes the configured
        ``cluster`` setting (``GRAVICAT_CLUSTER``, ``config.toml``), and with none the local children
        are used. On a cluster each (revision, chart) is stored in its own transaction as it completes,
        so an interrupted call resumes when made again; :attr:`VerifyReport.cluster` then holds the run's
        summary (``verify --json``'s ``cluster`` key). An unreachable or lost scheduler raises
        :class:`gravicat.errors.ClusterError`; what was stored stays stored.
        """
        from gravicat.api.subjects import find_revision
        from gravicat.api.verifying import run_units, units_for
        from gravicat.engine.runner import result_from_json, select_verifiers
        from gravicat.registry import verifiers
        from gravicat.store import revisions as store

        if not subjects and not all:
            raise InputError("verify", None, "name entries to verify, or give all=True")
        chosen = select_verifiers(verifiers(self.plugins), None)
        cluster = cluster or self.settings.cluster or None
        if cluster is not None:
            from gravicat.api.cluster import parse_address

            parse_address(cluster)  # a malformed address is refused before anything is read
            if jobs != 1:
                raise InputError("jobs", None, "does not apply with cluster (the cluster's workers run the units)")
        with self.session() as s:
            if subjects:
                revs = []
                for text in subjects:
                    ref = _entry_ref(text, "verify")
                    if ref.chart:
                        raise InputError(text, None, "verify stores results for whole entries; drop ':CHART'")
                    revs.append(find_revision(s, ref))
            else:
                revs = store.list_entries(s)
            units, keys = units_for(s, revs, chosen, force=force, budget=budget,
                                    blocked=self.settings.disable_plugins)
        self._release()
        run = None
        if cluster is not None:
            from gravicat.api.cluster import store_output, verify_units

            def store_one(out: dict[str, Any]) -> int:
                with self.session() as s:
                    return store_output(s, out, force=force)

            outputs = []
            run = verify_units(cluster, units, {v.name: v.version for v in chosen}, store=store_one).to_json()
        else:
            outputs = run_units(units, jobs, chosen)
        summary = VerifyReport(cluster=run)
        with self.session() as s:
            for out in outputs:
                rev = s.get(store.Revision, out["key"])
                store.save_results(s, rev, out["chart"], [result_from_json(r) for r in out["results"]])
            current = {(v.name, v.version) for v in chosen}
            for rid, (slug, digest) in keys.items():
                rev = s.get(store.Revision, rid)
                rows = [r for r in store.results_for(s, rev) if (r.verifier, r.verifier_version) in current]
                summary.append(Verified(slug, digest, store.status_by_revision(s, [rid]).get(rid, "unverified"),
                                        sum(1 for u in units if u["key"] == rid),
                                        [store.record_to_json(r) for r in rows]))
        return summary
