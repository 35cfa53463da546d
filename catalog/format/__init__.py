"""format: the metric-file language (the bottom room).

Owns the whitelist expression parser (:mod:`.expr`), the metric-file schema, validation and the
one chart builder (:mod:`.metricfile`), and the chart specification every other room consumes
(:mod:`.chartspec`). Expressions from files are data: parsed by a whitelist, never evaluated.

May import: the core contract only (``gravicat.errors``, ``gravicat.checks``). Nothing here
imports another room.
"""
