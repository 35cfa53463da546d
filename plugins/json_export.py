"""Built-in exporter: the canonical JSON form plus the stored verification results."""

from __future__ import annotations

import json

from gravicat import hookimpl


class JsonExporter:
    name = "json"
    version = "1"
    suffix = ".json"

    def export(self, document, context) -> str:
        from gravicat.format.metricfile import EXPORT_FORMAT

        payload = {
            "format": EXPORT_FORMAT,
            "revision": context["revision"],
            "metric": document.data,
            "checks": context.get("checks", []),
        }
        return json.dumps(payload, ensure_ascii=False, indent=2) + "\n"


@hookimpl
def register_exporters():
    return [JsonExporter()]
