"""Built-in exporter: the canonical JSON form plus the stored verification results.

``json.dumps`` escapes every string (quotes, backslashes, control characters), so catalogue text
is data here whatever it holds."""

from __future__ import annotations

import json
from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import ExportContext
    from gravicat.format.metricfile import MetricDocument


class JsonExporter:
    name = "json"
    version = "1"
    suffix = ".json"

    def export(self, document: MetricDocument, context: ExportContext) -> str:
        from gravicat.checks import ExportContext
        from gravicat.format.metricfile import EXPORT_FORMAT

        context = ExportContext.coerce(context)
        payload = {
            "format": EXPORT_FORMAT,
            "revision": context.revision,
            "metric": document.data,
            "checks": list(context.checks),
        }
        return json.dumps(payload, ensure_ascii=False, indent=2) + "\n"


@hookimpl
def register_exporters():
    return [JsonExporter()]
