"""engine: exact computation on a prepared chart.

Owns the exact field of rational functions (:mod:`.ratfun`, assembled from :mod:`.generators`,
:mod:`.elements`, :mod:`.rewrite` and the ``field_*`` mixins), the
generic sample points (:mod:`.sampling`), the prepared chart with its curvature, invariants and
zero proofs (:mod:`.geometry`), the one child-process runner with CPU-second budgets
(:mod:`.fork`) and the verification runner that isolates and times every verifier
(:mod:`.runner`).

May import: ``format`` and the core contract (``errors``, ``checks``, ``hookspecs``,
``registry``). Never the store, physics, export, repair, api or cli rooms, and never the
built-in plugins.
"""
