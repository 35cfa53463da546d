"""The plugin contract: every gravicat hook is declared here, and only here.

The marker project name is ``gravicat``, which is also the entry-point group
plugins register under (``[project.entry-points.gravicat]``). Built-in
verifiers, exporters and readers are ordinary plugins registered through that
group, exactly as third-party packages are.

Hooks contribute objects; the core runs them (it isolates a crash, times each
verifier and records provenance), so a faulty plugin cannot stop the others.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import pluggy

PROJECT = "gravicat"
hookspec = pluggy.HookspecMarker(PROJECT)
hookimpl = pluggy.HookimplMarker(PROJECT)

if TYPE_CHECKING:  # annotations only: importing stays cheap
    from pathlib import Path

    from gravicat.checks import Exporter, Verifier
    from gravicat.format.metricfile import RawDocument


@hookspec
def register_verifiers() -> list[Verifier]:
    """Contribute verifiers.

    Called once per run, when the verifier registry is first needed (``check``,
    ``verify``, ``plugins``). All implementations run and their lists are
    joined; verifier names must be unique across plugins.

    :return: objects with ``name``, ``version`` and
        ``check(subject: gravicat.PreparedChart) -> list[gravicat.CheckResult]``;
        ``subject`` is the prepared chart, typed by the :class:`gravicat.PreparedChart`
        Protocol (exactly what a verifier may use). Optional ``screens_repairs = True``:
        ``repair`` reruns the verifier on its candidates (selected by this attribute).
    """


@hookspec
def register_exporters() -> list[Exporter]:
    """Contribute export targets.

    Called once per run, when the exporter registry is first needed
    (``export``, ``plugins``). All implementations run and their lists are
    joined; target names must be unique across plugins.

    :return: objects with ``name`` (the ``--to`` value), ``version``,
        ``suffix`` and ``export(document, context: gravicat.ExportContext) -> str``;
        ``context`` is the frozen :class:`gravicat.ExportContext` (revision, checks,
        chart, params, allow_unverified, ...). Catalogue text must reach the output
        only through the target language's escaping (see ``gravicat.export.escape``).
    """


@hookspec(firstresult=True)
def read_metric_source(path: Path) -> RawDocument | None:
    """Read a metric file if this plugin knows its format, else return None.

    Called for every file given to ``add`` or ``check``. firstresult: stops at
    the first non-None result. The file is data: never execute it. Raise
    :class:`gravicat.InputError` for a file in your format that is malformed.

    :param path: the file to read.
    :return: the decoded document (a plain dict of TOML/JSON-like values)
        wrapped in :class:`gravicat.format.metricfile.RawDocument`, or None.
    """
