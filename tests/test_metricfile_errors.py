"""Malformed metric files, the canonical form and its hash, and the line element -> matrix conversion.

Every refusal must be an InputError whose message is one line, ``SOURCE: FIELD: problem``, with the
exact field path of the fault (or ``SOURCE: problem`` when the file as a whole is at fault). The
content hash is checked against hashlib on the canonical JSON, and metric matrices against sympy
matrices built directly in this file (sympy is the reference).

Tests marked ``xfail(strict=True, reason="BUG: ...")`` document defects found in gravicat.format.metricfile;
once a defect is fixed the test passes, is reported as XPASS(strict) and its marker must go.
"""

from __future__ import annotations

import copy
import hashlib
import json
from pathlib import Path

import pytest
import sympy

from gravicat.errors import InputError, UnsafeExpression
from gravicat.format.metricfile import (
    ASSUMPTIONS,
    EXPORT_FORMAT,
    FIELD_EQUATIONS,
    MAX_FILE_BYTES,
    build_chart,
    load_file,
    validate,
)

T, R, TH, PH = (sympy.Symbol(n, real=True) for n in ("t", "r", "theta", "phi"))
# A parameter is a real symbol with its declared assumptions (assume = ["positive"] -> positive, real)
M = sympy.Symbol("M", positive=True, real=True)
Q = sympy.Symbol("Q", real=True)


# --------------------------------------------------------------------------- helpers

def toml_value(value) -> str:
    """A TOML value (inline form) for plain data; JSON string syntax is valid TOML."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{json.dumps(k, ensure_ascii=False)} = {toml_value(v)}"
                                for k, v in value.items()) + " }"
    raise TypeError(type(value))


def to_toml(data: dict) -> str:
    return "".join(f"{json.dumps(k, ensure_ascii=False)} = {toml_value(v)}\n" for k, v in data.items())


def base() -> dict:
    """A valid entry of our own scenario: the Tessaly Fen group's charged toy exterior."""
    return {
        "id": "fen-toy-exterior",
        "title": "Fen charged toy exterior",
        "summary": "Static charged exterior used by the test suite.",
        "field-equations": "electrovacuum",
        "tags": ["toy", "static"],
        "references": [{"citation": "Tessaly Fen group, internal note 7 (toy model)"}],
        "parameters": {
            "M": {"description": "mass", "assume": ["positive"], "range": "M > 0", "default": "1"},
            "Q": {"description": "charge", "range": "0 <= Q < M", "default": "0.5"},
        },
        "charts": {
            "main": {
                "coordinates": ["t", "r", "theta", "phi"],
                "domain": ["r > 2*M", "0 < theta < pi"],
                "define": {"f": "1 - 2*M/r + Q**2/r**2"},
                "line-element": "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)",
                "potential": {"t": "-Q/r"},
                "observers": {"static": {"t": "1/sqrt(f)"}},
                "transforms": {"box": {"T": "t", "x": "r*sin(theta)*cos(phi)", "y": "r*sin(theta)*sin(phi)",
                                       "z": "r*cos(theta)"}},
                "invariants": {"ricci-scalar": {"value": "0", "source": "traceless electromagnetic stress"}},
            },
            "box": {
                "coordinates": ["T", "x", "y", "z"],
                "metric": [["-1", "0", "0", "0"], ["0", "1", "0", "0"], ["0", "0", "1", "0"], ["0", "0", "0", "1"]],
            },
        },
        "limits": {"uncharged": {"chart": "main", "set": {"Q": "0"}, "reduces-to": "schwarzschild:schwarzschild"}},
        "flat-when": [{"M": "0", "Q": "0"}],
    }


def write(tmp_path: Path, data: dict | str | bytes, name: str = "toy.toml") -> Path:
    path = tmp_path / name
    if isinstance(data, dict):
        data = to_toml(data)
    if isinstance(data, str):
        data = data.encode("utf-8")
    path.write_bytes(data)
    return path


def check_message(exc: InputError, source: str, field: str | None, *fragments: str) -> str:
    message = str(exc)
    assert message and "\n" not in message and "\r" not in message, repr(message)
    prefix = f"{source}: {field}: " if field else f"{source}: "
    assert message.startswith(prefix), message
    assert exc.field == field, (exc.field, field)
    assert exc.exit_code == 2
    for fragment in fragments:
        assert fragment in message, (fragment, message)
    return message


def refused_file(path: Path, field: str | None, *fragments: str, build: bool = False) -> str:
    with pytest.raises(InputError) as info:
        doc = load_file(path)
        if build:
            for chart in doc.chart_names:
                build_chart(doc, chart)
    return check_message(info.value, str(path), field, *fragments)


def mutated(change) -> dict:
    data = base()
    change(data)
    return data


def chart(data: dict, name: str = "main") -> dict:
    return data["charts"][name]


def test_the_base_entry_is_valid(tmp_path):
    doc = load_file(write(tmp_path, base()))
    assert doc.id == "fen-toy-exterior" and doc.chart_names == ["main", "box"]
    spec = build_chart(doc)
    f = 1 - 2 * M / R + Q**2 / R**2
    expected = sympy.diag(-f, 1 / f, R**2, R**2 * sympy.sin(TH) ** 2)
    assert sympy.simplify(spec.metric - expected) == sympy.zeros(4, 4)


# --------------------------------------------------------------------------- the file as a whole

@pytest.mark.parametrize("text", [
    "id = \n",
    'id = "fen-toy-exterior" "again"\n',
    "[charts.main\n",
    'id = "a"\nid = "b"\n',
    'title = "unterminated\n',
    "[parameters.M]\n[parameters.M]\n",
    "tags = [\"toy\",,]\n",
    "= 1\n",
], ids=["no-value", "two-values", "open-table", "duplicate-key", "unterminated", "duplicate-table",
        "double-comma", "no-key"])
def test_bad_toml_syntax(tmp_path, text):
    refused_file(write(tmp_path, text), None, "malformed TOML", "line ")


def test_bad_json_syntax(tmp_path):
    refused_file(write(tmp_path, '{"id": "fen-toy-exterior",', "toy.json"), None, "malformed JSON")


def test_json_constants_are_refused(tmp_path):
    refused_file(write(tmp_path, '{"id": NaN}', "toy.json"), None, "malformed JSON", "NaN")


def test_json_top_level_must_be_an_object(tmp_path):
    refused_file(write(tmp_path, "[1, 2]", "toy.json"), None, "one object/table at the top")


def test_non_utf8_file(tmp_path):
    path = write(tmp_path, b'id = "fen-toy-exterior"\ntitle = "caf\xe9"\n')
    refused_file(path, None, "not UTF-8 text (byte 36)")


def test_oversize_file(tmp_path):
    text = to_toml(base()) + "# " + "x" * MAX_FILE_BYTES + "\n"
    path = write(tmp_path, text)
    refused_file(path, None, f"file is {path.stat().st_size} bytes (limit {MAX_FILE_BYTES})")


def test_directory_instead_of_a_file(tmp_path):
    path = tmp_path / "toy.toml"
    path.mkdir()
    refused_file(path, None, "not a regular file")


def test_missing_file(tmp_path):
    refused_file(tmp_path / "nowhere.toml", None, "no such file")


def test_unknown_file_type(tmp_path):
    refused_file(write(tmp_path, to_toml(base()), "toy.yaml"), None, "unknown file type")


def test_empty_file_names_the_first_missing_key(tmp_path):
    refused_file(write(tmp_path, ""), "id", "missing (required)")


# --------------------------------------------------------------------------- malformed content

def _delete(*path):
    def change(data):
        node = data
        for step in path[:-1]:
            node = node[step]
        del node[path[-1]]
    return change


def _set(*path_and_value):
    *path, value = path_and_value

    def change(data):
        node = data
        for step in path[:-1]:
            node = node[step]
        node[path[-1]] = value
    return change


MISSING = [
    ("id", _delete("id")),
    ("title", _delete("title")),
    ("field-equations", _delete("field-equations")),
    ("charts", _delete("charts")),
    ("charts.main.coordinates", _delete("charts", "main", "coordinates")),
    ("references[0].citation", _set("references", [{"doi": "10.1234/fen.7"}])),
    ("limits.uncharged.reduces-to", _delete("limits", "uncharged", "reduces-to")),
    ("charts.main.invariants.ricci-scalar.source", _delete("charts", "main", "invariants", "ricci-scalar", "source")),
    ("charts.main.invariants.ricci-scalar.value", _delete("charts", "main", "invariants", "ricci-scalar", "value")),
    ("charts.main.fluid.density", _set("charts", "main", "fluid", {"pressure": "0", "velocity": {"t": "1"}})),
    ("charts.main.null-dust.vector", _set("charts", "main", "null-dust", {"density": "0"})),
]


@pytest.mark.parametrize(("field", "change"), MISSING, ids=[f for f, _ in MISSING])
def test_missing_required_key(tmp_path, field, change):
    refused_file(write(tmp_path, mutated(change)), field, "missing (required)")


UNKNOWN = [
    ("titel", _set("titel", "x"), "title"),
    ("field_equations", _set("field_equations", "vacuum"), "field-equations"),
    ("tag", _set("tag", ["x"]), "tags"),
    ("charts.main.line_element", _set("charts", "main", "line_element", "x"), "line-element"),
    ("charts.main.cordinates", _set("charts", "main", "cordinates", ["t"]), "coordinates"),
    ("charts.main.observer", _set("charts", "main", "observer", {}), "observers"),
    ("parameters.M.asume", _set("parameters", "M", "asume", ["real"]), "assume"),
    ("parameters.M.defaults", _set("parameters", "M", "defaults", "1"), "default"),
    ("limits.uncharged.reduces_to", _set("limits", "uncharged", "reduces_to", "x:y"), "reduces-to"),
    ("references[0].doii", _set("references", [{"citation": "x", "doii": "10.1/x"}]), "doi"),
    ("charts.main.invariants.kretchmann",
     _set("charts", "main", "invariants", "kretchmann", {"value": "0", "source": "x"}), "kretschmann"),
    ("charts.main.invariants.ricci-scalar.sauce",
     _set("charts", "main", "invariants", "ricci-scalar", "sauce", "x"), "source"),
    ("charts.main.fluid.presure",
     _set("charts", "main", "fluid", {"density": "0", "presure": "0", "velocity": {}}), "pressure"),
]


@pytest.mark.parametrize(("field", "change", "hint"), UNKNOWN, ids=[f for f, _, _ in UNKNOWN])
def test_unknown_key_has_a_hint(tmp_path, field, change, hint):
    refused_file(write(tmp_path, mutated(change)), field, f"unknown key (did you mean '{hint}'?)")


def test_unknown_key_without_a_close_match(tmp_path):
    message = refused_file(write(tmp_path, mutated(_set("zzqqx", 1))), "zzqqx", "unknown key")
    assert "did you mean" not in message


WRONG_TYPES = [
    ("id", _set("id", 5), "must be a string, got an integer"),
    ("title", _set("title", ["x"]), "must be a string, got a list"),
    ("title", _set("title", "   "), "is empty"),
    ("summary", _set("summary", 3), "must be a string"),
    ("field-equations", _set("field-equations", True), "must be a string, got a boolean"),
    ("notes", _set("notes", 1.5), "must be a string, got a number"),
    ("tags", _set("tags", "toy"), "must be a list of strings, got a string"),
    ("tags[1]", _set("tags", ["toy", 3]), "must be a string, got an integer"),
    ("references", _set("references", "Fen note"), "must be a list"),
    ("references[0]", _set("references", [3]), "must be a table"),
    ("parameters", _set("parameters", ["M"]), "must be a table, got a list"),
    ("parameters.M", _set("parameters", "M", "mass"), "must be a table, got a string"),
    ("parameters.M.assume", _set("parameters", "M", "assume", "positive"), "must be a list of strings"),
    ("parameters.M.assume[0]", _set("parameters", "M", "assume", [1]), "must be a string"),
    ("parameters.M.description", _set("parameters", "M", "description", 1), "must be a string"),
    ("parameters.M.range", _set("parameters", "M", "range", 0), "must be an inequality string, got an integer"),
    ("parameters.M.default", _set("parameters", "M", "default", True), "got a boolean"),
    ("parameters.M.default", _set("parameters", "M", "default", [1]), "got a list"),
    ("charts", _set("charts", ["main"]), "must be a table, got a list"),
    ("charts", _set("charts", {}), "at least one chart is required"),
    ("charts.main", _set("charts", "main", "t r"), "must be a table, got a string"),
    ("charts.main.coordinates", _set("charts", "main", "coordinates", "t r"), "must be a list of strings"),
    ("charts.main.coordinates[1]", _set("charts", "main", "coordinates", ["t", 1, "theta", "phi"]),
     "must be a string, got an integer"),
    ("charts.main.coordinates", _set("charts", "main", "coordinates", ["t"]), "at least two coordinates"),
    ("charts.main.coordinates[1]", _set("charts", "main", "coordinates", ["t", "1r", "theta", "phi"]),
     "'1r' is not a valid name"),
    ("charts.main.domain", _set("charts", "main", "domain", "r > 2*M"), "must be a list of strings"),
    ("charts.main.domain[1]", _set("charts", "main", "domain", ["r > 2*M", 0]), "must be a string"),
    ("charts.main.domain[0]", _set("charts", "main", "domain", ["r"]), "is not an inequality"),
    ("charts.main.define", _set("charts", "main", "define", ["f"]), "must be a table, got a list"),
    ("charts.main.define.f", _set("charts", "main", "define", "f", ["1"]), "must be an expression string, got a list"),
    ("charts.main.functions", _set("charts", "main", "functions", "a(t)"), "must be a list of strings"),
    ("charts.main.line-element", _set("charts", "main", "line-element", ["-dt**2"]), "got a list"),
    ("charts.main.line-element", _set("charts", "main", "line-element", ""), "empty expression"),
    ("charts.main.potential", _set("charts", "main", "potential", "-Q/r"), "must be a table"),
    ("charts.main.potential.w", _set("charts", "main", "potential", {"w": "0"}), "'w' is not a declared coordinate"),
    ("charts.main.observers", _set("charts", "main", "observers", ["static"]), "must be a table"),
    ("charts.main.observers.static", _set("charts", "main", "observers", "static", "1"), "must be a table"),
    ("charts.main.transforms", _set("charts", "main", "transforms", "box"), "must be a table"),
    ("charts.main.transforms.box", _set("charts", "main", "transforms", "box", "t"), "must be a table"),
    ("charts.main.invariants", _set("charts", "main", "invariants", []), "must be a table"),
    ("charts.main.invariants.ricci-scalar", _set("charts", "main", "invariants", "ricci-scalar", "0"),
     "must be a table"),
    ("charts.main.invariants.ricci-scalar.value",
     _set("charts", "main", "invariants", "ricci-scalar", "value", {"a": "0"}), "got a table"),
    ("charts.main.invariants.ricci-scalar.source",
     _set("charts", "main", "invariants", "ricci-scalar", "source", 0), "must be a string"),
    ("charts.main.fluid", _set("charts", "main", "fluid", "dust"), "must be a table"),
    ("charts.main.cosmological-constant", _set("charts", "main", "cosmological-constant", "r"), "unknown name 'r'"),
    ("limits", _set("limits", ["uncharged"]), "must be a table"),
    ("limits.uncharged", _set("limits", "uncharged", "schwarzschild:schwarzschild"), "must be a table"),
    ("limits.uncharged.set", _set("limits", "uncharged", "set", "Q = 0"), "must be a table"),
    ("flat-when", _set("flat-when", {"M": "0"}), "must be a list of tables, got a table"),
    ("flat-when[0]", _set("flat-when", ["M"]), "must be a table, got a string"),
    ("flat-when[0].r", _set("flat-when", [{"r": "0"}]), "'r' is not a declared parameter"),
    ("references[0].doi", _set("references", [{"citation": "x", "doi": "fen-7"}]), "is not a DOI"),
]


@pytest.mark.parametrize(("field", "change", "fragment"), WRONG_TYPES,
                         ids=[f"{f}:{frag[:20]}" for f, _, frag in WRONG_TYPES])
def test_wrong_type_or_value(tmp_path, field, change, fragment):
    refused_file(write(tmp_path, mutated(change)), field, fragment)


def test_a_date_where_a_string_belongs(tmp_path):
    text = to_toml(base()).replace('"id" = "fen-toy-exterior"', '"id" = 2026-03-14')
    refused_file(write(tmp_path, text), "id", "must be a string, got date")


@pytest.mark.parametrize("slug", ["Fen-Toy", "fen toy", "fen_toy", "-fen", "fen.toy", "fen/toy", "é"])
def test_bad_slug(tmp_path, slug):
    refused_file(write(tmp_path, mutated(_set("id", slug))), "id", f"'{slug}' is not a slug")


def test_overlong_slug(tmp_path):
    refused_file(write(tmp_path, mutated(_set("id", "f" * 81))), "id", "81 characters long (limit 80)")


BAD_NAMES = [
    ("charts.Main", lambda d: d["charts"].update({"Main": d["charts"].pop("box")}), "chart names are slugs"),
    ("charts.main.observers.Static", _set("charts", "main", "observers", {"Static": {"t": "1"}}),
     "observer names are slugs"),
    ("limits.No Charge", _set("limits", {"No Charge": {"set": {"Q": "0"}, "reduces-to": "a:b"}}),
     "limit names are slugs"),
    ("tags[0]", _set("tags", ["Static"]), "'Static' is not a tag"),
    ("parameters.2M", _set("parameters", {"2M": {}}), "'2M' is not a valid name"),
    ("parameters.m-1", _set("parameters", {"m-1": {}}), "'m-1' is not a valid name"),
    ("parameters._M", _set("parameters", {"_M": {}}), "'_M' is not a valid name"),
    ("parameters.pi", _set("parameters", {"pi": {}}), "'pi' is reserved"),
    ("parameters.diff", _set("parameters", {"diff": {}}), "'diff' is reserved"),
    ("charts.main.coordinates[1]", _set("charts", "main", "coordinates", ["t", "exp", "theta", "phi"]),
     "'exp' is reserved"),
]


@pytest.mark.parametrize(("field", "change", "fragment"), BAD_NAMES, ids=[f for f, _, _ in BAD_NAMES])
def test_bad_names(tmp_path, field, change, fragment):
    refused_file(write(tmp_path, mutated(change)), field, fragment)


@pytest.mark.parametrize("claim", ["vaccum", "Vacuum", "einstein", ""])
def test_unknown_field_equations_claim(tmp_path, claim):
    refused_file(write(tmp_path, mutated(_set("field-equations", claim))), "field-equations",
                 f"'{claim}' is not one of {', '.join(FIELD_EQUATIONS)}")


@pytest.mark.parametrize("assumption", ["posative", "Positive", "complex", "finite"])
def test_unknown_assumption(tmp_path, assumption):
    refused_file(write(tmp_path, mutated(_set("parameters", "M", "assume", ["real", assumption]))),
                 "parameters.M.assume", f"'{assumption}' is not one of {', '.join(ASSUMPTIONS)}")


def test_both_line_element_and_metric(tmp_path):
    data = mutated(_set("charts", "box", "line-element", "-dT**2 + dx**2 + dy**2 + dz**2"))
    refused_file(write(tmp_path, data), "charts.box", "give exactly one of 'line-element' and 'metric'")


def test_neither_line_element_nor_metric(tmp_path):
    refused_file(write(tmp_path, mutated(_delete("charts", "main", "line-element"))), "charts.main",
                 "give exactly one of 'line-element' and 'metric'")


@pytest.mark.parametrize("matrix", [
    [["-1", "0", "0"], ["0", "1", "0"], ["0", "0", "1"]],
    [["-1", "0", "0", "0"], ["0", "1", "0", "0"], ["0", "0", "1", "0"]],
    [["-1", "0", "0", "0"], ["0", "1", "0"], ["0", "0", "1", "0"], ["0", "0", "0", "1"]],
    [["-1", "0", "0", "0", "0"]] * 4,
    ["-1", "1", "1", "1"],
    "diag(-1, 1, 1, 1)",
    [],
], ids=["3x3", "3 rows", "ragged", "4x5", "flat list", "string", "empty"])
def test_wrong_matrix_size(tmp_path, matrix):
    refused_file(write(tmp_path, mutated(_set("charts", "box", "metric", matrix))), "charts.box.metric",
                 "must be a 4x4 matrix")


def test_bad_matrix_entry_names_its_position(tmp_path):
    data = mutated(_set("charts", "box", "metric", 2, 3, "w"))
    refused_file(write(tmp_path, data), "charts.box.metric[2][3]", "unknown name 'w'")


NOT_QUADRATIC = [
    "dt**3 + dr**2",
    "dt + dr**2",
    "1 + dt**2 + dr**2 + dtheta**2 + dphi**2",
    "-dt**2 + dr**2 + r**2*(dtheta**2 + dphi**2) + M",
    "sin(dt)**2 + dr**2",
    "dt**2*dr**2",
    "dt**M + dr**2",
    "sqrt(dt**2 + dr**2)",
    "1/dt + dr**2",
    "exp(dt)*dr**2",
]


@pytest.mark.parametrize("line_element", NOT_QUADRATIC)
def test_line_element_not_quadratic_is_refused_by_build_chart(tmp_path, line_element):
    path = write(tmp_path, mutated(_set("charts", "main", "line-element", line_element)))
    doc = load_file(path)  # the text is a valid expression ...
    with pytest.raises(InputError) as info:  # ... but not a quadratic form in the differentials
        build_chart(doc, "main")
    check_message(info.value, str(path), "charts.main.line-element", "quadratic")
    assert not isinstance(info.value, UnsafeExpression)


CLASHES = [
    ("parameter", _set("parameters", "dt", {"description": "clash"})),
    ("definition", _set("charts", "main", "define", {"f": "1 - 2*M/r + Q**2/r**2", "dr": "1"})),
    ("function", _set("charts", "main", "functions", ["dtheta(t)"])),
    ("coordinate", _set("charts", "main", "coordinates", ["t", "r", "theta", "dt"])),
]


@pytest.mark.parametrize(("kind", "change"), CLASHES, ids=[k for k, _ in CLASHES])
def test_differential_clashes_with_a_declared_name(tmp_path, kind, change):
    data = mutated(change)
    if kind == "coordinate":  # keep the line element about the new coordinates
        chart(data)["line-element"] = "-dt**2 + dr**2 + dtheta**2 + ddt**2"
        del chart(data)["observers"], chart(data)["potential"]
    refused_file(write(tmp_path, data), "charts.main.line-element", "the differential", f"clashes with the {kind}")


TRANSFORMS = [
    ("charts.main.transforms.nowhere", _set("charts", "main", "transforms", "nowhere", {"T": "t"}),
     "'nowhere' is not a chart of this entry"),
    ("charts.main.transforms.box", _delete("charts", "main", "transforms", "box", "z"),
     "missing the target coordinate(s) z"),
    ("charts.main.transforms.box", _set("charts", "main", "transforms", "box", {"T": "t"}),
     "missing the target coordinate(s) x, y, z"),
    ("charts.main.transforms.box.w", _set("charts", "main", "transforms", "box", "w", "r"),
     "'w' is not a declared coordinate"),
    ("charts.main.transforms.box.r", _set("charts", "main", "transforms", "box", "r", "r"),
     "'r' is not a declared coordinate"),
    ("charts.main.transforms.main", _set("charts", "main", "transforms", "main", {"t": "t"}),
     "cannot transform to itself"),
    ("charts.main.transforms.box.x", _set("charts", "main", "transforms", "box", "x", "X"), "unknown name 'X'"),
]


@pytest.mark.parametrize(("field", "change", "fragment"), TRANSFORMS, ids=[frag[:30] for _, _, frag in TRANSFORMS])
def test_bad_transform(tmp_path, field, change, fragment):
    refused_file(write(tmp_path, mutated(change)), field, fragment)


LIMITS = [
    ("limits.uncharged.reduces-to", _set("limits", "uncharged", "reduces-to", "schwarzschild"),
     "'schwarzschild' is not 'ENTRY:CHART'"),
    ("limits.uncharged.reduces-to", _set("limits", "uncharged", "reduces-to", "Schwarzschild:Main"),
     "is not 'ENTRY:CHART'"),
    ("limits.uncharged.reduces-to", _set("limits", "uncharged", "reduces-to", "a:b:c"), "is not 'ENTRY:CHART'"),
    ("limits.uncharged.reduces-to", _set("limits", "uncharged", "reduces-to", ""), "is not 'ENTRY:CHART'"),
    ("limits.uncharged.reduces-to", _set("limits", "uncharged", "reduces-to", "fen-toy-exterior:nochart"),
     "'nochart' is not a chart of this entry"),
    ("limits.uncharged.reduces-to", _set("limits", "uncharged", "reduces-to", 7), "must be a string"),
    ("limits.uncharged.chart", _set("limits", "uncharged", "chart", "nochart"), "'nochart' is not a chart"),
    ("limits.uncharged.set.r", _set("limits", "uncharged", "set", {"r": "0"}), "'r' is not a declared parameter"),
    ("limits.uncharged.set.Q", _set("limits", "uncharged", "set", {"Q": "r"}), "unknown name 'r'"),
    ("limits.uncharged.coordinates.w", _set("limits", "uncharged", "coordinates", {"w": "0"}),
     "'w' is not a declared coordinate"),
]


@pytest.mark.parametrize(("field", "change", "fragment"), LIMITS, ids=[f"{f}:{x[:20]}" for f, _, x in LIMITS])
def test_bad_limit(tmp_path, field, change, fragment):
    refused_file(write(tmp_path, mutated(change)), field, fragment)


FUNCTIONS = [
    (["a(M)"], "charts.main.functions[0]", "argument 'M' of a is not a coordinate of this chart"),
    (["a(t)", "b(t, T)"], "charts.main.functions[1]", "argument 'T' of b is not a coordinate of this chart"),
    (["a[t]"], "charts.main.functions[0]", "'a[t]' is not a declaration"),
    (["a()"], "charts.main.functions[0]", "is not a declaration"),
    (["a(t,)"], "charts.main.functions[0]", "is not a declaration"),
    (["a"], "charts.main.functions[0]", "is not a declaration"),
    (["_a(t)"], "charts.main.functions[0]", "is not a declaration"),
    (["a(t, t)"], "charts.main.functions[0]", "repeated argument"),
    (["sin(t)"], "charts.main.functions[0]", "'sin' is reserved"),
    (["a(t)", "a(r)"], "charts.main.functions[1]", "'a' is already declared as a function"),
    (["M(t)"], "charts.main.functions[0]", "'M' is already declared as a parameter"),
    (["r(t)"], "charts.main.functions[0]", "'r' is already declared as a coordinate"),
]


@pytest.mark.parametrize(("decls", "field", "fragment"), FUNCTIONS, ids=[" ".join(d) for d, _, _ in FUNCTIONS])
def test_bad_function_declaration(tmp_path, decls, field, fragment):
    refused_file(write(tmp_path, mutated(_set("charts", "main", "functions", decls))), field, fragment)


DUPLICATES = [
    ("charts.main.coordinates[1]", _set("parameters", "r", {}), "'r' is already declared as a parameter"),
    ("charts.main.coordinates[2]", _set("charts", "main", "coordinates", ["t", "r", "r", "phi"]),
     "'r' is already declared as a coordinate"),
    ("charts.main.define.M", _set("charts", "main", "define", "M", "1"), "'M' is already declared as a parameter"),
    ("charts.main.define.theta", _set("charts", "main", "define", "theta", "1"),
     "'theta' is already declared as a coordinate"),
    ("charts.main.define.f", _set("charts", "main", "functions", ["f(r)"]), "'f' is already declared as a function"),
]


@pytest.mark.parametrize(("field", "change", "fragment"), DUPLICATES, ids=[f for f, _, _ in DUPLICATES])
def test_duplicate_names(tmp_path, field, change, fragment):
    refused_file(write(tmp_path, mutated(change)), field, fragment)


def test_a_definition_may_only_use_earlier_definitions(tmp_path):
    data = mutated(_set("charts", "main", "define", {"g": "f**2", "f": "1 - 2*M/r"}))
    refused_file(write(tmp_path, data), "charts.main.define.g", "unknown name 'f'")


def test_charts_do_not_share_coordinates(tmp_path):
    # the box chart's coordinates are not names in the main chart
    refused_file(write(tmp_path, mutated(_set("charts", "main", "define", "f", "1 - 2*M/x"))),
                 "charts.main.define.f", "unknown name 'x'")


def test_toml_duplicate_parameter_is_a_syntax_error(tmp_path):
    text = to_toml(base()) + '[parameters.M]\ndescription = "again"\n'
    refused_file(write(tmp_path, text), None, "malformed TOML")


# --------------------------------------------------------------------------- defects (xfail)

@pytest.mark.parametrize("assume", [["positive", "negative"], ["nonnegative", "negative"]])
def test_contradictory_assumptions_are_an_input_error(tmp_path, assume):
    path = write(tmp_path, mutated(_set("parameters", "M", "assume", assume)))
    refused_file(path, "parameters.M.assume", build=True)


@pytest.mark.parametrize("value", [["main"], {"name": "main"}])
def test_limit_chart_of_the_wrong_type(tmp_path, value):
    refused_file(write(tmp_path, mutated(_set("limits", "uncharged", "chart", value))), "limits.uncharged.chart")


def test_bad_tag_is_reported_at_its_position_in_the_file(tmp_path):
    refused_file(write(tmp_path, mutated(_set("tags", ["toy", "Static"]))), "tags[1]", "'Static' is not a tag")


def test_non_symmetric_metric_is_refused(tmp_path):
    path = write(tmp_path, mutated(_set("charts", "box", "metric", 0, 1, "1")))
    refused_file(path, "charts.box.metric[0][1]", build=True)


@pytest.mark.parametrize("entry", ["1/0", "log(0)"])
def test_non_finite_metric_entry_is_refused(tmp_path, entry):
    path = write(tmp_path, mutated(_set("charts", "box", "metric", 1, 1, entry)))
    with pytest.raises(InputError) as info:
        build_chart(load_file(path), "box")
    assert str(info.value).startswith(f"{path}: charts.box.metric")
    assert "\n" not in str(info.value)


@pytest.mark.parametrize(("name", "text"), [
    ("deep.toml", 'id = "fen-toy-exterior"\nx = ' + "[" * 1000 + "]" * 1000 + "\n"),
    ("deep-table.toml", "x = " + "{ a = " * 1000 + "1" + " }" * 1000 + "\n"),
    ("deep.json", '{"id": ' + "[" * 50_000 + "]" * 50_000 + "}"),
    ("huge-int.toml", 'id = "fen-toy-exterior"\nx = ' + "9" * 5000 + "\n"),
], ids=["toml-array", "toml-table", "json-array", "toml-integer"])
def test_decoder_limits_are_input_errors(tmp_path, name, text):
    refused_file(write(tmp_path, text, name), None)


@pytest.mark.parametrize(("field_start", "change"), [
    ("x", _set("x\nError: none, all files added", 1)),
    ("id", _set("id", "fen\ntoy: new (revision 1)")),
    ("field-equations", _set("field-equations", "vacuum\r\nok")),
    ("parameters.", _set("parameters", {"M\nfake": {}})),
    ("charts.", lambda d: d["charts"].update({"main\nx": d["charts"].pop("box")})),
], ids=["top-level-key", "id-value", "claim-value", "parameter-name", "chart-name"])
def test_messages_stay_on_one_line_whatever_the_file_holds(tmp_path, field_start, change):
    path = write(tmp_path, mutated(change))
    with pytest.raises(InputError) as info:
        load_file(path)
    message = str(info.value)
    assert message.startswith(f"{path}: {field_start}")
    assert "\n" not in message and "\r" not in message, repr(message)


# --------------------------------------------------------------------------- canonical form and hash

STYLE_A = """\
# Tessaly Fen group: charged toy exterior (test fixture)
id = "fen-toy-exterior"
title = "Fen charged toy exterior"
field-equations = "electrovacuum"
tags = ["toy", "static", "spherical-symmetry"]
flat-when = [{ M = "0", Q = "0" }]

[[references]]
citation = "Tessaly Fen group, internal note 7 (toy model)"

[parameters.M]
description = "mass"
assume = ["positive"]
range = "M > 0"
default = "1"

[parameters.Q]
description = "charge"
range = "0 <= Q < M"
default = "0.5"

[charts.main]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 2*M", "0 < theta < pi"]
define = { f = "1 - 2*M/r + Q**2/r**2" }
line-element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"

[charts.main.potential]
t = "-Q/r"

[charts.main.observers.static]
t = "1/sqrt(f)"

[charts.main.invariants.ricci-scalar]
value = "0"
source = "traceless electromagnetic stress"

[limits.uncharged]
set = { Q = "0" }
reduces-to = "schwarzschild:schwarzschild"
"""

# The same spacetime: other whitespace, key order, tag order (and a repeated tag), quote style,
# redundant parentheses, dotted keys instead of tables, numbers instead of numeric strings.
STYLE_B = """\
tags=['static','toy',"spherical-symmetry",'toy']
flat-when=[{M='0',Q='0'}]
references = [ { citation = 'Tessaly Fen group, internal note 7 (toy model)' } ]
field-equations =   'electrovacuum'
title='Fen charged toy exterior'
id   =  "fen-toy-exterior"

[charts.main]
line-element = '- f * dt**2  +  (dr**2)/f + (r**2)*(dtheta**2 + (sin(theta))**2*dphi**2)'
define.f = "1 - 2 * M / r + Q ** 2 / r ** 2"
domain = [ "r>2*M",
           "0<theta<pi" ]
coordinates = [ 't','r','theta','phi' ]
potential = { t = "-Q / r" }
observers.static.t = '1 / sqrt(f)'
invariants.ricci-scalar = { source = "traceless electromagnetic stress", value = 0 }

[parameters.M]
default = 1
range = 'M>0'
assume = ['positive', 'positive']
description = "mass"

[parameters.Q]
default = 0.5
description = 'charge'
range = "(0)<=Q<(M)"

[limits.uncharged]
reduces-to = 'schwarzschild:schwarzschild'
set.Q = "0"
"""


def _doc(tmp_path, text: str, name: str = "toy.toml"):
    return load_file(write(tmp_path, text, name))


def test_same_spacetime_in_another_style_has_the_same_hash(tmp_path):
    a = _doc(tmp_path, STYLE_A, "a.toml")
    b = _doc(tmp_path, STYLE_B, "b.toml")
    assert a.canonical_json() == b.canonical_json()
    assert a.hash == b.hash
    # the hash is the SHA-256 of the canonical JSON (checked with hashlib, not with gravicat)
    canonical = json.dumps(a.data, ensure_ascii=False, separators=(",", ":"))
    assert a.hash == hashlib.sha256(canonical.encode("utf-8")).hexdigest()
    assert a.data["tags"] == ["spherical-symmetry", "static", "toy"]


@pytest.mark.parametrize(("old", "new"), [
    ('"1 - 2*M/r + Q**2/r**2"', '"1 - 3*M/r + Q**2/r**2"'),
    ('"-Q/r"', '"Q/r"'),
    ('default = "0.5"', 'default = "0.25"'),
    ('"0 < theta < pi"', '"0 <= theta < pi"'),
    ('"static", ', ""),
    ('description = "mass"', 'description = "total mass"'),
    ('t = "1/sqrt(f)"', 't = "2/sqrt(f)"'),
], ids=["coefficient", "potential-sign", "default", "domain", "tag", "description", "observer"])
def test_a_change_changes_the_hash(tmp_path, old, new):
    assert old in STYLE_A
    a = _doc(tmp_path, STYLE_A, "a.toml")
    changed = _doc(tmp_path, STYLE_A.replace(old, new, 1), "changed.toml")
    assert changed.hash != a.hash


def test_a_change_past_double_precision_changes_the_hash(tmp_path):
    a = _doc(tmp_path, STYLE_A, "a.toml")
    changed = _doc(tmp_path, STYLE_A.replace('default = "0.5"', 'default = "0.50000000000000000001"'), "b.toml")
    assert changed.hash != a.hash


ORDERINGS = [  # (text in STYLE_A, one key order, the other key order)
    ('[charts.main.potential]\nt = "-Q/r"',
     '[charts.main.potential]\nt = "-Q/r"\nr = "0"', '[charts.main.potential]\nr = "0"\nt = "-Q/r"'),
    ('flat-when = [{ M = "0", Q = "0" }]', 'flat-when = [{ M = "0", Q = "0" }]', 'flat-when = [{ Q = "0", M = "0" }]'),
    ('set = { Q = "0" }', 'set = { M = "M", Q = "0" }', 'set = { Q = "0", M = "M" }'),
]


@pytest.mark.parametrize(("old", "one", "other"), ORDERINGS, ids=["potential", "flat-when", "limit-set"])
def test_key_order_inside_a_coordinate_table_does_not_change_the_hash(tmp_path, old, one, other):
    assert old in STYLE_A
    a = _doc(tmp_path, STYLE_A.replace(old, one), "a.toml")
    b = _doc(tmp_path, STYLE_A.replace(old, other), "b.toml")
    # the same content (key order aside) ...
    assert json.dumps(a.data, sort_keys=True) == json.dumps(b.data, sort_keys=True)
    assert a.hash == b.hash  # ... so the same hash


def test_json_canonical_form_round_trips_to_the_same_hash(tmp_path):
    doc = _doc(tmp_path, STYLE_A)
    for indent in (None, 2):
        path = write(tmp_path, doc.canonical_json(indent=indent), f"canonical-{indent}.json")
        again = load_file(path)
        assert again.hash == doc.hash
        assert again.data == doc.data
    export = {"format": EXPORT_FORMAT, "revision": doc.hash, "metric": doc.data, "checks": []}
    exported = load_file(write(tmp_path, json.dumps(export, ensure_ascii=False, indent=2), "export.json"))
    assert exported.hash == doc.hash


def test_validate_of_the_canonical_dict_gives_the_same_hash():
    doc = validate(base(), "a.toml")
    data = copy.deepcopy(doc.data)
    data.pop("format")  # what decode_json strips from a canonical file
    again = validate(data, "b.json")
    assert again.hash == doc.hash and again.data == doc.data


def test_validate_accepts_its_own_canonical_form():
    doc = validate(base(), "a.toml")
    assert validate(copy.deepcopy(doc.data), "b.json").hash == doc.hash


# --------------------------------------------------------------------------- line element -> matrix

def _single_chart(tmp_path, line_element: str, coords=("t", "r", "theta", "phi"), params=None):
    data = {"id": "fen-matrix", "title": "Matrix check", "field-equations": "none",
            "parameters": params or {},
            "charts": {"main": {"coordinates": list(coords), "line-element": line_element}}}
    return build_chart(load_file(write(tmp_path, data)))


def assert_same_matrix(got, expected):
    assert got.shape == expected.shape
    assert got.T == got, "the metric must be symmetric"
    assert sympy.simplify(got - expected) == sympy.zeros(*expected.shape), (got, expected)


def test_off_diagonal_term_gives_half_its_coefficient(tmp_path):
    a = sympy.Symbol("A", real=True)
    spec = _single_chart(tmp_path, "-dt**2 + 2*A*dt*dr + dr**2 + r**2*dtheta**2 + r**2*sin(theta)**2*dphi**2",
                         params={"A": {"description": "shift"}})
    expected = sympy.Matrix([[-1, a, 0, 0], [a, 1, 0, 0], [0, 0, R**2, 0], [0, 0, 0, R**2 * sympy.sin(TH) ** 2]])
    assert spec.metric == expected
    assert spec.metric[0, 1] == a and spec.metric[1, 0] == a


def test_a_bare_cross_term_gives_one_half(tmp_path):
    spec = _single_chart(tmp_path, "dt*dr + dr*dt + dtheta*dphi", coords=("t", "r", "theta", "phi"))
    half = sympy.Rational(1, 2)
    assert spec.metric == sympy.Matrix([[0, 1, 0, 0], [1, 0, 0, 0], [0, 0, 0, half], [0, 0, half, 0]])


def test_a_squared_sum_is_expanded_into_the_matrix(tmp_path):
    # rain-frame form: -dT^2 + (dr + sqrt(2M/r) dT)^2 + r^2 dOmega^2
    spec = _single_chart(tmp_path, "-dT**2 + (dr + sqrt(2*M/r)*dT)**2 + r**2*(dtheta**2 + sin(theta)**2*dphi**2)",
                         coords=("T", "r", "theta", "phi"), params={"M": {"assume": ["positive"]}})
    v = sympy.sqrt(2 * M / R)
    expected = sympy.Matrix([[-1 + v**2, v, 0, 0], [v, 1, 0, 0], [0, 0, R**2, 0], [0, 0, 0, R**2 * sympy.sin(TH) ** 2]])
    assert_same_matrix(spec.metric, expected)


def test_line_element_and_metric_matrix_agree(tmp_path):
    data = base()
    data["charts"]["box"] = {"coordinates": ["T", "x", "y", "z"],
                             "line-element": "-dT**2 + dx**2 + dy**2 + dz**2 + 2*x*dT*dy"}
    doc = load_file(write(tmp_path, data, "le.toml"))
    matrix = base()
    matrix["charts"]["box"]["metric"] = [["-1", "0", "x", "0"], ["0", "1", "0", "0"],
                                         ["x", "0", "1", "0"], ["0", "0", "0", "1"]]
    doc_m = load_file(write(tmp_path, matrix, "m.toml"))
    x = sympy.Symbol("x", real=True)
    expected = sympy.Matrix([[-1, 0, x, 0], [0, 1, 0, 0], [x, 0, 1, 0], [0, 0, 0, 1]])
    assert build_chart(doc, "box").metric == expected
    assert build_chart(doc_m, "box").metric == expected


def test_definitions_are_substituted_into_the_matrix(tmp_path):
    spec = build_chart(load_file(write(tmp_path, base())))
    f = 1 - 2 * M / R + Q**2 / R**2
    assert_same_matrix(spec.metric, sympy.diag(-f, 1 / f, R**2, R**2 * sympy.sin(TH) ** 2))
    assert spec.coords == (T, R, TH, PH)
    assert set(spec.params) == {M, Q}


# --------------------------------------------------------------------------- the line element read off its tree

BUNDLED = Path(__file__).resolve().parents[1] / "catalog" / "data" / "spacetimes"


def _line_elements():
    for path in sorted(BUNDLED.glob("*.toml")):
        doc = load_file(path)
        for chart, c in doc.data["charts"].items():
            if "line-element" in c:
                yield pytest.param(doc, chart, id=f"{doc.id}:{chart}")


@pytest.mark.parametrize(("doc", "chart"), list(_line_elements()))
def test_every_bundled_line_element_gives_sympys_hessian(doc, chart, monkeypatch):
    """g_ab = (1/2) d^2(ds^2)/d(dx^a)d(dx^b), with sympy.hessian as the reference (general-purpose library)."""
    import gravicat.format.charts as mf  # the one chart builder

    seen = []
    real = mf._quadratic_form

    def spy(form, dsyms, *rest):
        seen.append((form, dsyms))
        return real(form, dsyms, *rest)

    monkeypatch.setattr(mf, "_quadratic_form", spy)
    spec = build_chart(doc, chart)
    [(form, dsyms)] = seen  # the line element as built from the file, before it became a matrix
    assert mf._split_quadratic(form, dsyms) is not None  # read off the tree, not differentiated
    reference = sympy.hessian(form, dsyms) / 2
    n = len(dsyms)
    assert spec.metric.T == spec.metric
    assert all(sympy.cancel(spec.metric[i, j] - reference[i, j]) == 0 for i in range(n) for j in range(i, n))


def test_tree_reading_agrees_with_differentiation_on_a_nested_square(tmp_path):
    # a Kerr-Schild-like form -dt^2 + dx^2 + dy^2 + dz^2 + (M/r)(l_a dx^a)^2 with l built from a definition
    data = {"id": "fen-square", "title": "Square", "field-equations": "none",
            "parameters": {"M": {"assume": ["positive"]}},
            "charts": {"main": {"coordinates": ["t", "x", "y", "z"],
                                "define": {"r": "sqrt(x**2 + y**2 + z**2)"},
                                "line-element": "-dt**2 + dx**2 + dy**2 + dz**2 "
                                                "+ M*(dt + x*dx/r + y*dy/r + z*dz/r)**2/r"}}}
    spec = build_chart(load_file(write(tmp_path, data)))
    x, y, z = (sympy.Symbol(n, real=True) for n in "xyz")
    rr = sympy.sqrt(x**2 + y**2 + z**2)
    ell = [1, x / rr, y / rr, z / rr]
    expected = sympy.diag(-1, 1, 1, 1) + sympy.Matrix(4, 4, lambda i, j: M * ell[i] * ell[j] / rr)
    assert_same_matrix(spec.metric, expected)
    assert spec.metric[0, 1] == M * x / rr**2  # half of the cross term's 2 M x / r^2, read off exactly


def test_lower_degree_terms_that_cancel_are_still_accepted(tmp_path):
    # x*(x + 1) - x**2 - x is zero only after cancellation: the differentiating path decides, as before
    spec = _single_chart(tmp_path, "-dt**2 + dx**2 + dy**2 + dz**2 + (x*(x + 1) - x**2 - x)*dt",
                         coords=("t", "x", "y", "z"))
    assert spec.metric == sympy.diag(-1, 1, 1, 1)


def _bundled_charts():
    from gravicat.format.bundled import iter_bundled_documents

    for doc in iter_bundled_documents():
        for chart in doc.chart_names:
            yield pytest.param(doc, chart, id=f"{doc.id}:{chart}")


@pytest.mark.parametrize(("doc", "chart"), list(_bundled_charts()))
def test_the_layered_chart_is_the_built_chart_with_definitions_kept(doc, chart):
    """One chart builder: the exporters' form (definitions as symbols) expands to exactly the metric
    every verifier gets (compared by sympy's cancel, the reference library's normal form)."""
    from gravicat.format.charts import layered_chart

    spec = build_chart(doc, chart)
    lay = layered_chart(doc, chart)
    assert lay.coords == tuple(spec.coords) and lay.params == tuple(spec.params)
    n = len(spec.coords)
    for i in range(n):
        for j in range(i, n):
            diff = lay.expand(lay.metric[i, j]) - spec.metric[i, j]
            assert diff == 0 or sympy.cancel(diff) == 0, (i, j)
