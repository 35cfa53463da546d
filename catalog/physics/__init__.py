"""physics: what a relativist asks of a metric.

Owns the field-equation claims and their residuals, the one copy used by the verifiers and by
repair (:mod:`.claims`); observers and circular orbits (horizons, photon orbits, ISCO, clock
rates: :mod:`.orbits` over :mod:`.parameters`, :mod:`.equatorial`, :mod:`.roots`,
:mod:`.landmarks` and :mod:`.clocks`); geodesic integration of exported code (:mod:`.probe` with
:mod:`.probe_rays`, :mod:`.probe_stops`, :mod:`.probe_separable`); many rays and the camera of
``image`` (:mod:`.geodesics`, :mod:`.camera`); geometric units (:mod:`.units`); the equivalence
of charts and entries (:mod:`.equivalence` over :mod:`.equivalence_sides`, :mod:`.equivalence_maps`
and :mod:`.equivalence_invariants`); classification (:mod:`.classify` over :mod:`.petrov`,
:mod:`.killing`, :mod:`.matter`, :mod:`.energy_proof` and :mod:`.positivity`); and the 3+1 split
(:mod:`.split`, :mod:`.adm`, :mod:`.initial_data`).

May import: ``export``, ``engine``, ``format`` and the core contract. Curvature comes from the
engine; nothing here re-derives it.
"""
