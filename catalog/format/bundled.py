"""The bundled reference catalogue: the one reader of the metric files shipped in the package.

The files are package data of ``gravicat.data.spacetimes``, one TOML file per spacetime, named
after its id. Every room that needs them (the store's ``init``, the engine's resolver of limit
targets, repair's candidate targets, the Python API) reads them here, so they are listed, decoded
and validated one way, with the source ``bundled:<file name>`` in every message and document.

The initial-data entries (``kind = "initial-data"``, docs/initial-data.md) are package data too, in the
folder ``initial-data`` of ``gravicat.data``: :func:`initial_data_files` and
:func:`iter_initial_data_documents` read them, :func:`iter_all_bundled_documents` gives both kinds
(what ``init`` loads). :func:`bundled_files` and :func:`iter_bundled_documents` stay the spacetimes only,
the documents that charts, orbits, limits and probes compute with.

Imports stay light: the files are decoded only when asked for.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from gravicat.format.metricfile import MetricDocument

PACKAGE = "gravicat.data.spacetimes"
INITIAL_DATA = "initial-data"  # a folder of the package gravicat.data


def bundled_folder():
    """The package-data folder of the bundled files (an importlib.resources Traversable)."""
    from importlib.resources import files

    return files(PACKAGE)


def bundled_files() -> list[Path]:
    """Every bundled metric file, sorted by file name."""
    return sorted((Path(str(p)) for p in bundled_folder().iterdir() if p.name.endswith(".toml")),
                  key=lambda p: p.name)


def initial_data_files() -> list[Path]:
    """Every bundled initial-data file, sorted by file name."""
    from importlib.resources import files

    folder = files("gravicat.data") / INITIAL_DATA
    if not folder.is_dir():
        return []
    return sorted((Path(str(p)) for p in folder.iterdir() if p.name.endswith(".toml")), key=lambda p: p.name)


def bundled_path(entry_id: str) -> Path | None:
    """The bundled file named after ``entry_id`` (``kerr`` -> ``kerr.toml``), or None.

    Only a well-formed id is looked up (no path separators, dots or other characters a file name
    could abuse); whether the file really holds that id is for the caller to check."""
    from gravicat.format.metricfile import SLUG

    if not isinstance(entry_id, str) or not SLUG.match(entry_id):
        return None
    path = bundled_folder() / f"{entry_id}.toml"
    if path.is_file():
        return Path(str(path))
    return next((p for p in initial_data_files() if p.name == f"{entry_id}.toml"), None)


def read_bundled(path: Path) -> MetricDocument:
    """Decode and validate one bundled file; its source is ``bundled:<file name>``."""
    from gravicat.format.metricfile import decode_toml, validate

    path = Path(str(path))
    raw = decode_toml(path)
    return validate(raw.data, f"bundled:{path.name}")


def iter_bundled_documents() -> Iterator[MetricDocument]:
    """Every bundled file as a validated document, in file-name order."""
    for path in bundled_files():
        yield read_bundled(path)


def iter_initial_data_documents() -> Iterator[MetricDocument]:
    """Every bundled initial-data file as a validated document, in file-name order."""
    for path in initial_data_files():
        yield read_bundled(path)


def iter_all_bundled_documents() -> Iterator[MetricDocument]:
    """The spacetimes, then the initial-data entries: the whole bundled catalogue, as ``init`` loads it."""
    yield from iter_bundled_documents()
    yield from iter_initial_data_documents()
