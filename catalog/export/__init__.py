"""export: turning a checked chart into code.

Owns the shared code generation behind the exporters: the status gate, provenance header,
prepared chart and the Christoffel symbols of a LaTeX export (:mod:`.codegen`, which also
re-exports the names below for the exporter plugins), the fixed parameter values of an export
(:mod:`.parameters`), and what numeric targets print (:mod:`.numeric`: metric, derivatives,
closed-form inverse, common sub-expressions, identifiers, wrapping).

May import: ``engine``, ``format`` and the core contract.
"""
