"""HTML of the site: the index and the entry pages, from plain data (no database, no sympy here).

Every piece of catalogue text goes through :func:`html.escape`; only the MathML and SVG made by
:mod:`.parts` are inserted as markup. Orders are fixed (entries by id, charts in file order,
results by chart and check), so the same catalogue gives the same bytes.
"""

from __future__ import annotations

import json
import re
from html import escape
from importlib.resources import files
from string import Template
from typing import Any

_SAFE = re.compile(r"[^A-Za-z0-9_.-]+")


def safe_name(text: str) -> str:
    """A file-name and anchor-safe form of an id, chart or exporter name."""
    return _SAFE.sub("-", text).strip("-.") or "x"


def chart_anchor(chart: str) -> str:
    return f"chart-{safe_name(chart)}"


def entry_page(slug: str) -> str:
    return f"entries/{safe_name(slug)}.html"


def _template() -> Template:
    return Template(files("gravicat.api.site").joinpath("templates/page.html").read_text(encoding="utf-8"))


def page(title: str, body: str, *, root: str, script: bool = False) -> bytes:
    js = f'<script src="{root}static/site.js"></script>' if script else ""
    return _template().substitute(title=escape(title), root=root, body=body, script=js).encode("utf-8")


def status_html(status: str) -> str:
    s = escape(status)
    return f'<span class="status-{s}">{s}</span>'


def dimensions(data: dict[str, Any]) -> list[int]:
    return sorted({len(c["coordinates"]) for c in data["charts"].values()})


# --------------------------------------------------------------------------- index


def index_page(entries: list[dict[str, Any]]) -> bytes:
    """The index: one row per entry with search and filters (the form is shown by the script only)."""
    rows = []
    eqs, tags, statuses, dims = set(), set(), set(), set()
    for e in entries:
        d = e["document"]
        dim = dimensions(d)
        eqs.add(d["field-equations"])
        tags.update(d["tags"])
        statuses.add(e["status"])
        dims.update(dim)
        text = " ".join([d["id"], d["title"], d.get("summary", ""), d["field-equations"], *d["tags"]]).lower()
        rows.append(
            f'<tr data-text="{escape(text)}" data-equations="{escape(d["field-equations"])}" '
            f'data-status="{escape(e["status"])}" data-tags="{escape(" ".join(d["tags"]))}" '
            f'data-dimension="{" ".join(map(str, dim))}">'
            f'<td><a href="{entry_page(d["id"])}">{escape(d["title"])}</a><br><code>{escape(d["id"])}</code></td>'
            f'<td>{escape(d["field-equations"])}</td><td>{", ".join(map(str, dim))}</td>'
            f'<td>{"".join(f"<span class=tag>{escape(t)}</span>" for t in d["tags"])}</td>'
            f'<td>{status_html(e["status"])}</td>'
            f'<td><time datetime="{escape(e["created_at"])}">{escape(e["created_at"][:10])}</time> '
            f'(revision {e["number"]})</td></tr>')

    def options(values) -> str:
        return '<option value="">any</option>' + "".join(
            f'<option value="{escape(str(v))}">{escape(str(v))}</option>' for v in sorted(values))

    body = (
        "<h1>Spacetime catalogue</h1>"
        f"<p>{len(entries)} entries. Each links to its page: charts with line elements, parameters with "
        "ranges, stored check results, history and downloads.</p>"
        '<form id="filters" class="filters" role="search" hidden>'
        '<label for="search">Search<input id="search" type="search" autocomplete="off" '
        'placeholder="id, title, tag..."></label>'
        f'<label for="filter-equations">Field equations<select id="filter-equations">{options(eqs)}</select></label>'
        f'<label for="filter-status">Status<select id="filter-status">{options(statuses)}</select></label>'
        f'<label for="filter-dimension">Dimension<select id="filter-dimension">{options(dims)}</select></label>'
        f'<label for="filter-tag">Tag<select id="filter-tag">{options(tags)}</select></label>'
        '<output id="match-count" for="search" aria-live="polite"></output></form>'
        '<table id="entries"><caption>Entries of the catalogue (status: the worst stored check result of the '
        "latest revision)</caption><thead><tr><th scope=\"col\">entry</th><th scope=\"col\">field equations</th>"
        '<th scope="col">dimension</th><th scope="col">tags</th><th scope="col">status</th>'
        f'<th scope="col">last change</th></tr></thead><tbody>{"".join(rows)}</tbody></table>')
    return page("Spacetime catalogue", body, root="", script=True)


# --------------------------------------------------------------------------- entry page


def _link_target(target: str, present: set[str], own: str) -> str:
    """``ENTRY:CHART`` or ``CHART`` (of this entry) as a link when the page exists, else as text."""
    entry, _, chart = target.partition(":") if ":" in target else (own, "", target)
    if entry in present:
        href = ("" if entry == own else f"{safe_name(entry)}.html") + (f"#{chart_anchor(chart)}" if chart else "")
        return f'<a href="{href or "#"}"><code>{escape(target)}</code></a>'
    return f"<code>{escape(target)}</code> (not in this site)"


def _doi(ref: dict[str, str]) -> str:
    cite = escape(ref.get("citation", ""))
    doi = ref.get("doi")
    if doi:
        return f'{cite}. DOI: <a href="https://doi.org/{escape(doi, quote=True)}">{escape(doi)}</a>'
    return cite


def _parameters(d: dict[str, Any]) -> str:
    if not d["parameters"]:
        return "<p>No parameters.</p>"
    rows = "".join(
        f"<tr><th scope=\"row\"><code>{escape(n)}</code></th><td>{escape(p.get('description', ''))}</td>"
        f"<td>{escape(p.get('range', '') or '-')}</td><td>{escape(', '.join(p.get('assume', [])) or '-')}</td>"
        f"<td>{escape(p.get('default', '') or '-')}</td></tr>"
        for n, p in d["parameters"].items())
    return ('<table><thead><tr><th scope="col">parameter</th><th scope="col">meaning</th><th scope="col">range</th>'
            f'<th scope="col">assumptions</th><th scope="col">default</th></tr></thead><tbody>{rows}</tbody></table>')


def _chart(d: dict[str, Any], name: str, math: dict[str, Any], present: set[str]) -> str:
    c = d["charts"][name]
    out = [f'<section id="{chart_anchor(name)}"><h3>Chart <code>{escape(name)}</code></h3>',
           f"<p>Coordinates: {', '.join(f'<code>{escape(x)}</code>' for x in c['coordinates'])}"
           + (f"; functions: {', '.join(f'<code>{escape(f)}</code>' for f in c['functions'])}"
              if c["functions"] else "") + "</p>"]
    if "error" in math:
        from gravicat.api.site.parts import unavailable

        out.append(unavailable(f"typeset form: {math['error']}"))
        written = c.get("line-element", str(c.get("metric")))
        out.append(f"<p>Line element as written: <code>{escape(written)}</code></p>")
    else:
        out.append("<h4>Line element</h4>" + math["line"])
        if math["define"]:
            out.append("<h4>Definitions</h4>" + "".join(m for _, m in math["define"]))
        if math["domain"]:
            out.append("<h4>Domain</h4>" + "".join(math["domain"]))
        if math["invariants"]:
            out.append("<h4>Invariants</h4>")
            for _, m, source in math["invariants"]:
                out.append(m + (f"<p class=\"source\">Source: {escape(source)}</p>" if source else ""))
    if c["transforms"]:
        items = "".join(f"<li>to {_link_target(t, present, d['id'])}: "
                        + ", ".join(f"<code>{escape(k)} = {escape(v)}</code>" for k, v in sorted(m.items()))
                        + "</li>" for t, m in sorted(c["transforms"].items()))
        out.append(f"<h4>Transforms</h4><ul>{items}</ul>")
    limits = [(n, lim) for n, lim in sorted(d["limits"].items()) if lim["chart"] == name]
    if limits:
        items = "".join(f"<li><code>{escape(n)}</code>: "
                        + ", ".join(f"<code>{escape(k)} = {escape(v)}</code>" for k, v in sorted(lim["set"].items()))
                        + (" with " + ", ".join(f"<code>{escape(k)} = {escape(v)}</code>"
                                                for k, v in sorted(lim["coordinates"].items()))
                           if lim["coordinates"] else "")
                        + f" reduces to {_link_target(lim['reduces-to'], present, d['id'])}</li>"
                        for n, lim in limits)
        out.append(f"<h4>Limits</h4><ul>{items}</ul>")
    out.append("</section>")
    return "".join(out)


def _results(results: list[dict[str, Any]]) -> str:
    if not results:
        return "<p>No checks are stored for this revision: it is unverified.</p>"
    rows = []
    for r in results:
        ce = r.get("counterexample")
        ce_html = f"<pre>{escape(json.dumps(ce, indent=1, sort_keys=True, ensure_ascii=False))}</pre>" if ce else ""
        rows.append(f"<tr><td><code>{escape(r['chart'])}</code></td><td>{escape(r['check'])}</td>"
                    f"<td>{status_html(r['status'])}</td><td>{escape(r['method'])}</td>"
                    f"<td>{escape(r.get('detail') or '')}{ce_html}</td>"
                    f"<td>{escape(r['verifier'])} {escape(str(r['version']))}</td></tr>")
    return ('<table class="results"><thead><tr><th scope="col">chart</th><th scope="col">check</th>'
            '<th scope="col">status</th><th scope="col">method</th><th scope="col">detail and counterexample</th>'
            f'<th scope="col">verifier</th></tr></thead><tbody>{"".join(rows)}</tbody></table>')


def _history(rows: list[dict[str, Any]]) -> str:
    items = []
    for h in rows:
        fields = ", ".join(h.get("changed_fields", [])[:12])
        more = " ..." if len(h.get("changed_fields", [])) > 12 else ""
        items.append(
            f"<tr><td>{h['number']}</td><td><code>{escape(h['hash'][:12])}</code></td>"
            f"<td><time datetime=\"{escape(h['created_at'])}\">{escape(h['created_at'][:19])}</time></td>"
            f"<td>{escape(h.get('author') or '-')}</td><td>{escape(h.get('message') or '')}</td>"
            f"<td>{escape(h.get('summary') or '')}{(': ' + escape(fields + more)) if fields else ''}</td>"
            f"<td>{status_html(h['status'])}</td></tr>")
    return ('<table class="history"><thead><tr><th scope="col">revision</th><th scope="col">hash</th>'
            '<th scope="col">date</th><th scope="col">author</th><th scope="col">message</th>'
            f'<th scope="col">what changed</th><th scope="col">status</th></tr></thead><tbody>{"".join(items)}'
            "</tbody></table>")


def entry_html(e: dict[str, Any], computed: dict[str, Any], present: set[str]) -> bytes:
    """One entry page. ``computed``: ``math`` (chart -> :func:`.parts.chart_mathml`), ``orbits``
    (:func:`.parts.orbit_section`, absent for a non-stationary entry), ``downloads``, ``figure``
    (the SVG file name) and ``failure`` (why the computed parts are missing, if they are)."""
    from gravicat.api.site.parts import unavailable

    d = e["document"]
    slug = d["id"]
    out = [f"<article><h1>{escape(d['title'])}</h1>",
           f"<p><code>{escape(slug)}</code>, revision {e['number']} (<code>{escape(e['hash'][:12])}</code>), "
           f"{escape(d['field-equations'])}, dimension {', '.join(map(str, dimensions(d)))}, "
           f"status {status_html(e['status'])}</p>",
           f"<p>{''.join(f'<span class=tag>{escape(t)}</span>' for t in d['tags'])}</p>",
           f"<p class=\"summary\">{escape(d.get('summary', ''))}</p>",
           '<nav aria-label="sections"><ul><li><a href="#parameters">Parameters</a></li><li><a href="#charts">Charts'
           '</a></li><li><a href="#checks">Checks</a></li>'
           + ('<li><a href="#orbits">Orbits</a></li>' if "orbits" in computed else "")
           + '<li><a href="#history">History</a></li><li><a href="#downloads">Downloads</a></li></ul></nav>']
    if d.get("notes"):
        paras = "".join(f"<p>{escape(p.strip())}</p>" for p in d["notes"].split("\n\n") if p.strip())
        out.append(f"<section id=\"notes\"><h2>Notes</h2>{paras}</section>")
    if d["references"]:
        out.append("<section id=\"references\"><h2>References</h2><ol>"
                   + "".join(f"<li>{_doi(r)}</li>" for r in d["references"]) + "</ol></section>")
    out.append(f"<section id=\"parameters\"><h2>Parameters</h2>{_parameters(d)}</section>")
    failure = computed.get("failure")
    out.append("<section id=\"charts\"><h2>Charts</h2>")
    for name in d["charts"]:
        math = computed.get("math", {}).get(name) or {"error": failure or "not computed"}
        out.append(_chart(d, name, math, present))
    out.append("</section>")
    out.append(f"<section id=\"checks\"><h2>Checks of the latest revision</h2>{_results(e['results'])}</section>")
    if "orbits" in computed:
        orb = computed["orbits"]
        out.append("<section id=\"orbits\"><h2>Circular orbits and landmarks</h2>")
        if orb is None or "error" in orb:
            out.append(unavailable(orb["error"] if orb else failure or "not computed"))
        else:
            out.append(orb["html"])
            if computed.get("figure"):
                alt = (f"Effective potential E of prograde equatorial geodesics of {d['title']} against the radius, "
                       "for the angular momenta of circular orbits at three radii, with the ISCO, photon orbit and "
                       "horizons marked")
                out.append(f"<figure><img src=\"../{escape(computed['figure'])}\" alt=\"{escape(alt)}\" "
                           f"width=\"700\" height=\"420\"><figcaption>Effective potential (chart "
                           f"<code>{escape(orb['chart'])}</code>, parameters at their defaults)</figcaption></figure>")
            else:
                out.append(unavailable("effective-potential figure: " + (orb.get("figure_note") or "no circular "
                                       "orbit to take an angular momentum from")))
        out.append("</section>")
    out.append(f"<section id=\"history\"><h2>History</h2>{_history(e['history'])}</section>")
    out.append("<section id=\"downloads\"><h2>Downloads</h2>")
    out.append(f"<ul><li><a href=\"../{escape(computed['metric_file'])}\" download>metric file</a> "
               "(canonical JSON; read by <code>gravicat add</code>)</li>")
    dl = computed.get("downloads")
    if dl:
        for name, chart, fname in dl["links"]:
            what = f"{escape(name)}" + (f", chart <code>{escape(chart)}</code>" if chart else "")
            out.append(f"<li><a href=\"../downloads/{escape(fname)}\" download>{what}</a></li>")
    out.append("</ul>")
    if dl is None:
        if e["status"] in ("pass", "skipped", "inconclusive"):
            out.append(unavailable(f"exports: {failure or 'not computed'}"))
        else:
            out.append(f"<p>Exports are offered for verified revisions only; this revision is "
                       f"{status_html(e['status'])} (run <code>gravicat verify {escape(slug)}</code>).</p>")
    else:
        for name, reason in dl["problems"]:
            out.append(unavailable(f"{name}: {reason}"))
    out.append("</section></article>")
    return page(f"{d['title']} - spacetime catalogue", "".join(out), root="../")
