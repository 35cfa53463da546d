"""Catalogue text never runs as code: hostile titles, notes, references and descriptions through every
exporter, the generated Python imported, the C header compiled (gcc -fsyntax-only), the probe run,
and the LaTeX checked for live commands. Common practice (no source): an injection test asserts that
a sentinel file is never created."""

from __future__ import annotations

import importlib.util
import os
import re
import shutil
import subprocess

import pytest

from gravicat.checks import ExportContext
from gravicat.export.escape import c_comment, c_string, latex_comment, latex_text, python_docstring, visible
from gravicat.format.metricfile import validate
from gravicat.physics.probe import probe
from gravicat.plugins.c_export import CExporter
from gravicat.plugins.json_export import JsonExporter
from gravicat.plugins.latex_export import LatexExporter
from gravicat.plugins.python_export import PythonExporter


def payloads(sentinel: str) -> list[str]:
    s = repr(sentinel)
    code = f"__import__('pathlib').Path({s}).write_text('pwned')"
    return [
        f"Harmless demo\n{code}#",
        f'Demo """; {code}; """',
        f"Demo */ int pwned = 1; /* {code}",
        "Demo \\input{secret.tex} \\write18{touch pwned} ^^5cinput{secret.tex} $x$ & # _ % ~",
        f"Demo\r{code}\r\n{code}",
        f"Demo\u2028{code}\u2029{code}\x85{code}",
        f"Demo\x00NUL\x1b]0;title\x07\x0b\x0c\u202e{code}",
        "Demo ??/ trigraph ??= " + "\\",
        "Long " + "x" * 20000 + f" \n{code}",
    ]


def hostile_document(title: str, text: str):
    """A document whose text fields hold ``title`` / ``text``. ``add`` now refuses control characters in
    text fields, so the document is validated with plain text and the hostile text put in afterwards: the
    exporters must be safe on their own (an older stored revision, a third-party reader)."""
    raw = {
        "id": "hostile-demo", "title": "Demo", "summary": "Demo", "notes": "Demo",
        "field-equations": "vacuum",
        "references": [{"citation": "Demo"}],
        "parameters": {"M": {"description": "Demo", "assume": ["positive"], "range": "M > 0", "default": "1"}},
        "charts": {"schwarzschild": {
            "coordinates": ["t", "r", "theta", "phi"], "domain": ["r > 2*M", "0 < theta < pi"],
            "line-element": "-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"}},
    }
    doc = validate(raw, "hostile.toml")
    doc.data.update(title=title, summary=text, notes=text, references=[{"citation": text}])
    doc.data["parameters"]["M"]["description"] = text
    return doc


def _live_latex(text: str) -> str:
    """The LaTeX with every comment removed (from an unescaped % to the end of the line)."""
    return "\n".join(re.sub(r"(?<!\\)%.*", "", line) for line in text.splitlines())


@pytest.fixture
def sentinel(tmp_path):
    path = tmp_path / "pwned.txt"
    yield path
    assert not path.exists(), "catalogue text ran as code"


def test_escaping_functions_leave_no_line_break_or_terminator():
    nasty = "a\nb\rc\u2028d\u2029e\x00f\x85g */ /* ??/ \\ \" ''' {}$&#^_%~"
    for out in (visible(nasty), c_comment(nasty), latex_comment(nasty), python_docstring(nasty)):
        assert out.isprintable() and "\n" not in out and "\r" not in out
    assert "*/" not in c_comment(nasty) and "/*" not in c_comment(nasty) and "??" not in c_comment(nasty)
    assert '"""' not in python_docstring(nasty) and '"' not in python_docstring(nasty).replace('\\"', "")
    assert eval(python_docstring(nasty).join('""')) == visible(nasty)  # noqa: S307 - our own literal
    assert re.fullmatch(r'"([ -~])*"', c_string(nasty)) and "??" not in c_string(nasty)
    live = latex_text(nasty)
    assert set(re.findall(r"\\[A-Za-z]+", live)) == {"\\textbackslash", "\\textasciicircum", "\\textasciitilde"}


def test_every_exporter_keeps_hostile_text_inert(tmp_path, sentinel):
    for i, title in enumerate(payloads(str(sentinel))):
        doc = hostile_document(title, title)
        context = ExportContext(revision=doc.hash, allow_unverified=True, date="2031-04-05", source=title)
        # python: the module imports, and keeps the title as data
        text = PythonExporter().export(doc, context)
        path = tmp_path / f"hostile_{i}.py"
        path.write_text(text, encoding="utf-8")
        spec = importlib.util.spec_from_file_location(f"hostile_{i}", path)
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        assert module.TITLE == title and module.ENTRY == "hostile-demo"
        assert module.metric([0.0, 10.0, 1.0, 0.0], {"M": 1.0})[0, 0] == pytest.approx(-0.8, rel=1e-12)
        # C: the header compiles, and nothing leaves the comment block
        c_text = CExporter().export(doc, context)
        assert "pwned = 1" not in re.sub(r"/\*.*?\*/", "", c_text, flags=re.S)
        if shutil.which("gcc"):
            c_file = tmp_path / f"hostile_{i}.c"
            c_file.write_text(c_text + "\nint main(void) { return 0; }\n", encoding="utf-8")
            done = subprocess.run(["gcc", "-std=c99", "-fsyntax-only", "-Werror=comment", "-Wtrigraphs",
                                   str(c_file)], capture_output=True, text=True, timeout=60)
            assert done.returncode == 0, done.stderr[:2000]
        # LaTeX: no injected command anywhere, live or in a comment
        tex = LatexExporter().export(doc, context)
        for command in ("\\input", "\\write"):
            assert command not in tex
        assert "^^" not in _live_latex(tex)  # TeX reads nothing after %: ^^ is inert only in a comment
        benign = LatexExporter().export(hostile_document("Demo", "Demo"), context)
        assert set(re.findall(r"\\[A-Za-z]+", _live_latex(tex))) <= set(re.findall(r"\\[A-Za-z]+", _live_latex(benign)))
        # JSON: data round-trips
        import json

        assert json.loads(JsonExporter().export(doc, context))["metric"]["title"] == title


def test_probe_never_executes_catalogue_text(sentinel):
    for title in payloads(str(sentinel))[:3]:
        doc = hostile_document(title, title)
        out = probe(doc, PythonExporter(), params="M=1", start="r=10,theta=pi/2", orbit="circular", orbits=1)
        assert out["termination"] == "completed"


def test_cli_add_verify_export_probe_on_a_hostile_entry(tmp_path, empty_catalogue, python_target, sentinel):
    cli = empty_catalogue
    for i, title in enumerate(payloads(str(sentinel))[:4]):
        toml = tmp_path / f"hostile{i}.toml"
        esc = title.encode("unicode_escape").decode("ascii").replace('"', '\\"')
        toml.write_text(f'''id = "hostile-{i}"
title = "{esc}"
summary = "{esc}"
notes = "{esc}"
field-equations = "vacuum"

[[references]]
citation = "{esc}"

[parameters.M]
description = "{esc}"
assume = ["positive"]
range = "M > 0"
default = "1"

[charts.schwarzschild]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 2*M", "0 < theta < pi"]
line-element = "-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
''', encoding="utf-8")
        added = cli("add", str(toml))
        if added.exit_code != 0:  # text with control characters may be refused at add: one line, exit 2
            assert added.exit_code == 2 and len(added.stderr.strip().splitlines()) == 1
            continue
        assert cli("verify", f"hostile-{i}").exit_code == 0
        for target in ("python", "c", "latex", "json"):
            out = tmp_path / f"h{i}_{target}.py"
            done = cli("export", f"hostile-{i}", "--to", target, "-o", str(out))
            assert done.exit_code == 0, done.stderr
        spec = importlib.util.spec_from_file_location(f"h{i}", tmp_path / f"h{i}_python.py")
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        assert module.TITLE == title
        run = cli("probe", f"hostile-{i}", "--from", "r=10,theta=pi/2", "--orbits", "1")
        assert run.exit_code == 0, run.stderr


def test_export_output_is_written_through_a_safe_temporary_file(tmp_path, cli):
    from gravicat.cli.export import write_atomically

    victim = tmp_path / "victim.txt"
    victim.write_text("keep me", encoding="utf-8")
    target = tmp_path / "out.json"
    (tmp_path / "out.json.part").symlink_to(victim)  # a planted symlink is never followed
    write_atomically(target, "new text\n")
    assert target.read_text(encoding="utf-8") == "new text\n" and victim.read_text(encoding="utf-8") == "keep me"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.json", "out.json.part", "victim.txt"]
    # a failure (the target is a directory) leaves nothing behind and reports one line
    (tmp_path / "adir").mkdir()
    from gravicat import InputError

    with pytest.raises(InputError):
        write_atomically(tmp_path / "adir", "x")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["adir", "out.json", "out.json.part", "victim.txt"]
    path = os.fspath(tmp_path / "cli.json")
    done = cli("export", os.fspath(tmp_path / "missing.toml"), "-o", path)
    assert done.exit_code == 2 and not os.path.exists(path)
