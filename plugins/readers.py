"""Built-in reader: metric files in TOML (the authoring format) and JSON (the canonical form)."""

from __future__ import annotations

from gravicat import hookimpl
from gravicat.format.metricfile import decode_builtin


@hookimpl(trylast=True)
def read_metric_source(path):
    return decode_builtin(path)
