"""export: turning a checked chart into code.

Owns the shared code generation behind the exporters (:mod:`.codegen`): identifiers, common
sub-expressions, the C99 / Python / LaTeX emitters' building blocks and the numeric
self-test of an export.

May import: ``engine``, ``format`` and the core contract.
"""
