"""physics: what a relativist asks of a metric.

Owns observers and circular orbits (horizons, photon orbits, ISCO, clock rates:
:mod:`.orbits`), geodesic integration of exported code (:mod:`.probe`), geometric units
(:mod:`.units`) and the equivalence of charts and entries (:mod:`.equivalence`).

May import: ``export``, ``engine``, ``format`` and the core contract. Curvature comes from the
engine; nothing here re-derives it.
"""
