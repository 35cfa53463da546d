"""Writing an accepted repair back into the metric file (in place for TOML, atomically)."""

from __future__ import annotations

import os
import re
import tempfile
from dataclasses import dataclass
from pathlib import Path

from gravicat.errors import CatalogError, InputError
from gravicat.format.metricfile import canonical_json
from gravicat.repair.reports import Suggestion

# =========================================================================== writing a repair back


@dataclass
class Written:
    """Where a repair was written: ``mode`` is ``toml-in-place`` or ``json-beside``."""

    path: Path
    mode: str
    note: str = ""


def _compact(text: str) -> str:
    """The canonical text in the usual hand-written style (no spaces around * / **)."""
    return text.replace(" ** ", "**").replace(" * ", "*").replace(" / ", "/")


def _chart_region(text: str, chart: str) -> tuple[int, int] | None:
    """Character range of the chart's tables in a TOML file: [charts.NAME] and its sub-tables."""
    headers = [(m.start(), m.group(1).strip()) for m in re.finditer(r"(?m)^[ \t]*\[+([^\]\n]+)\]+[ \t]*(?:#.*)?$",
                                                                   text)]
    start = end = None
    own = (f"charts.{chart}", f'charts."{chart}"')
    for pos, name in headers:
        mine = any(name == o or name.startswith(o + ".") for o in own)
        if mine and start is None:
            start = pos
        elif start is not None and not mine:
            end = pos
            break
    if start is None:
        return None
    return start, len(text) if end is None else end


def _raw_field(raw: dict, chart: str, fld: str):
    base = f"charts.{chart}."
    rest = fld[len(base):]
    node = raw.get("charts", {}).get(chart, {})
    m = re.match(r"^metric\[(\d+)\]\[(\d+)\]$", rest)
    if m:
        try:
            return [node["metric"][int(m.group(1))][int(m.group(2))],
                    node["metric"][int(m.group(2))][int(m.group(1))]]
        except (KeyError, IndexError, TypeError):
            return None
    for p in rest.split("."):
        if not isinstance(node, dict) or p not in node:
            return None
        node = node[p]
    return [node]


def _is_diagonal(fld: str) -> bool:
    m = re.search(r"metric\[(\d+)\]\[(\d+)\]$", fld)
    return bool(m) and m.group(1) == m.group(2)


def _toml_in_place(path: Path, text: str, suggestion: Suggestion) -> str | None:
    """The file text with each edited expression string replaced where it appears verbatim, else None."""
    import tomllib

    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        return None
    region = _chart_region(text, suggestion.chart)
    if region is None:
        return None
    lo, hi = region
    part = text[lo:hi]
    for e in suggestion.edits:
        values = _raw_field(raw, suggestion.chart, e.field)
        if not values or not all(isinstance(v, str) for v in values) or len(set(values)) != 1:
            return None
        old = values[0]
        if any(ch in old for ch in "\"'\\\n"):
            return None
        new = _compact(e.suggested)
        expected = 1 if len(values) == 1 or _is_diagonal(e.field) else 2
        hits = sum(len(re.findall(re.escape(q + old + q), part)) for q in ('"', "'"))
        if hits != expected:
            return None
        for q in ('"', "'"):
            part = part.replace(q + old + q, q + new + q)
    return text[:lo] + part + text[hi:]


def _atomic_write(path: Path, content: str) -> None:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=str(path.parent))
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(content)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_suggestion(path: Path, suggestion: Suggestion) -> Written:
    """Write a repair: in place in a TOML file when every edited string appears there verbatim
    (the rest of the file, comments included, is kept), else the canonical JSON beside it
    (``NAME.repaired.json``). The written file is read back and must give the repaired revision hash."""
    from gravicat.format.metricfile import load_file

    path = Path(path)
    target_hash = suggestion.document.hash
    if path.suffix.lower() == ".toml":
        try:
            original = path.read_text(encoding="utf-8")
        except OSError as exc:
            raise InputError(str(path), None, f"cannot read file ({exc.strerror or exc})") from None
        new_text = _toml_in_place(path, original, suggestion)
        if new_text is not None:
            _atomic_write(path, new_text)
            try:
                ok = load_file(path).hash == target_hash
            except CatalogError:
                ok = False
            if ok:
                return Written(path, "toml-in-place")
            _atomic_write(path, original)  # the edit did not land as intended: put the file back
    beside = path.with_name(f"{path.stem}.repaired.json")
    _atomic_write(beside, canonical_json(suggestion.document.data, indent=2) + "\n")
    note = (f"{path.name} was left unchanged: the edited expression does not appear verbatim there; "
            f"the repaired canonical form is in {beside.name}")
    return Written(beside, "json-beside", note)
