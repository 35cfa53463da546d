"""format: the metric-file language (the bottom room).

Owns the whitelist expression parser (:mod:`.expr`), the metric-file schema, validation and
canonical form (:mod:`.metricfile`), the one chart builder (:mod:`.charts`: ``build_chart`` for
the verifiers, ``layered_chart`` with definitions kept for the exporters), the chart
specification every other room consumes (:mod:`.chartspec`), the one ``NAME=VALUE`` option
parser (:mod:`.assign`), the one reader of the bundled catalogue (:mod:`.bundled`: spacetimes and
initial data), parse-time size estimates (:mod:`.size`), declared types, symmetries and energy
conditions (:mod:`.declarations`) and initial-data entries (:mod:`.initialdata`).
Expressions from files and options are data: parsed by a whitelist, never evaluated.

May import: the core contract only (``gravicat.errors``, ``gravicat.checks``). Nothing here
imports another room.
"""
