"""The documentation is complete and its examples run.

- Every command and every option ``gravicat --help`` shows (the typer/click command tree, hidden
  options excluded) has its place in docs/commands.md: a section ``## `gravicat NAME` `` per
  command that names each of its options; the global options in "Global options".
- Every setting of ``gravicat.config.SETTINGS`` is in docs/configuration.md with its environment
  variable and its config.toml key.
- Every example in README.md and docs/*.md runs exactly as written: each command line of a
  ```` ```sh ```` block, in document order, with the virtualenv's ``bin`` first on ``PATH``, in a
  temporary directory holding a copy of ``catalog/examples/`` and ``catalog/data/spacetimes/`` (so
  the repository-relative paths of the examples work and nothing in the repository is written),
  on a temporary catalogue that holds the bundled entries unverified (the state
  ``gravicat init --no-verify`` leaves; README's set-up command has run ``init`` for a reader).
  The exit code must be 0, or the one a trailing comment announces (``# exit 1``). A line whose
  comment says ``not run here: REASON``, or a block preceded by ``<!-- not run here: REASON -->``,
  is skipped; the reason must be given. Synopses are written in ```` ```text ```` blocks.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest
import typer

from gravicat.cli import app
from gravicat.config import SETTINGS

ROOT = Path(__file__).resolve().parent.parent
DOCS = ROOT / "docs"
BIN = Path(sys.executable).parent
SKIP = re.compile(r"not run here:\s*(\S.*)")
BLOCK_SKIP = re.compile(r"^<!--\s*not run here:\s*(\S.*?)\s*-->$")
EXIT = re.compile(r"\bexit (\d+)\b")


# --- commands and options -----------------------------------------------------------------------

def _options(command) -> list[str]:
    """The flags of the visible options of a click command (the longest spelling of each)."""
    out = []
    for param in command.params:
        if param.param_type_name != "option" or getattr(param, "hidden", False):
            continue
        out.append(max(param.opts, key=len))
    return out


def _tree() -> tuple[list[str], dict[str, list[str]]]:
    root = typer.main.get_command(app)
    commands = {name: _options(cmd) for name, cmd in root.commands.items() if not cmd.hidden}
    return _options(root), commands


def _sections(text: str) -> dict[str, str]:
    """Level-2 sections of a Markdown page by heading text (fenced blocks do not end a section)."""
    out: dict[str, str] = {}
    current, lines, fenced = None, [], False
    for line in text.splitlines():
        if line.startswith("```"):
            fenced = not fenced
        if not fenced and line.startswith("## "):
            if current is not None:
                out[current] = "\n".join(lines)
            current, lines = line[3:].strip(), []
        else:
            lines.append(line)
    if current is not None:
        out[current] = "\n".join(lines)
    return out


def test_every_command_and_option_is_documented():
    root_options, commands = _tree()
    assert commands, "no commands found in the CLI"
    sections = _sections((DOCS / "commands.md").read_text(encoding="utf-8"))
    by_command = {}
    for heading, body in sections.items():
        for name in re.findall(r"`gravicat ([a-z][a-z-]*)`", heading):
            by_command[name] = body
    missing = sorted(set(commands) - set(by_command))
    assert not missing, f"docs/commands.md has no section '## `gravicat NAME`' for: {missing}"
    undocumented = [f"gravicat {name} {flag}" for name, flags in commands.items() for flag in flags
                    if not re.search(rf"(?<![\w-]){re.escape(flag)}(?![\w-])", by_command[name])]
    assert not undocumented, f"options not described in their section of docs/commands.md: {undocumented}"
    global_section = sections.get("Global options", "")
    for flag in root_options:
        assert re.search(rf"(?<![\w-]){re.escape(flag)}(?![\w-])", global_section), \
            f"global option {flag} not in 'Global options'"


def test_every_setting_is_documented():
    text = (DOCS / "configuration.md").read_text(encoding="utf-8")
    for name, (env, key) in SETTINGS.items():
        assert f"`{env}`" in text and f"`{key}`" in text, name


# --- examples -----------------------------------------------------------------------------------

@dataclass(frozen=True)
class Example:
    where: str          # "docs/commands.md:123"
    command: str        # as written (continuation lines joined)
    expect: int         # expected exit code
    skip: str | None    # why it is not run here, or None


def _split_comment(line: str) -> tuple[str, str]:
    """Command and trailing comment: the first '#' outside quotes that starts a word."""
    quote = None
    for i, ch in enumerate(line):
        if quote:
            if ch == quote:
                quote = None
        elif ch in "'\"":
            quote = ch
        elif ch == "#" and (i == 0 or line[i - 1].isspace()):
            return line[:i].rstrip(), line[i + 1:].strip()
    return line.rstrip(), ""


def examples(path: Path) -> list[Example]:
    lines = path.read_text(encoding="utf-8").splitlines()
    rel = path.relative_to(ROOT).as_posix()
    out: list[Example] = []
    i, previous = 0, ""
    while i < len(lines):
        line = lines[i]
        if not line.startswith("```"):
            if line.strip():
                previous = line.strip()
            i += 1
            continue
        language = line[3:].strip()
        block_skip = BLOCK_SKIP.match(previous)
        i += 1
        while i < len(lines) and not lines[i].startswith("```"):
            start, text = i, lines[i]
            while text.endswith("\\") and i + 1 < len(lines):
                i += 1
                text = text[:-1] + " " + lines[i].strip()
            i += 1
            if language != "sh":
                continue
            command, comment = _split_comment(text.strip())
            if not command:
                continue
            skip = SKIP.search(comment)
            reason = block_skip.group(1) if block_skip else skip.group(1) if skip else None
            expect = EXIT.search(comment)
            out.append(Example(f"{rel}:{start + 1}", command, int(expect.group(1)) if expect else 0, reason))
        i += 1
        previous = ""
    return out


def _documents() -> list[Path]:
    return [ROOT / "README.md", *sorted(DOCS.glob("*.md"))]


def test_example_markers_are_well_formed():
    """Skipped examples say why; expected exit codes are 0, 1 or 2; there are examples at all."""
    found = [e for doc in _documents() for e in examples(doc)]
    assert len([e for e in found if e.skip is None]) >= 20
    for e in found:
        assert e.skip is None or len(e.skip) > 10, f"{e.where}: say why it is not run"
        assert e.expect in (0, 1, 2), e.where
    skipped = [e for e in found if e.skip is not None]
    assert len(skipped) <= 12, f"too many examples not run: {[e.where for e in skipped]}"


def test_readme_is_short_and_links_into_docs():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    assert len(text.splitlines()) <= 320
    for page in ("commands.md", "metric-files.md", "json.md", "conventions.md", "plugins.md",
                 "configuration.md", "postgresql.md", "benchmarks.md"):
        assert f"docs/{page}" in text, page
        assert (DOCS / page).is_file(), page


def test_links_between_pages_resolve():
    for doc in _documents():
        for target in re.findall(r"\]\(([^)#:]+\.(?:md|ipynb))(?:#[^)]*)?\)", doc.read_text(encoding="utf-8")):
            assert (doc.parent / target).exists(), f"{doc.relative_to(ROOT)}: broken link {target}"


@pytest.fixture(scope="module")
def seeded_catalogue(tmp_path_factory) -> Path:
    """A catalogue with the bundled entries loaded and unverified, made once and copied per page."""
    gravicat = BIN / "gravicat"
    assert gravicat.exists(), f"no gravicat script beside {sys.executable}"
    path = tmp_path_factory.mktemp("seed") / "catalogue.sqlite"
    env = _environment(path, path.parent)
    init = [str(gravicat), "init"]
    help_text = subprocess.run([*init, "--help"], env=env, capture_output=True, text=True).stdout
    if "--no-verify" in help_text:
        init.append("--no-verify")
    done = subprocess.run(init, env=env, capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr
    return path


def _environment(catalogue: Path, home: Path) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith("GRAVICAT_")}
    env.update(PATH=f"{BIN}{os.pathsep}{env.get('PATH', '')}", GRAVICAT_DB=f"sqlite:///{catalogue}",
               GRAVICAT_CONFIG=str(home / "no-config.toml"), COLUMNS="120")
    return env


@pytest.mark.parametrize("document", [p for p in _documents() if any(e.skip is None for e in examples(p))],
                         ids=lambda p: p.relative_to(ROOT).as_posix())
def test_examples_run_as_written(document, seeded_catalogue, tmp_path):
    work = tmp_path / "work"
    for sub in ("catalog/examples", "catalog/data/spacetimes"):
        shutil.copytree(ROOT / sub, work / sub, ignore=shutil.ignore_patterns("__pycache__", "*.py"))
    catalogue = tmp_path / "catalogue.sqlite"
    shutil.copy(seeded_catalogue, catalogue)
    env = _environment(catalogue, tmp_path)
    failures = []
    for example in examples(document):
        if example.skip is not None:
            continue
        done = subprocess.run(["bash", "-c", example.command], cwd=work, env=env, capture_output=True,
                              text=True, timeout=300)
        if done.returncode != example.expect:
            tail = (done.stderr.strip() or done.stdout.strip()).splitlines()[-3:]
            failures.append(f"{example.where}: exit {done.returncode}, expected {example.expect}: "
                            f"{example.command}\n    " + "\n    ".join(tail))
    assert not failures, "\n".join(failures)
