"""Build the static site: collect the catalogue, render what changed, write it, keep a manifest.

Layout of ``OUT_DIR``::

    index.html                   every entry, with search and filters (static/site.js)
    entries/ID.html              one page per entry
    figures/ID.svg               effective potential of a stationary entry
    downloads/ID.metric.json     the metric file (canonical JSON form)
    downloads/ID[.CHART].*.EXT   the exporters' files, verified revisions only
    static/site.css, site.js     bundled assets (no network, no CDN)
    manifest.json                content hashes: what the next build may leave alone

Incremental: each entry has a key, the SHA-256 of everything its pages are made from (its latest
document, stored results, history, the ids its links point to, the exporters and the renderer
version). An entry whose key and files are unchanged is not rendered again; a file is written
only when its bytes differ from what is there. Files of entries no longer in the site are removed.
Deterministic: orders are sorted and the only dates are the catalogue's own, so the same
catalogue gives the same bytes.
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass, field
from importlib.resources import files
from pathlib import Path
from typing import Any

from gravicat.engine.fork import describe_limit
from gravicat.errors import InputError, NotFound

SITE_FORMAT = "gravicat-site/1"
RENDERER_VERSION = "2"  # bump when a page changes shape: every entry is rendered again
MANIFEST = "manifest.json"
ENTRY_CPU_SECONDS = 120.0  # one entry's computed parts (MathML, orbits, exports) in a forked child
BATCH_MAX = 12  # entries computed one after the other in one child (see compute_all)
STATIONARY_TAGS = frozenset({"stationary", "static"})
NOT_STATIONARY = ("the entry is not tagged stationary or static: circular orbits, their landmarks and the effective "
                  "potential are drawn for time-independent metrics only")
_ACCEPTED = ("pass", "skipped", "inconclusive")  # statuses that may be exported (as `export` decides)


@dataclass
class SiteReport:
    """What a build did. ``rendered``: entries whose pages were made again; ``written``: files whose
    bytes changed; ``removed``: files of entries no longer in the site."""

    out_dir: str
    entries: int = 0
    rendered: list[str] = field(default_factory=list)
    unchanged: int = 0
    written: list[str] = field(default_factory=list)
    removed: list[str] = field(default_factory=list)
    index_written: bool = False
    problems: list[str] = field(default_factory=list)
    computed: int = 0  # computations made (MathML, orbits, exports): entries sharing one are computed once

    def to_json(self) -> dict[str, Any]:
        return {"out_dir": self.out_dir, "entries": self.entries, "rendered": self.rendered, "computed": self.computed,
                "unchanged": self.unchanged, "written": self.written, "removed": self.removed,
                "index_written": self.index_written, "problems": self.problems}

    def line(self) -> str:
        return (f"site: {self.entries} entries, {len(self.rendered)} rendered, {self.unchanged} unchanged; "
                f"{len(self.written)} files written ({'index rewritten' if self.index_written else 'index unchanged'})"
                f", {len(self.removed)} removed -> {self.out_dir}")


# --------------------------------------------------------------------------- collecting


def collect(session, only: list[str] | None = None) -> list[dict[str, Any]]:
    """Plain data of every entry's latest revision (sorted by id): what the pages are made from."""
    from gravicat.api.history import history_rows
    from gravicat.store import revisions as store

    revs = store.list_entries(session)
    if only:
        wanted = list(dict.fromkeys(only))
        have = {r.entry.slug for r in revs}
        missing = [w for w in wanted if w not in have]
        if missing:
            raise NotFound(f"--only: no entry '{missing[0]}' in the catalogue (see 'gravicat list')")
        revs = [r for r in revs if r.entry.slug in set(wanted)]
    statuses = store.status_by_revision(session, [r.id for r in revs])
    out = []
    for rev in sorted(revs, key=lambda r: r.entry.slug):
        results = sorted((store.record_to_json(r) for r in store.results_for(session, rev)),
                         key=lambda r: (r["chart"], r["check"]))
        for r in results:  # timings and storage dates change with every run: not page content
            r.pop("seconds", None)
            r.pop("created_at", None)
        history = history_rows(session, rev.entry.slug)
        out.append({"slug": rev.entry.slug, "number": rev.number, "hash": rev.hash,
                    "created_at": rev.created_at.isoformat(), "status": statuses.get(rev.id, "unverified"),
                    "document": dict(rev.document), "source": store.document_of(rev).source,
                    "results": results, "history": history})
    return out


def _targets(doc: dict[str, Any]) -> set[str]:
    found = {lim["reduces-to"].partition(":")[0] for lim in doc["limits"].values()}
    for c in doc["charts"].values():
        found.update(t.partition(":")[0] for t in c["transforms"] if ":" in t)
    return found


def entry_key(e: dict[str, Any], present: set[str], exporters: dict[str, Any]) -> str:
    links = sorted(t for t in _targets(e["document"]) if t in present)
    payload = {"renderer": RENDERER_VERSION, "entry": e, "links": links,
               "exporters": sorted((n, str(getattr(x, "version", ""))) for n, x in exporters.items())}
    return hashlib.sha256(json.dumps(payload, sort_keys=True, default=str).encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------- computing (in a child)


def compute_entry(e: dict[str, Any], exporters: dict[str, Any]) -> dict[str, Any]:
    """The computed parts of one entry page (MathML, orbits, figure, exports) and its files."""
    from gravicat.api.site import parts
    from gravicat.api.site.pages import safe_name
    from gravicat.format.metricfile import MetricDocument

    doc = MetricDocument(e["document"], e["source"])
    slug = safe_name(e["slug"])
    out: dict[str, Any] = {"math": {c: parts.chart_mathml(doc, c) for c in doc.chart_names}, "files": {}}
    if STATIONARY_TAGS & set(doc.data["tags"]):
        orb = parts.orbit_section(doc)
        svg = orb.pop("svg", None)
        out["orbits"] = orb
        if svg:
            out["figure"] = f"figures/{slug}.svg"
            out["files"][out["figure"]] = svg
    else:  # the page says why there is no orbit section
        out["orbits"] = {"error": NOT_STATIONARY}
    if e["status"] in _ACCEPTED:
        dl = parts.downloads(doc, exporters=exporters, revision=e["hash"],
                             checks=[{**r, "seconds": 0.0} for r in e["results"]],
                             date=e["created_at"][:10], source=f"catalogue entry {e['slug']}, revision {e['number']}")
        out["files"].update({f"downloads/{n}": b for n, b in dl.pop("files").items()})
        out["downloads"] = dl
    return out


def _preload() -> None:
    """Import what every child needs once, in the parent, so each forked child inherits it."""
    import sympy  # noqa: F401

    import gravicat.format.charts  # noqa: F401
    import gravicat.physics.orbits  # noqa: F401

    try:
        import matplotlib.backends.backend_svg  # noqa: F401
        import matplotlib.figure  # noqa: F401
    except ImportError:  # no figure then: orbit_section says so on the page
        pass


def _compute_batch(emit, batch: list[tuple[int, dict[str, Any]]], exporters: dict[str, Any]) -> None:
    for i, e in batch:
        emit((i, compute_entry(e, exporters)))


def compute_all(sources: list[dict[str, Any]], exporters: dict[str, Any], *, jobs: int,
                cpu_seconds: float) -> tuple[dict[int, dict[str, Any]], dict[int, Any]]:
    """The computed parts of every entry of ``sources``: (index -> parts, index -> the
    :class:`gravicat.engine.fork.Outcome` of an entry whose computation was stopped).

    Entries are computed in batches, one forked child per batch (``jobs`` at a time), each child
    sending every entry's parts as soon as they are made: entries of one batch share what sympy and
    the orbit library cache, which halves the CPU time of a full build against one child per entry.
    A batch's child has the CPU-time cap of one entry, ``cpu_seconds``; the entries of a batch that
    reached it, or whose child stopped otherwise, are computed again one per child, each under
    ``cpu_seconds``, so a runaway entry costs at most twice its cap and never stops the others."""
    from gravicat.engine.fork import run_many

    values: dict[int, dict[str, Any]] = {}
    stopped: dict[int, Any] = {}
    if not sources:
        return values, stopped
    _preload()
    size = max(1, min(BATCH_MAX, -(-len(sources) // (jobs * 4))))  # about four batches per job
    groups = [list(range(k, min(k + size, len(sources)))) for k in range(0, len(sources), size)]

    def arrived(_task: int, item) -> None:
        values[item[0]] = item[1]

    run_many([lambda emit, g=g: _compute_batch(emit, [(i, sources[i]) for i in g], exporters) for g in groups],
             jobs=jobs, cpu_seconds=cpu_seconds, on_item=arrived)
    again = [i for i in range(len(sources)) if i not in values]
    if again:
        outs = run_many([lambda emit, i=i: compute_entry(sources[i], exporters) for i in again], jobs=jobs,
                        cpu_seconds=cpu_seconds)
        for i, oc in zip(again, outs, strict=True):
            if oc.finished:
                values[i] = oc.value
            else:
                stopped[i] = oc
    return values, stopped


def _render(e: dict[str, Any], computed: dict[str, Any], present: set[str]) -> dict[str, bytes]:
    from gravicat.api.site.pages import entry_html, entry_page, safe_name
    from gravicat.format.metricfile import canonical_json

    metric = f"downloads/{safe_name(e['slug'])}.metric.json"
    computed = {**computed, "metric_file": metric}
    out = dict(computed.get("files", {}))
    out[metric] = (canonical_json(e["document"], indent=2) + "\n").encode("utf-8")
    out[entry_page(e["slug"])] = entry_html(e, computed, present)
    return out


# --------------------------------------------------------------------------- writing


def _digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _read_manifest(out: Path) -> dict[str, Any]:
    path = out / MANIFEST
    if not path.is_file():
        return {"entries": {}, "files": {}}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {"entries": {}, "files": {}}  # an unreadable manifest: render everything again
    if not isinstance(data, dict) or data.get("format") != SITE_FORMAT:
        return {"entries": {}, "files": {}}
    return {"entries": dict(data.get("entries") or {}), "files": dict(data.get("files") or {})}


def _prepare_out(out: Path) -> None:
    if out.exists() and not out.is_dir():
        raise InputError(str(out), None, "not a folder: give a folder for the site (it is created if missing)")
    if out.is_dir() and any(out.iterdir()) and not (out / MANIFEST).is_file():
        raise InputError(str(out), None, f"the folder is not empty and holds no {MANIFEST} of an earlier site; "
                                         "give an empty or new folder (nothing was written)")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(str(out), None, f"cannot create the folder ({exc.strerror or exc})") from None


def _write(out: Path, rel: str, data: bytes, old_files: dict[str, str], report: SiteReport) -> None:
    path = out / rel
    if old_files.get(rel) == _digest(data) and path.is_file():
        return
    try:
        if path.is_file() and path.read_bytes() == data:
            return
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(path.name + ".part")
        tmp.write_bytes(data)
        os.replace(tmp, path)
    except OSError as exc:
        raise InputError(str(path), None, f"cannot write ({exc.strerror or exc})") from None
    report.written.append(rel)


def _static_files() -> dict[str, bytes]:
    root = files("gravicat.api.site").joinpath("static")
    return {f"static/{name}": root.joinpath(name).read_bytes() for name in ("site.css", "site.js")}


def build_site(entries: list[dict[str, Any]], out_dir: str | Path, *, exporters: dict[str, Any],
               jobs: int = 1, cpu_seconds: float = ENTRY_CPU_SECONDS) -> SiteReport:
    """Render ``entries`` (from :func:`collect`) into ``out_dir``; see the module docstring."""
    from gravicat.api.site.pages import index_page

    out = Path(out_dir)
    _prepare_out(out)
    report = SiteReport(str(out), entries=len(entries))
    old = _read_manifest(out)
    present = {e["slug"] for e in entries}
    keys = {e["slug"]: entry_key(e, present, exporters) for e in entries}

    def intact(slug: str) -> bool:
        item = old["entries"].get(slug)
        if not item or item.get("key") != keys[slug]:
            return False
        return all(rel in old["files"] and (out / rel).is_file() for rel in item.get("files", []))

    todo = [e for e in entries if not intact(e["slug"])]
    report.unchanged = len(entries) - len(todo)
    memo: dict[str, int] = {}  # the same computation (see computation_key) is made once per build
    sources, owner = [], []
    for e in todo:
        ck = computation_key(e)
        if ck not in memo:
            memo[ck] = len(sources)
            sources.append(e)
        owner.append(memo[ck])
    values, stopped = compute_all(sources, exporters, jobs=max(1, jobs), cpu_seconds=cpu_seconds)
    report.computed = len(sources)
    new_entries: dict[str, Any] = {}
    new_files: dict[str, str] = {}
    for e, i in zip(todo, owner, strict=True):
        if i in values:
            computed = values[i] if sources[i] is e else _rebased(values[i], e, sources[i])
        else:
            oc = stopped[i]
            why = f"the computation stopped ({describe_limit(oc, cpu_seconds)})"
            report.problems.append(f"{e['slug']}: {why}")
            computed = {"failure": why, "files": {},
                        "orbits": None if STATIONARY_TAGS & set(e["document"]["tags"]) else {"error": NOT_STATIONARY}}
        made = _render(e, computed, present)
        for rel, data in sorted(made.items()):
            _write(out, rel, data, old["files"], report)
            new_files[rel] = _digest(data)
        new_entries[e["slug"]] = {"key": keys[e["slug"]], "files": sorted(made)}
        report.rendered.append(e["slug"])
    for e in entries:
        if e["slug"] in new_entries:
            continue
        item = old["entries"][e["slug"]]
        new_entries[e["slug"]] = item
        new_files.update({rel: old["files"][rel] for rel in item["files"]})
    shared = {"index.html": index_page(entries), **_static_files()}
    before = len(report.written)
    for rel, data in shared.items():
        _write(out, rel, data, old["files"], report)
        new_files[rel] = _digest(data)
    report.index_written = "index.html" in report.written[before:]
    for rel in sorted(set(old["files"]) - set(new_files)):
        try:
            (out / rel).unlink(missing_ok=True)
        except OSError:
            continue
        report.removed.append(rel)
    manifest = {"format": SITE_FORMAT, "renderer": RENDERER_VERSION,
                "entries": dict(sorted(new_entries.items())), "files": dict(sorted(new_files.items()))}
    text = json.dumps(manifest, indent=1, sort_keys=True) + "\n"
    _write(out, MANIFEST, text.encode("utf-8"), {}, report)
    if MANIFEST in report.written:
        report.written.remove(MANIFEST)
    return report


def computation_key(e: dict[str, Any]) -> str:
    """What the computed parts of an entry page (:func:`compute_entry`) depend on, hashed: the document
    without its presentation-only fields (id, title, summary, notes, references, tags: the tags count
    only through "stationary or static"), the status, and for a verified revision its hash (its exports
    name the entry and revision). Entries with the same key (variants of one metric under other names,
    unverified) are computed once per build."""
    doc = e["document"]
    inputs = {k: v for k, v in doc.items() if k not in ("id", "title", "summary", "notes", "references", "tags")}
    inputs["stationary"] = bool(STATIONARY_TAGS & set(doc["tags"]))
    inputs["status"] = e["status"]
    if e["status"] in _ACCEPTED:
        inputs["revision"] = [e["hash"], e["slug"], e["number"], e["created_at"], e["results"]]
    return hashlib.sha256(json.dumps(inputs, sort_keys=True, default=str).encode("utf-8")).hexdigest()


def _rebased(computed: dict[str, Any], e: dict[str, Any], owner: dict[str, Any]) -> dict[str, Any]:
    """The computed parts of ``owner``, an entry with the same computation key (unverified, so without
    exports), for ``e``: the figure's file name carries the id, and a message may name the source."""
    from gravicat.api.site.pages import safe_name

    out = {k: v for k, v in computed.items() if k not in ("files", "figure")}
    if owner["source"] != e["source"]:
        old, new = (json.dumps(x["source"])[1:-1] for x in (owner, e))
        out = json.loads(json.dumps(out).replace(old, new))
    out["files"] = {}
    if computed.get("figure"):
        out["figure"] = f"figures/{safe_name(e['slug'])}.svg"
        out["files"][out["figure"]] = computed["files"][computed["figure"]]
    return out
