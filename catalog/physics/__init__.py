"""physics: what a relativist asks of a metric.

Owns the field-equation claims and their residuals, the one copy used by the verifiers and by
repair (:mod:`.claims`); observers and circular orbits (horizons, photon orbits, ISCO, clock
rates: :mod:`.orbits` over :mod:`.parameters`, :mod:`.equatorial`, :mod:`.roots`,
:mod:`.landmarks` and :mod:`.clocks`); geodesic integration of exported code (:mod:`.probe`);
geometric units (:mod:`.units`); and the equivalence of charts and entries (:mod:`.equivalence`
over :mod:`.equivalence_sides`, :mod:`.equivalence_maps` and :mod:`.equivalence_invariants`).

May import: ``export``, ``engine``, ``format`` and the core contract. Curvature comes from the
engine; nothing here re-derives it.
"""
