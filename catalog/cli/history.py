"""Comparison, history and search commands: compare, history, diff, revert, find."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from gravicat.cli._base import AppContext, app_context, merge_set_options, open_subject, reports_errors
from gravicat.cli._output import emit_json, emit_table, short

app = typer.Typer()

JsonOpt = Annotated[bool, typer.Option("--json", help="Print JSON (documented shape).")]


# --------------------------------------------------------------------------- compare


def resolve_subject(app_ctx: AppContext, arg: str):
    """One side of ``compare``: ``FILE[:CHART]`` or ``ID[@REVISION][:CHART]`` (default: the first chart)."""
    from gravicat.checks import worst
    from gravicat.physics.equivalence import Subject

    found = open_subject(app_ctx, arg)
    doc = found.document
    chart = found.chart or doc.chart_names[0]
    if found.is_file:
        return Subject(doc, chart, arg)
    rows = [r for r in found.checks if r["chart"] == chart]
    status = worst(r["status"] for r in rows).value if rows else "unverified"
    return Subject(doc, chart, arg, found.revision_hash, found.revision_number, status)


ROWS = [("entry:chart", lambda s: f"{s['entry']}:{s['chart']}"),
        ("title", lambda s: s["title"]),
        ("revision", lambda s: f"{s['number']} ({s['revision'][:12]})" if s["revision"] else "file, not stored"),
        ("coordinates", lambda s: ", ".join(s["coordinates"])),
        ("signature", lambda s: s["signature"] or f"? ({s['signature_note']})"),
        ("field equations", lambda s: f"{s['field_equations']} (checks: {s['status']})"),
        ("parameters", lambda s: "; ".join(
            (f"{p['name']} = {p['matched']} (--set)" if p["matched"] else (p["range"] or p["name"]))
            for p in s["parameters"]) or "none"),
        ("obvious symmetries", lambda s: f"{s['symmetries']['dimension']}"
                                         + (f" ({', '.join(s['symmetries']['coordinates'])})"
                                            if s["symmetries"]["coordinates"] else ""))]
INVARIANT_LABELS = {"ricci-scalar": "Ricci scalar", "kretschmann": "Kretschmann", "weyl-square": "Weyl square"}


@app.command("compare")
@reports_errors
def compare(
    ctx: typer.Context,
    first: Annotated[str, typer.Argument(metavar="A", help="FILE[:CHART] or ID[@REVISION][:CHART].",
                                         show_default=False)],
    second: Annotated[str, typer.Argument(metavar="B", help="FILE[:CHART] or ID[@REVISION][:CHART].",
                                          show_default=False)],
    coordinate_map: Annotated[list[str] | None, typer.Option(
        "--map", metavar="COORD=EXPR", help="Coordinate map: coordinates of one chart as expressions in the "
                                            "other's, e.g. --map 'r=R*(1+M/(2*R))**2' (repeatable; coordinates "
                                            "not given map to the same name). Parameters of either chart may be "
                                            "used by their own names; --set identifications are substituted.",
        show_default=False)] = None,
    settings: Annotated[list[str] | None, typer.Option(
        "--set", metavar="PARAM=EXPR", help="Parameter identification: B's PARAM equals EXPR in A's "
                                            "parameters, e.g. --set Q=e or --set a=0 (repeatable, or "
                                            "comma-separated).", show_default=False)] = None,
    match: Annotated[list[str] | None, typer.Option(
        "--match", metavar="PARAM=EXPR", hidden=True, help="Deprecated spelling of --set.",
        show_default=False)] = None,
    budget: Annotated[float, typer.Option("--budget", metavar="S", min=0.5, help="Seconds per symbolic step.")] = 20.0,
    no_search: Annotated[bool, typer.Option("--no-search", help="Do not look for a coordinate map from the "
                                                                "curvature scalars.")] = False,
    as_json: JsonOpt = False,
) -> None:
    """Compare two charts side by side and decide whether they are the same spacetime.

    The verdict is identical, equivalent, not-equivalent or undecided, always with its evidence;
    'equivalent' and 'not-equivalent' are only given with a proof. Exit code 0 for every verdict.
    """
    from gravicat.physics.equivalence import compare as run

    app_ctx = app_context(ctx)
    a = resolve_subject(app_ctx, first)
    b = resolve_subject(app_ctx, second)
    match = merge_set_options(settings, match, "--match")
    result = run(a, b, match=match, coordinate_map=coordinate_map or (), budget=budget,
                 search_map=not no_search)
    if as_json:
        emit_json(result.to_json())
        return
    sa, sb = result.sides
    rows = [[label, short(fn(sa), 44), short(fn(sb), 44)] for label, fn in ROWS]
    long_forms = []
    for key, label in INVARIANT_LABELS.items():
        va, vb = sa["invariants"][key], sb["invariants"][key]
        rows.append([label, short(va, 44) if va is not None else "-", short(vb, 44) if vb is not None else "-"])
        if (va and len(va) > 44) or (vb and len(vb) > 44):
            long_forms.append((label, va, vb))
    for key in sa["invariants"]:
        if key not in INVARIANT_LABELS and key in sb["invariants"]:
            va, vb = sa["invariants"][key], sb["invariants"][key]
            rows.append([key, short(va, 44), short(vb, 44)])
            if len(va) > 44 or len(vb) > 44:
                long_forms.append((key, va, vb))
    emit_table(rows, ["", f"A: {short(first, 40)}", f"B: {short(second, 40)}"])
    for side, key in ((sa, "A"), (sb, "B")):
        if side["invariants_note"]:
            typer.echo(f"{key}: curvature {side['invariants_note']}")
    if long_forms:
        typer.echo("\ncurvature invariants in full:")
        for label, va, vb in long_forms:
            typer.echo(f"  {label}\n    A: {va}\n    B: {vb}")
    typer.echo(f"\nverdict: {result.verdict} ({result.summary})")
    typer.echo("evidence:")
    for ev in result.evidence:
        typer.echo(f"  - [{ev.kind}: {ev.result}] {ev.detail}")


# --------------------------------------------------------------------------- history, diff, revert


def entry_id(text: str, command: str) -> tuple[str, str | None]:
    """(entry id, revision or None) of a command that works on a whole entry's history: the one subject
    syntax, where a file or a ``:CHART`` makes no sense (one-line errors say so)."""
    from gravicat.api.subjects import parse_subject
    from gravicat.errors import InputError

    ref = parse_subject(text)
    if ref.is_file:
        raise InputError(text, None, f"{command} works on catalogue entries (a file has no history)")
    if ref.chart is not None:
        raise InputError(text, None, f"{command} works on a whole entry; drop ':{ref.chart}'")
    return ref.entry, ref.revision


def _when(iso: str) -> str:
    return iso[:16].replace("T", " ")


@app.command("history")
@reports_errors
def history(
    ctx: typer.Context,
    entry: Annotated[str, typer.Argument(help="Entry id.", show_default=False)],
    as_json: JsonOpt = False,
) -> None:
    """Revisions of an entry, newest first: hash, date, author and source, what changed, check status."""
    from gravicat.api import history as hist

    entry, at = entry_id(entry, "history")
    if at is not None:
        from gravicat.errors import InputError

        raise InputError(f"{entry}@{at}", None, "history lists every revision; give the entry id alone")
    with app_context(ctx).transaction() as session:
        rows = hist.history_rows(session, entry)
    if as_json:
        emit_json({"id": entry, "revisions": rows})
        return
    table = []
    for r in rows:
        status = r["status"]
        if status == "unverified" and r["same_content_as"] is not None and r["same_content_as"] != r["number"]:
            status = f"unverified (same content as {r['same_content_as']}: {r['status_of_same_content']})"
        who = r["author"] or "?"
        if r["source"]:
            who += f" <- {short(Path(r['source']).name if '/' in r['source'] else r['source'], 28)}"
        table.append([r["number"], r["hash"][:12], _when(r["created_at"]), short(who, 40), status,
                      short(r["message"] or "", 30), short(r["summary"], 60)])
    emit_table(table, ["rev", "hash", "date (UTC)", "author <- source", "checks", "message", "changes"])


@app.command("diff")
@reports_errors
def diff(
    ctx: typer.Context,
    entry: Annotated[str, typer.Argument(help="Entry id.", show_default=False)],
    rev_a: Annotated[str | None, typer.Argument(metavar="REV_A", help="Older revision (number or hash prefix); "
                                                "default: the one before REV_B.", show_default=False)] = None,
    rev_b: Annotated[str | None, typer.Argument(metavar="REV_B", help="Newer revision; default: the latest.",
                                                show_default=False)] = None,
    budget: Annotated[float, typer.Option("--budget", metavar="S", min=0.5, help="Seconds per symbolic proof.")] = 10.0,
    as_json: JsonOpt = False,
) -> None:
    """Field-level diff of two revisions: metric components as symbolic differences, and changed check results."""
    from gravicat.api import history as hist

    entry, at = entry_id(entry, "diff")
    if at is not None:  # ID@REV [REV_B] reads as ID REV [REV_B]
        if rev_b is not None:
            from gravicat.errors import InputError

            raise InputError(f"{entry}@{at}", None, "give at most two revisions (ID@REV_A [REV_B] or ID REV_A REV_B)")
        rev_a, rev_b = at, rev_a
    with app_context(ctx).transaction() as session:
        d = hist.diff(session, entry, rev_a, rev_b, budget=budget)

        def ref(r):
            return {"number": r.number, "hash": r.hash, "created_at": r.created_at.isoformat(),
                    "author": r.provenance.author if r.provenance else None, "message": r.message}

        out = {"id": entry, "from": ref(d.old) if d.old is not None else None, "to": ref(d.new),
               "fields": [c.to_json() for c in d.fields], "metric": [m.to_json() for m in d.metric],
               "checks": [c.to_json() for c in d.checks]}
    if as_json:
        emit_json(out)
        return
    new = out["to"]
    if out["from"] is None:
        typer.echo(f"{entry}: revision {new['number']} ({new['hash'][:12]}) is the first; nothing to compare")
        return
    old = out["from"]
    typer.echo(f"{entry}: revision {old['number']} ({old['hash'][:12]}) -> {new['number']} ({new['hash'][:12]})")
    if not out["fields"]:
        typer.echo("fields: no change (same content)")
    else:
        typer.echo("fields:")
        for c in out["fields"]:
            if c["change"] == "changed":
                typer.echo(f"  ~ {c['path']}: {_val(c['old'])} -> {_val(c['new'])}")
            elif c["change"] == "added":
                typer.echo(f"  + {c['path']}: {_val(c['new'])}")
            else:
                typer.echo(f"  - {c['path']}: {_val(c['old'])}")
    if out["metric"]:
        typer.echo("metric (new - old, symbolic):")
        for m in out["metric"]:
            text = m["difference"] or m["note"]
            typer.echo(f"  {m['chart']}: {m['component']} = {text}" if m["difference"] else f"  {m['chart']}: {text}")
            if m["difference"] and m["note"]:
                typer.echo(f"    ({m['note']})")
    typer.echo("check results:" if out["checks"] else "check results: no change")
    for c in out["checks"]:
        typer.echo(f"  {c['chart']} {c['check']}: {c['old'] or 'none'} -> {c['new'] or 'none'}")


def _val(v) -> str:
    import json

    text = v if isinstance(v, str) else json.dumps(v, ensure_ascii=False)
    return short(text, 160)


@app.command("revert")
@reports_errors
def revert(
    ctx: typer.Context,
    entry: Annotated[str, typer.Argument(metavar="ID[@REV]", help="Entry id.", show_default=False)],
    rev: Annotated[str | None, typer.Argument(metavar="REV", help="Revision to restore (number or hash prefix; "
                                                                  "or give ID@REV).", show_default=False)] = None,
    author: Annotated[str | None, typer.Option("--author", metavar="NAME", help="Author of the new revision. "
                                               "Env: GRAVICAT_AUTHOR; default: login name.")] = None,
    message: Annotated[str, typer.Option("--message", "-m", metavar="TEXT", help="Why (added to 'revert to N').")] = "",
) -> None:
    """Restore an old revision as a new revision (same content hash, next number); nothing is deleted."""
    from gravicat import __version__
    from gravicat.api import history as hist
    from gravicat.config import load_settings

    entry, at = entry_id(entry, "revert")
    if (at is None) == (rev is None):
        from gravicat.errors import InputError

        raise InputError("REV", None, "give the revision to restore once: ID REV or ID@REV")
    rev = rev if rev is not None else at
    if not rev.strip():  # issue 14 item 12: an empty revision is not "the latest"
        from gravicat.errors import InputError

        raise InputError("REV", None, "is empty; give a revision number or a hash prefix (see 'gravicat history')")
    who = load_settings(author=author).author
    with app_context(ctx).transaction() as session:
        old, stored = hist.revert(session, entry, rev, author=who, message=message, tool_version=__version__)
        number = old.number
    if stored.action == "unchanged":
        typer.echo(f"{entry}: the latest revision ({stored.number}) already has the content of revision "
                   f"{number}; nothing stored")
        return
    typer.echo(f"{entry}: revision {number} restored as revision {stored.number} ({stored.hash[:12]})")


# --------------------------------------------------------------------------- find


@app.command("find")
@reports_errors
def find(
    ctx: typer.Context,
    text: Annotated[list[str] | None, typer.Argument(metavar="WORDS", help="Words that must all appear in "
                                                     "the id, title or summary.", show_default=False)] = None,
    tag: Annotated[list[str] | None, typer.Option(
        "--tag", metavar="TAG", help="Has this tag (repeatable: all).", show_default=False)] = None,
    equations: Annotated[list[str] | None, typer.Option(
        "--equations", metavar="CLAIM", help="Field-equation claim (repeatable: any of them).",
        show_default=False)] = None,
    status: Annotated[str | None, typer.Option(
        "--status", metavar="STATUS", help="Check status of the latest revision: verified (= pass), pass, "
                                           "fail, inconclusive, error, skipped or unverified.",
        show_default=False)] = None,
    param: Annotated[list[str] | None, typer.Option(
        "--param", metavar="NAME", help="Has a parameter of this name (repeatable).", show_default=False)] = None,
    coordinate: Annotated[list[str] | None, typer.Option(
        "--coordinate", metavar="NAME", help="Some chart has a coordinate of this name (repeatable).",
        show_default=False)] = None,
    reference: Annotated[str | None, typer.Option(
        "--reference", metavar="TEXT", help="Text in a reference (citation or DOI).", show_default=False)] = None,
    transform_to: Annotated[str | None, typer.Option(
        "--transform-to", metavar="CHART", help="Some chart declares a transform to a chart of this name.",
        show_default=False)] = None,
    reduces_to: Annotated[str | None, typer.Option(
        "--reduces-to", metavar="ENTRY[:CHART]", help="Declares a limit that reduces to this entry (through a "
                                                      "chain of limits unless --direct).", show_default=False)] = None,
    direct: Annotated[bool, typer.Option("--direct", help="With --reduces-to: direct limits only.")] = False,
    sort: Annotated[str, typer.Option("--sort", metavar="KEY", help="id, title or updated (newest first).")] = "id",
    limit: Annotated[int, typer.Option("--limit", metavar="N", min=1, help="Results per page.")] = 50,
    page: Annotated[int, typer.Option("--page", metavar="P", min=1, help="Page number.")] = 1,
    as_json: JsonOpt = False,
) -> None:
    """Search the catalogue; every filter given must hold. Sorted by id unless --sort; paged."""
    from gravicat.store.search import Query, find_entries

    query = Query(tags=tuple(tag or ()), equations=tuple(equations or ()), status=status, params=tuple(param or ()),
                  coordinates=tuple(coordinate or ()), reference=reference, text=" ".join(text or ()) or None,
                  transform_to=transform_to,
                  reduces_to=reduces_to, direct=direct, sort=sort, limit=limit, offset=(page - 1) * limit)
    with app_context(ctx).transaction() as session:
        result = find_entries(session, query)
        rows = [{
            "id": h.slug, "title": h.revision.title, "field_equations": h.revision.field_equations,
            "tags": sorted(t.name for t in h.revision.tags), "charts": [c.name for c in h.revision.charts],
            "parameters": [p.name for p in h.revision.parameters], "revision": h.revision.hash,
            "number": h.revision.number, "updated": h.revision.created_at.isoformat(), "status": h.status,
            **({"via": h.via} if reduces_to is not None else {}),
        } for h in result.hits]
    pages = max(1, -(-result.total // limit))
    if as_json:
        emit_json({"total": result.total, "page": page, "pages": pages, "limit": limit, "results": rows})
        return
    table = [[r["id"], short(r["title"], 32), r["field_equations"], r["status"], short(", ".join(r["charts"]), 30),
              short(", ".join(r["tags"]), 34)] + ([" -> ".join(r["via"])] if reduces_to is not None else [])
             for r in rows]
    emit_table(table, ["id", "title", "equations", "status", "charts", "tags"]
               + (["limit chain"] if reduces_to is not None else []))
    if result.total and not rows:
        typer.echo(f"{result.total} match{'es' if result.total != 1 else ''}; page {page} is past the last page "
                   f"({pages})")
    elif result.total:
        first = result.offset + 1
        typer.echo(f"{result.total} match{'es' if result.total != 1 else ''}; showing {first}-"
                   f"{result.offset + len(rows)} (page {page} of {pages})"
                   + (f"; next: --page {page + 1}" if page < pages else ""))
