"""Metric files: decoding, validation, canonical form, content hash, and sympy charts.

A metric file (TOML, or the JSON canonical form) is decoded into a plain
dict, validated field by field into a :class:`MetricDocument` whose ``data``
is the canonical form: fixed key order, expressions re-printed from their
checked syntax trees, tags sorted. The revision hash is the SHA-256 of the
canonical JSON, so the same spacetime written with other spacing, key order
or tag order has the same hash.

Validation needs no sympy; :func:`build_chart` turns one chart into sympy
objects (:class:`gravicat.format.chartspec.ChartSpec`) for the verifiers.
"""

from __future__ import annotations

import hashlib
import json
import keyword
import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from gravicat.errors import InputError
from gravicat.format.declarations import check_declarations
from gravicat.format.expr import (
    RESERVED,
    Names,
    canonical,
    check_expression,
    check_expression_size,
    check_relation,
    names_in,
)
from gravicat.format.size import check_chart_size

FORMAT = "gravicat-metric/1"
EXPORT_FORMAT = "gravicat-export/1"
MAX_FILE_BYTES = 2_000_000

FIELD_EQUATIONS = ("vacuum", "lambda-vacuum", "electrovacuum", "perfect-fluid", "dust", "null-dust", "none")
ASSUMPTIONS = ("real", "positive", "nonnegative", "negative", "nonzero", "integer")
CONFLICTING_ASSUMPTIONS = (("positive", "negative"), ("nonnegative", "negative"))
INVARIANT_NAMES = ("ricci-scalar", "kretschmann", "weyl-square")

SLUG = re.compile(r"^[a-z0-9][a-z0-9-]{0,79}$")
IDENT = re.compile(r"^[A-Za-z][A-Za-z0-9_]{0,39}$")
_NAME = r"[A-Za-z][A-Za-z0-9_]*"
FUNCTION_DECL = re.compile(rf"^\s*({_NAME})\s*\(\s*({_NAME}(?:\s*,\s*{_NAME})*)\s*\)\s*$")

TOP_KEYS = ("format", "id", "title", "summary", "field-equations", "tags", "references", "notes", "flat-when",
            "parameters", "charts", "limits", "kind")
PARAM_KEYS = ("description", "assume", "range", "default")
CHART_KEYS = ("coordinates", "domain", "functions", "define", "line-element", "metric", "cosmological-constant",
              "potential", "fluid", "null-dust", "observers", "transforms", "invariants",
              "petrov-type", "killing", "killing-tensors", "energy-conditions")  # the last four: format/declarations.py
LIMIT_KEYS = ("chart", "set", "coordinates", "reduces-to")


@dataclass(frozen=True)
class RawDocument:
    """A decoded file: plain TOML/JSON values, not yet validated."""

    data: dict[str, Any]
    source: str


@dataclass(frozen=True)
class MetricDocument:
    """A validated metric file. ``data`` is the canonical form (JSON-ready)."""

    data: dict[str, Any]
    source: str

    @property
    def id(self) -> str:
        return self.data["id"]

    @property
    def title(self) -> str:
        return self.data["title"]

    @property
    def chart_names(self) -> list[str]:
        return list(self.data["charts"])

    def canonical_json(self, indent: int | None = None) -> str:
        return canonical_json(self.data, indent=indent)

    @property
    def hash(self) -> str:
        return content_hash(self.data)


def canonical_json(data: dict[str, Any], indent: int | None = None) -> str:
    if indent is None:
        return json.dumps(data, ensure_ascii=False, separators=(",", ":"))
    return json.dumps(data, ensure_ascii=False, indent=indent)


def content_hash(data: dict[str, Any]) -> str:
    return hashlib.sha256(canonical_json(data).encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------- decoding


def _read_bytes(path: Path) -> bytes:
    try:
        size = path.stat().st_size
    except OSError as exc:
        raise InputError(str(path), None, f"cannot read file ({exc.strerror or exc})") from None
    if not path.is_file():
        raise InputError(str(path), None, "not a regular file")
    if size > MAX_FILE_BYTES:
        raise InputError(str(path), None, f"file is {size} bytes (limit {MAX_FILE_BYTES})")
    try:
        return path.read_bytes()
    except OSError as exc:
        raise InputError(str(path), None, f"cannot read file ({exc.strerror or exc})") from None


def _text(path: Path) -> str:
    try:
        text = _read_bytes(path).decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(str(path), None, f"not UTF-8 text (byte {exc.start})") from None
    return text.removeprefix("\ufeff")  # a UTF-8 byte-order mark is accepted (issue 14 item 12)


def decode_toml(path: Path) -> RawDocument:
    import tomllib

    text = _text(path)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(str(path), None, f"malformed TOML: {exc}") from None
    except (RecursionError, ValueError, MemoryError) as exc:
        raise InputError(str(path), None, f"malformed TOML: {type(exc).__name__} (nested too deeply "
                                          "or a number too large)") from None
    return RawDocument(data, str(path))


def decode_json(path: Path) -> RawDocument:
    text = _text(path)
    try:
        data = json.loads(text, parse_constant=_refuse_constant)
    except (json.JSONDecodeError, ValueError) as exc:
        raise InputError(str(path), None, f"malformed JSON: {exc}") from None
    except (RecursionError, MemoryError) as exc:
        raise InputError(str(path), None, f"malformed JSON: {type(exc).__name__} (nested too deeply)") from None
    if isinstance(data, dict) and data.get("format") == EXPORT_FORMAT and isinstance(data.get("metric"), dict):
        data = data["metric"]
    if not isinstance(data, dict):
        raise InputError(str(path), None, "a metric file must hold one object/table at the top")
    return RawDocument(data, str(path))


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not a number a metric file may hold")


def decode_builtin(path: Path) -> RawDocument | None:
    """Decode by file ending (``.toml``, ``.json``); None for other endings."""
    suffix = path.suffix.lower()
    if suffix == ".toml":
        return decode_toml(path)
    if suffix == ".json":
        return decode_json(path)
    return None


def load_file(path: str | Path, pm=None) -> MetricDocument:
    """Read and validate one metric file.

    With a plugin manager, the ``read_metric_source`` hook decides who reads
    it (the built-in reader plugin handles TOML and JSON); without one, the
    built-in decoders are used directly.
    """
    path = Path(path)
    if not path.exists():
        raise InputError(str(path), None, "no such file")
    raw = pm.hook.read_metric_source(path=path) if pm is not None else decode_builtin(path)
    if raw is None:
        raise InputError(str(path), None, "unknown file type (expected .toml or .json)")
    return validate(raw.data, raw.source)


# --------------------------------------------------------------------------- validation


class _V:
    """Validation state for one document."""

    def __init__(self, source: str):
        self.source = source

    def fail(self, field: str | None, problem: str):
        raise InputError(self.source, field, problem)

    def table(self, value, field: str, allowed: tuple[str, ...] | None = None) -> dict:
        if not isinstance(value, dict):
            self.fail(field, f"must be a table, got {_kind(value)}")
        if allowed is not None:
            for key in value:
                if key not in allowed:
                    hint = _closest(key, allowed)
                    self.fail(f"{field}.{key}" if field else key,
                              "unknown key" + (f" (did you mean '{hint}'?)" if hint else ""))
        return value

    def string(self, value, field: str, *, max_len: int = 20_000, multiline: bool = False) -> str:
        if not isinstance(value, str):
            self.fail(field, f"must be a string, got {_kind(value)}")
        if len(value) > max_len:
            self.fail(field, f"is {len(value)} characters long (limit {max_len})")
        bad = _CONTROL.search(value)
        if bad is None and not multiline:
            bad = _LINE_BREAK.search(value)
        if bad is not None:
            self.fail(field, f"contains the control character U+{ord(bad.group()):04X} at position {bad.start()} "
                             "(text fields may not hold control characters" + ("; tab and newline are fine here)"
                                                                               if multiline else ")"))
        return value

    def str_list(self, value, field: str) -> list[str]:
        if not isinstance(value, list):
            self.fail(field, f"must be a list of strings, got {_kind(value)}")
        return [self.string(v, f"{field}[{i}]", max_len=2_000) for i, v in enumerate(value)]

    def ident(self, name, field: str, taken: dict[str, str]) -> str:
        if not isinstance(name, str) or not IDENT.match(name):
            self.fail(field, f"'{name}' is not a valid name (a letter, then letters, digits or '_')")
        if name in RESERVED or keyword.iskeyword(name) or keyword.issoftkeyword(name):
            self.fail(field, f"'{name}' is reserved (a function, constant or keyword name)")
        if name in taken:
            self.fail(field, f"'{name}' is already declared as a {taken[name]}")
        return name

    def expr(self, text, names: Names, field: str) -> str:
        if isinstance(text, bool) or not isinstance(text, (str, int, float)):
            self.fail(field, f"must be an expression string, got {_kind(text)}")
        return canonical(check_expression(text, names, source=self.source, field=field))

    def relation(self, text, names: Names, field: str) -> str:
        if not isinstance(text, str):
            self.fail(field, f"must be an inequality string, got {_kind(text)}")
        rels = check_relation(text, names, source=self.source, field=field)
        out = rels[0].text()
        for rel in rels[1:]:
            out += f" {rel.op} {canonical(rel.right)}"
        return out


# C0 controls but tab and newline, DEL, C1 controls, bidirectional overrides and isolates (issue 14
# items 5, 11): refused in every text field; tab and newline only where a field allows several lines
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\u2028\u2029]")
_LINE_BREAK = re.compile("[\t\n]")


def _kind(value) -> str:
    return {dict: "a table", list: "a list", str: "a string", bool: "a boolean", int: "an integer",
            float: "a number"}.get(type(value), type(value).__name__)


def _closest(key: str, allowed) -> str | None:
    import difflib

    match = difflib.get_close_matches(str(key), list(allowed), n=1)
    return match[0] if match else None


def validate(raw: dict[str, Any], source: str) -> MetricDocument:
    """Check a decoded document and return its canonical form. Raises InputError."""
    v = _V(source)
    v.table(raw, "", TOP_KEYS)
    from gravicat.format import initialdata  # kind = "initial-data": a 3-geometry (format/initialdata.py)

    kind = initialdata.check_kind(v, raw)
    if "format" in raw and raw["format"] != FORMAT:
        v.fail("format", f"'{raw['format']}' is not a format this gravicat reads ({FORMAT})")
    for key in ("id", "title", "field-equations", "charts"):
        if key not in raw:
            v.fail(key, "missing (required)")
    entry_id = v.string(raw["id"], "id", max_len=80)
    if not SLUG.match(entry_id):
        v.fail("id", f"'{entry_id}' is not a slug (lowercase letters, digits and '-', starting with a letter or digit)")
    title = v.string(raw["title"], "title", max_len=200).strip()
    if not title:
        v.fail("title", "is empty")
    summary = v.string(raw.get("summary", ""), "summary", max_len=2_000).strip()
    claim = v.string(raw["field-equations"], "field-equations")
    claims = initialdata.CLAIMS if kind == initialdata.KIND else FIELD_EQUATIONS
    if claim not in claims:
        v.fail("field-equations", f"'{claim}' is not one of {', '.join(claims)}")
    tags = v.str_list(raw.get("tags", []), "tags")
    for i, tag in enumerate(tags):
        if not SLUG.match(tag):
            v.fail(f"tags[{i}]", f"'{tag}' is not a tag (lowercase letters, digits and '-')")
    tags = sorted(set(tags))
    references = _references(v, raw.get("references", []))
    notes = v.string(raw.get("notes", ""), "notes", multiline=True).strip()

    taken: dict[str, str] = {}
    params_raw = v.table(raw.get("parameters", {}), "parameters")
    for name in params_raw:
        v.ident(name, f"parameters.{name}", taken)
        taken[name] = "parameter"
    param_names = Names(symbols=frozenset(params_raw))
    parameters = {}
    for name, spec in params_raw.items():
        field = f"parameters.{name}"
        v.table(spec, field, PARAM_KEYS)
        assume = v.str_list(spec.get("assume", ["real"]), f"{field}.assume")
        for a in assume:
            if a not in ASSUMPTIONS:
                v.fail(f"{field}.assume", f"'{a}' is not one of {', '.join(ASSUMPTIONS)}")
        for x, y in CONFLICTING_ASSUMPTIONS:
            if x in assume and y in assume:
                v.fail(f"{field}.assume", f"'{x}' and '{y}' contradict each other")
        entry = {"description": v.string(spec.get("description", ""), f"{field}.description", multiline=True).strip(),
                 "assume": sorted(set(assume))}
        if "range" in spec:
            entry["range"] = v.relation(spec["range"], param_names, f"{field}.range")
        if "default" in spec:
            entry["default"] = v.expr(spec["default"], param_names, f"{field}.default")
        parameters[name] = entry
    _check_defaults(v, parameters, param_names,
                    {k: p["default"] for k, p in params_raw.items() if "default" in p},
                    {k: p["range"] for k, p in params_raw.items() if "range" in p})

    charts_raw = v.table(raw["charts"], "charts")
    if not charts_raw:
        v.fail("charts", "at least one chart is required")
    chart_coords: dict[str, list[str]] = {}
    for cname, craw in charts_raw.items():
        if not isinstance(cname, str) or not SLUG.match(cname):
            v.fail(f"charts.{cname}", "chart names are slugs (lowercase letters, digits and '-')")
        v.table(craw, f"charts.{cname}", initialdata.CHART_KEYS if kind == initialdata.KIND else CHART_KEYS)
        if "coordinates" not in craw:
            v.fail(f"charts.{cname}.coordinates", "missing (required)")
        coords = v.str_list(craw["coordinates"], f"charts.{cname}.coordinates")
        if len(coords) < 2:
            v.fail(f"charts.{cname}.coordinates", "a chart needs at least two coordinates")
        chart_coords[cname] = coords
    if kind == initialdata.KIND:
        charts = {cname: initialdata.validate_chart(v, cname, craw, dict(taken), param_names, chart_coords[cname],
                                                    claim) for cname, craw in charts_raw.items()}
    else:
        charts = {cname: _chart(v, entry_id, cname, craw, dict(taken), param_names, chart_coords)
                  for cname, craw in charts_raw.items()}

    limits = {}
    for lname, lraw in v.table(raw.get("limits", {}), "limits").items():
        limits[lname] = _limit(v, entry_id, lname, lraw, param_names, charts, chart_coords)

    flat_when = []
    fw = raw.get("flat-when", [])
    if not isinstance(fw, list):
        v.fail("flat-when", f"must be a list of tables, got {_kind(fw)}")
    for i, subs in enumerate(fw):
        flat_when.append(_substitutions(v, subs, f"flat-when[{i}]", param_names))

    data: dict[str, Any] = {
        "format": FORMAT,
        "id": entry_id,
        "title": title,
        "summary": summary,
        "field-equations": claim,
        "tags": tags,
        "references": references,
        "notes": notes,
        "parameters": parameters,
        "charts": charts,
        "limits": limits,
        "flat-when": flat_when,
    }
    if kind == initialdata.KIND:  # only then: the canonical form (and hash) of a spacetime is unchanged
        data = {"format": FORMAT, "kind": kind, **{k: x for k, x in data.items() if k != "format"}}
    return MetricDocument(data, source)


_ASSUMED = {"positive": (">", "positive"), "nonnegative": (">=", "non-negative"), "negative": ("<", "negative")}


def _check_defaults(v: _V, parameters: dict[str, dict], names: Names, written: dict[str, Any],
                    written_ranges: dict[str, Any]) -> None:
    """Every ``default`` must be a finite real number inside its parameter's ``range`` and assumptions.

    ``written``, ``written_ranges``: defaults and ranges as the file wrote them (for the message).
    Defaults may refer to other parameters' defaults; a range relation is checked when every
    parameter it names has a default. Values are exact rationals where possible, else 60-digit
    numbers; a comparison too close to call in 60 digits is given the benefit of the doubt.
    Needs no sympy (mpmath only for irrational values).
    """
    from fractions import Fraction

    from gravicat.format.expr import NotReal, Undecided, holds, number

    trees = {k: check_expression(p["default"], names, source=v.source, field=f"parameters.{k}.default")
             for k, p in parameters.items() if "default" in p}
    values: dict[str, Any] = {}
    pending = dict(trees)
    while pending:
        progress = False
        for name, tree in list(pending.items()):
            try:
                values[name] = number(tree, values)
            except NotReal as exc:
                if not (names_in(tree) - set(values) - RESERVED):
                    text = str(written.get(name, parameters[name]["default"])).strip()
                    v.fail(f"parameters.{name}.default", f"'{text}' is not a finite real number ({exc})")
                continue
            except Undecided:
                continue
            del pending[name]
            progress = True
        if not progress:
            break  # a default naming a parameter without a (settled) default: nothing more to check
    shown = {k: (str(x) if isinstance(x, Fraction) else _decimal(x)) for k, x in values.items()}

    def describe(name):
        text = str(written.get(name, parameters[name]["default"])).strip()
        exact = text.replace(" ", "") == shown[name]
        return f"default {name} = {text}" + ("" if exact else f" (= {shown[name]})")

    for name, value in values.items():
        p = parameters[name]
        field = f"parameters.{name}.default"
        for flag, (op, word) in _ASSUMED.items():
            if flag in p["assume"] and holds(value, op, Fraction(0)) is False:
                v.fail(field, f"{describe(name)} is not {word} (assume = {flag}); choose a default "
                              "the parameter may take")
        if "nonzero" in p["assume"] and isinstance(value, Fraction) and value == 0:
            v.fail(field, f"{describe(name)} is zero (assume = nonzero); choose a default the parameter may take")
        if "integer" in p["assume"] and isinstance(value, Fraction) and value.denominator != 1:
            v.fail(field, f"{describe(name)} is not an integer (assume = integer); choose a default the "
                          "parameter may take")
    for owner, p in parameters.items():
        if "range" not in p:
            continue
        for rel in check_relation(p["range"], names, source=v.source, field=f"parameters.{owner}.range"):
            used = sorted((names_in(rel.left) | names_in(rel.right)) - RESERVED)
            if not used or any(u not in values for u in used):
                continue
            try:
                left, right = number(rel.left, values), number(rel.right, values)
            except Undecided:
                continue
            if holds(left, rel.op, right) is not False:
                continue
            subject = owner if owner in used else used[0]
            others = [u for u in used if u != subject]
            detail = ", ".join(f"{o} = {shown[o]}" for o in others)
            if rel.text() != p["range"]:
                detail = f"{rel.text()} fails" + (f" with {detail}" if detail else "")
            elif detail:
                detail = f"fails with {detail}"
            range_text = str(written_ranges.get(owner, p["range"])).strip()
            v.fail(f"parameters.{subject}.default",
                   f"{describe(subject)} is outside the range {range_text}"
                   + (f" ({detail})" if detail else "") + "; choose a default inside the range")


def _decimal(x) -> str:
    import mpmath

    return mpmath.nstr(x, 12)


def _references(v: _V, value) -> list[dict[str, str]]:
    if not isinstance(value, list):
        v.fail("references", f"must be a list, got {_kind(value)}")
    out = []
    for i, ref in enumerate(value):
        field = f"references[{i}]"
        if isinstance(ref, str):
            ref = {"citation": ref}
        v.table(ref, field, ("citation", "doi"))
        if "citation" not in ref:
            v.fail(f"{field}.citation", "missing (required)")
        item = {"citation": v.string(ref["citation"], f"{field}.citation", max_len=2_000).strip()}
        if "doi" in ref:
            doi = v.string(ref["doi"], f"{field}.doi", max_len=200).strip()
            if not re.match(r"^10\.\d{4,9}/\S+$", doi):
                v.fail(f"{field}.doi", f"'{doi}' is not a DOI (10.NNNN/...)")
            item["doi"] = doi
        out.append(item)
    return out


def _substitutions(v: _V, value, field: str, names: Names, allowed: tuple[str, ...] | None = None) -> dict:
    v.table(value, field)
    out = {}
    for key, text in value.items():
        if key not in (allowed if allowed is not None else names.symbols):
            v.fail(f"{field}.{key}", f"'{key}' is not a declared {'coordinate' if allowed else 'parameter'}")
        out[key] = v.expr(text, names, f"{field}.{key}")
    order = list(allowed) if allowed is not None else sorted(out)  # canonical: key order never matters
    return {k: out[k] for k in order if k in out}


def _chart(v: _V, entry_id: str, cname: str, craw: dict, taken: dict[str, str], param_names: Names,
           chart_coords: dict[str, list[str]]) -> dict[str, Any]:
    base = f"charts.{cname}"
    coords = chart_coords[cname]
    for i, c in enumerate(coords):
        v.ident(c, f"{base}.coordinates[{i}]", taken)
        taken[c] = "coordinate"
    functions: dict[str, tuple[str, ...]] = {}
    decls = []
    for i, decl in enumerate(v.str_list(craw.get("functions", []), f"{base}.functions")):
        m = FUNCTION_DECL.match(decl)
        if not m:
            v.fail(f"{base}.functions[{i}]", f"'{decl}' is not a declaration like 'a(t)' or 'H(u, x, y)'")
        fname = v.ident(m.group(1), f"{base}.functions[{i}]", taken)
        args = tuple(a.strip() for a in m.group(2).split(","))
        for a in args:
            if a not in coords:
                v.fail(f"{base}.functions[{i}]", f"argument '{a}' of {fname} is not a coordinate of this chart")
        if len(set(args)) != len(args):
            v.fail(f"{base}.functions[{i}]", f"repeated argument in '{decl}'")
        taken[fname] = "function"
        functions[fname] = args
        decls.append(f"{fname}({', '.join(args)})")
    names = Names(symbols=param_names.symbols | frozenset(coords), functions=functions,
                  coordinates=frozenset(coords))
    defines = {}
    through: dict[str, str] = {}  # definition -> the declared function it uses
    for dname, text in v.table(craw.get("define", {}), f"{base}.define").items():
        v.ident(dname, f"{base}.define.{dname}", taken)
        if isinstance(text, bool) or not isinstance(text, (str, int, float)):
            v.fail(f"{base}.define.{dname}", f"must be an expression string, got {_kind(text)}")
        tree, bits = check_expression_size(text, names, source=v.source, field=f"{base}.define.{dname}")
        defines[dname] = canonical(tree)
        taken[dname] = "definition"
        _note_function_use(through, dname, names_in(tree), functions)
        names = names.with_symbols([dname], {dname: bits} if bits is not None else None)
    domain = []
    for i, t in enumerate(v.str_list(craw.get("domain", []), f"{base}.domain")):
        field = f"{base}.domain[{i}]"
        domain.append(v.relation(t, names, field))
        _refuse_function_in_domain(v.fail, field, t, check_relation(t, names, source=v.source, field=field),
                                   functions, through)
    chart: dict[str, Any] = {
        "coordinates": coords,
        "domain": domain,
        "functions": decls,
        "define": defines,
    }
    has_le, has_m = "line-element" in craw, "metric" in craw
    if has_le == has_m:
        v.fail(base, "give exactly one of 'line-element' and 'metric'")
    if has_le:
        differentials = [f"d{c}" for c in coords]
        for d in differentials:
            if d in taken:
                v.fail(f"{base}.line-element", f"the differential '{d}' clashes with the {taken[d]} '{d}'")
        chart["line-element"] = v.expr(craw["line-element"], names.with_symbols(differentials),
                                       f"{base}.line-element")
    else:
        rows = craw["metric"]
        n = len(coords)
        if not isinstance(rows, list) or len(rows) != n or any(not isinstance(r, list) or len(r) != n for r in rows):
            v.fail(f"{base}.metric", f"must be a {n}x{n} matrix (a list of {n} rows of {n} entries)")
        chart["metric"] = [[v.expr(x, names, f"{base}.metric[{i}][{j}]") for j, x in enumerate(row)]
                           for i, row in enumerate(rows)]
    if "cosmological-constant" in craw:
        chart["cosmological-constant"] = v.expr(craw["cosmological-constant"], param_names,
                                                f"{base}.cosmological-constant")
    coord_keys = tuple(coords)
    if "potential" in craw:
        chart["potential"] = _substitutions(v, craw["potential"], f"{base}.potential", names, coord_keys)
    if "fluid" in craw:
        fraw = v.table(craw["fluid"], f"{base}.fluid", ("density", "pressure", "velocity"))
        for key in ("density", "velocity"):
            if key not in fraw:
                v.fail(f"{base}.fluid.{key}", "missing (required)")
        fluid = {"density": v.expr(fraw["density"], names, f"{base}.fluid.density")}
        if "pressure" in fraw:
            fluid["pressure"] = v.expr(fraw["pressure"], names, f"{base}.fluid.pressure")
        fluid["velocity"] = _substitutions(v, fraw["velocity"], f"{base}.fluid.velocity", names, coord_keys)
        chart["fluid"] = fluid
    if "null-dust" in craw:
        nraw = v.table(craw["null-dust"], f"{base}.null-dust", ("density", "vector"))
        for key in ("density", "vector"):
            if key not in nraw:
                v.fail(f"{base}.null-dust.{key}", "missing (required)")
        chart["null-dust"] = {
            "density": v.expr(nraw["density"], names, f"{base}.null-dust.density"),
            "vector": _substitutions(v, nraw["vector"], f"{base}.null-dust.vector", names, coord_keys),
        }
    observers = {}
    for oname, oraw in v.table(craw.get("observers", {}), f"{base}.observers").items():
        if not SLUG.match(str(oname)):
            v.fail(f"{base}.observers.{oname}", "observer names are slugs (lowercase letters, digits and '-')")
        observers[oname] = _substitutions(v, oraw, f"{base}.observers.{oname}", names, coord_keys)
    chart["observers"] = observers
    transforms = {}
    for other, traw in v.table(craw.get("transforms", {}), f"{base}.transforms").items():
        field = f"{base}.transforms.{other}"
        if other not in chart_coords:
            v.fail(field, f"'{other}' is not a chart of this entry")
        if other == cname:
            v.fail(field, "a chart cannot transform to itself")
        target = tuple(chart_coords[other])
        mapping = _substitutions(v, traw, field, names, target)
        missing = [c for c in target if c not in mapping]
        if missing:
            v.fail(field, f"missing the target coordinate(s) {', '.join(missing)}")
        transforms[other] = {c: mapping[c] for c in target}
    chart["transforms"] = transforms
    invariants = {}
    for iname, iraw in v.table(craw.get("invariants", {}), f"{base}.invariants", INVARIANT_NAMES).items():
        field = f"{base}.invariants.{iname}"
        v.table(iraw, field, ("value", "source"))
        for key in ("value", "source"):
            if key not in iraw:
                v.fail(f"{field}.{key}", "missing (required)")
        invariants[iname] = {"value": v.expr(iraw["value"], names, f"{field}.value"),
                             "source": v.string(iraw["source"], f"{field}.source", max_len=1_000).strip()}
    chart["invariants"] = invariants
    chart.update(check_declarations(v, craw, base, names, coords, defines))  # only the keys declared
    check_chart_size(v.source, base, chart)  # degree, terms and coordinates after definitions (format/size.py)
    return chart


def _note_function_use(through: dict[str, str], dname: str, used: set[str],
                       functions: dict[str, tuple[str, ...]]) -> None:
    """Record in ``through`` that definition ``dname`` uses a declared function (directly or not)."""
    for name in sorted(used):
        if name in functions:
            through[dname] = f"{name}({', '.join(functions[name])})"
            return
        if name in through:
            through[dname] = through[name]
            return


def _refuse_function_in_domain(fail: Callable[[str, str], Any], field: str, text: str, relations,
                               functions: dict[str, tuple[str, ...]], through: dict[str, str]) -> None:
    """A domain inequality may restrict coordinates and parameters only.

    Sample points of a chart draw the value of a declared function (and of its derivatives)
    freely, with no inequality linking it to the coordinates, so ``r > b(r)`` or ``t > tB``
    could not be honoured and a verifier would judge the metric where the file says it does
    not hold. Refused, with what to write instead.
    """
    used: set[str] = set()
    for rel in relations:
        used |= names_in(rel.left) | names_in(rel.right)
    direct = sorted(used & set(functions))
    if direct:
        fname = direct[0]
        what = f"the declared function {fname}({', '.join(functions[fname])})"
    else:
        indirect = sorted(used & set(through))
        if not indirect:
            return
        fname = through[indirect[0]].split("(")[0]
        what = f"the definition '{indirect[0]}', which uses the declared function {through[indirect[0]]}"
    fail(field, f"'{text}' involves {what}; a domain may restrict only coordinates and parameters (sample "
                "points give a declared function any value, so this condition cannot be kept): write "
                f"{fname} out under 'define' in coordinates and parameters instead of declaring it in "
                "'functions', or state the condition in 'notes'")


def _limit(v: _V, entry_id: str, lname: str, lraw, param_names: Names, charts: dict,
           chart_coords: dict[str, list[str]]) -> dict[str, Any]:
    base = f"limits.{lname}"
    if not isinstance(lname, str) or not SLUG.match(lname):
        v.fail(base, "limit names are slugs (lowercase letters, digits and '-')")
    v.table(lraw, base, LIMIT_KEYS)
    chart = lraw.get("chart", next(iter(charts)))
    if not isinstance(chart, str) or chart not in charts:
        v.fail(f"{base}.chart", f"'{chart}' is not a chart of this entry")
    coords = chart_coords[chart]
    names = Names(symbols=param_names.symbols | frozenset(coords), coordinates=frozenset(coords))
    out: dict[str, Any] = {"chart": chart,
                           "set": _substitutions(v, lraw.get("set", {}), f"{base}.set", param_names)}
    out["coordinates"] = _substitutions(v, lraw.get("coordinates", {}), f"{base}.coordinates", names, tuple(coords))
    if "reduces-to" not in lraw:
        v.fail(f"{base}.reduces-to", "missing (required): 'ENTRY:CHART'")
    target = v.string(lraw["reduces-to"], f"{base}.reduces-to", max_len=200)
    m = re.match(r"^([a-z0-9][a-z0-9-]*):([a-z0-9][a-z0-9-]*)$", target)
    if not m:
        v.fail(f"{base}.reduces-to", f"'{target}' is not 'ENTRY:CHART'")
    if m.group(1) == entry_id and m.group(2) not in charts:
        v.fail(f"{base}.reduces-to", f"'{m.group(2)}' is not a chart of this entry")
    out["reduces-to"] = target
    return out


# --------------------------------------------------------------------------- sympy charts
# The one chart builder lives in :mod:`gravicat.format.charts` (it imports this module only at call
# time); these names stay importable from here.
from gravicat.format.charts import _assumptions, build_chart, parameter_symbols  # noqa: E402, F401
