"""Classification benchmark: the Petrov type, the energy conditions and the whole `classify` report beside the
field-equation check.

Not collected by pytest. Run by hand:

    python tests/benchmarks/bench_classify.py            # the cases below
    python tests/benchmarks/bench_classify.py --all      # every chart of the bundled catalogue

For each chart it prints, measured in the same run as CPU seconds of this process from a parsed ChartSpec:
the field-equations check (``Geometry(spec).verify`` of the shared claim residuals, what the
``field-equations`` verifier runs: the baseline), the Petrov type (:func:`gravicat.physics.petrov.petrov_type`,
sampled stage and proof), the energy conditions (:func:`gravicat.physics.energy_proof.proved_energy_conditions`,
else the sampled :func:`gravicat.physics.matter.energy_conditions`) and the whole report of one chart
(:func:`gravicat.physics.classify.classify_chart`: also the tetrad, the principal null directions, the
specialisations, the Killing vectors and tensors, and Lambda as matter), each on a fresh Geometry, with the
ratio of each to the check.
"""

from __future__ import annotations

import sys
import time

CASES = [("kerr", "boyer-lindquist"), ("kerr", "kerr-schild"), ("kerr-newman", "boyer-lindquist"),
         ("schwarzschild", "schwarzschild"), ("reissner-nordstrom", "static"), ("godel", "original"),
         ("morris-thorne", "areal"), ("hayward", "ingoing-eddington-finkelstein"), ("de-sitter", "static"),
         ("flrw-closed-dust", "conformal")]


def _cpu(fn):
    t = time.process_time()
    out = fn()
    return time.process_time() - t, out


def _cases(every: bool):
    if not every:
        return CASES
    from gravicat.format.bundled import iter_bundled_documents

    return [(doc.id, c) for doc in iter_bundled_documents() for c in doc.chart_names]


def main(every: bool = False):
    from gravicat.engine.geometry import Geometry
    from gravicat.format.bundled import bundled_path, read_bundled
    from gravicat.format.metricfile import build_chart
    from gravicat.physics.claims import SpecMatter, field_equation_residuals
    from gravicat.physics.classify import classify_chart
    from gravicat.physics.energy_proof import proved_energy_conditions
    from gravicat.physics.matter import energy_conditions
    from gravicat.physics.petrov import petrov_type

    print(f"{'entry:chart':44} {'check s':>8} {'petrov s':>9} {'ratio':>6} {'energy s':>9} {'ratio':>6} "
          f"{'report s':>9} {'ratio':>6}  type, energy method")
    for entry, chart in _cases(every):
        doc = read_bundled(bundled_path(entry))
        spec = build_chart(doc, chart)
        claim = spec.field_equations
        if claim == "none":
            def check(spec=spec):
                geo = Geometry(spec)
                return geo.prove_values(lambda X: {"G": X.einstein[0][0]})
        else:
            def check(spec=spec, claim=claim):
                geo = Geometry(spec)
                return geo.verify(lambda X: field_equation_residuals(X, claim, SpecMatter(spec, X)))

        def energy(spec=spec):
            geo = Geometry(spec)
            got = proved_energy_conditions(geo, spec)
            if got is None and geo.n == 4:
                return "sampled", energy_conditions(geo, spec)
            return "exact case", got

        tc, _ = _cpu(check)
        tp, res = _cpu(lambda spec=spec: petrov_type(Geometry(spec)))
        te, (how, _) = _cpu(energy)
        tr, _ = _cpu(lambda spec=spec, doc=doc: classify_chart(spec, doc=doc))
        base = max(tc, 1e-6)
        print(f"{entry + ':' + chart:44} {tc:8.3f} {tp:9.3f} {tp / base:6.1f} {te:9.3f} {te / base:6.1f} "
              f"{tr:9.3f} {tr / base:6.1f}  {res.type} ({res.method}), {how}", flush=True)


if __name__ == "__main__":
    main(every="--all" in sys.argv[1:])
