"""Classification benchmark: the Petrov type and the energy conditions beside the field-equation check.

Not collected by pytest. Run by hand:

    python tests/benchmarks/bench_classify.py

For each chart (Kerr in Boyer-Lindquist and Kerr-Schild form, and a few others) it prints, measured in
the same run as CPU seconds of this process from a parsed ChartSpec: the field-equations check
(``Geometry(spec).verify`` of the shared claim residuals, what the ``field-equations`` verifier runs),
the Petrov type (:func:`gravicat.physics.petrov.petrov_type`, sampled stage and proof) and the energy
conditions (:func:`gravicat.physics.matter.energy_conditions`), each on a fresh Geometry, and the ratio
of each to the check (the baseline).
"""

from __future__ import annotations

import time

CASES = [("kerr", "boyer-lindquist"), ("kerr", "kerr-schild"), ("kerr-newman", "boyer-lindquist"),
         ("schwarzschild", "schwarzschild"), ("godel", "original"), ("morris-thorne", "areal"),
         ("flrw-closed", "hyperspherical")]


def _cpu(fn):
    t = time.process_time()
    out = fn()
    return time.process_time() - t, out


def main():
    from gravicat.engine.geometry import Geometry
    from gravicat.format.bundled import bundled_path, read_bundled
    from gravicat.format.metricfile import build_chart
    from gravicat.physics.claims import SpecMatter, field_equation_residuals
    from gravicat.physics.matter import energy_conditions
    from gravicat.physics.petrov import petrov_type

    print(f"{'entry:chart':40} {'check s':>8} {'petrov s':>9} {'ratio':>6} {'energy s':>9} {'ratio':>6}  type")
    for entry, chart in CASES:
        spec = build_chart(read_bundled(bundled_path(entry)), chart)
        claim = spec.field_equations
        if claim == "none":
            def check(spec=spec):
                geo = Geometry(spec)
                return geo.prove_values(lambda X: {"G": X.einstein[0][0]})
        else:
            def check(spec=spec, claim=claim):
                geo = Geometry(spec)
                return geo.verify(lambda X: field_equation_residuals(X, claim, SpecMatter(spec, X)))
        tc, _ = _cpu(check)
        tp, res = _cpu(lambda spec=spec: petrov_type(Geometry(spec)))
        te, _ = _cpu(lambda spec=spec: energy_conditions(Geometry(spec), spec))
        print(f"{entry + ':' + chart:40} {tc:8.3f} {tp:9.3f} {tp / max(tc, 1e-6):6.1f} {te:9.3f} "
              f"{te / max(tc, 1e-6):6.1f}  {res.type} ({res.method})")


if __name__ == "__main__":
    main()
