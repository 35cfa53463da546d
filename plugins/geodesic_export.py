"""Built-in exporters: the geodesic right-hand side in Hamiltonian form, for ray tracers and integrators.

With H(x, p) = 1/2 g^ab(x) p_a p_b, geodesics obey dx^a/dl = g^ab p_b and dp_a/dl = -1/2 (d_a g^bc) p_b p_c;
H is conserved (0 for light, -1/2 for a unit mass with l its proper time), the drift measure of every ray.
The expressions are those of :mod:`gravicat.export.hamiltonian` (the engine's exact inverse metric, its
derivatives by sympy, common subexpressions shared), the very ones ``gravicat probe`` integrates for
light and ``gravicat image`` for its rays. Two targets:

* ``geodesic-c`` (``.h``, C99): ``void P_geodesic_rhs(long nrays, const double *y, double *dy, double *h)``
  over rays stored one after another as (x^0..x^{n-1}, p_0..p_{n-1}); ``dy`` gets the derivatives in the
  same layout and ``h[k]`` the Hamiltonian of ray k (``h`` may be NULL). ``static inline`` unless
  ``GRAVICAT_API`` is defined before the header is included.
* ``geodesic-numpy`` (``.py``, numpy only): ``rhs(x, p) -> (dx, dp)`` and ``hamiltonian(x, p)`` with
  ``x``, ``p`` of shape ``(..., n)``, one ray per leading index.

Every parameter is a number in this code: the ``--set`` values, else the file's defaults (a parameter with
neither is a one-line error); the header lists which. Like the other code targets, a revision that failed
its checks or was never verified is refused unless ``--allow-unverified`` (the header then says so).
Catalogue text reaches the files only through :mod:`gravicat.export.escape` (comments, C strings, Python
literals); the code itself holds generated names, numbers and math functions only.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from gravicat import hookimpl

if TYPE_CHECKING:
    from gravicat.checks import ExportContext
    from gravicat.format.metricfile import MetricDocument


def _prepared(document, context, exporter):
    """(prepared chart, Hamiltonian system, header lines): the gate, the numeric values, the system."""
    from gravicat.export.codegen import conventions, prepare
    from gravicat.export.hamiltonian import hamiltonian_system
    from gravicat.export.parameters import numeric_parameters

    prep = prepare(document, context, exporter, numeric=True)
    values = numeric_parameters(document, prep.spec, context.params, "--set")
    system = hamiltonian_system(prep.spec, values, budget=context.budget, source=document.source)
    header = prep.provenance.lines()
    coords = [str(c) for c in prep.coords]
    header.append(f"coordinates: {', '.join(coords)} (x0..x{len(coords) - 1}; momenta p0..p{len(coords) - 1})")
    header.append("parameters (numbers in this code):" + ("" if values else " none"))
    for sym, value in values.items():
        origin = "--set" if sym in prep.fixed else "the file's default"
        header.append(f"  {sym} = {value} ({origin})")
    header.append(f"domain:    {'; '.join(prep.domain_text) or 'the whole chart'}")
    header.append(f"conventions: {conventions(prep.n)}")
    header.append("geodesics in Hamiltonian form: H = 1/2 g^ab p_a p_b, dx^a/dl = g^ab p_b, "
                  "dp_a/dl = -1/2 d_a g^bc p_b p_c (exact inverse metric, derivatives by sympy)")
    header.append("Generated file: regenerate it with 'gravicat export' rather than editing it.")
    return prep, system, header


class GeodesicCExporter:
    """C99 header: the geodesic right-hand side in Hamiltonian form and H for N rays."""

    name = "geodesic-c"
    version = "1"
    suffix = ".h"

    def export(self, document: MetricDocument, context: ExportContext) -> str:
        from gravicat.export.escape import c_comment, c_string
        from gravicat.export.hamiltonian import c99_function
        from gravicat.export.numeric import wrap

        prep, system, header = _prepared(document, context, self)
        prefix = f"{document.id}_{prep.chart}".replace("-", "_")
        prefix = (prefix if prefix[0].isalpha() else "m" + prefix) + "_geodesic"
        upper = prefix.upper()
        out = ["/*"]
        for line in header:
            for part in wrap(c_comment(line), 97, "    "):
                out.append(f" * {part}".rstrip())
        out.append(" */")
        prov = prep.provenance
        out += [
            f"#ifndef {upper}_H",
            f"#define {upper}_H",
            "",
            "#include <math.h>",
            "",
            "#ifndef GRAVICAT_API",
            "#define GRAVICAT_API static inline",
            "#endif",
            "",
            f"#define {upper}_DIMENSION {system.n}",
            f"#define {upper}_COORDINATES {{{', '.join(c_string(c) for c in system.coords)}}}",
            f"#define {upper}_ENTRY {c_string(document.id)}",
            f"#define {upper}_CHART {c_string(prep.chart)}",
            f"#define {upper}_REVISION {c_string(prov.revision)}",
            f"#define {upper}_STATUS {c_string(prov.status)}",
            "",
            f"/* rays k = 0..nrays-1 at y[{2 * system.n}k..]: (x^0..x^{system.n - 1}, p_0..p_{system.n - 1}); "
            "dy in the same layout; h[k] = H (h may be NULL) */",
        ]
        out += c99_function(system, f"{prefix}_rhs", "GRAVICAT_API")
        out += ["", f"#endif /* {upper}_H */", ""]
        return "\n".join(out)


class GeodesicNumpyExporter:
    """Python module (numpy only): the geodesic right-hand side in Hamiltonian form and H, vectorised over rays."""

    name = "geodesic-numpy"
    version = "1"
    suffix = ".py"

    def export(self, document: MetricDocument, context: ExportContext) -> str:
        from gravicat.export.escape import python_comment, python_literal
        from gravicat.export.hamiltonian import numpy_code
        from gravicat.export.numeric import wrap

        prep, system, header = _prepared(document, context, self)
        out = []
        for line in header:
            for part in wrap(python_comment(line), 86, "    "):
                out.append(f"# {part}".rstrip())
        prov = prep.provenance
        out += [
            '"""Geodesic right-hand side in Hamiltonian form for many rays at once (numpy only).',
            "",
            "rhs(x, p) -> (dx/dl, dp/dl) and hamiltonian(x, p) -> H, with x (positions) and p (covariant",
            "momenta) of shape (..., DIMENSION), coordinates in the order of COORDINATES.",
            '"""',
            "",
            "import numpy as np",
            "",
            f"DIMENSION = {system.n}",
            f"COORDINATES = {python_literal(tuple(system.coords))}",
            f"ENTRY = {python_literal(document.id)}",
            f"CHART = {python_literal(prep.chart)}",
            f"REVISION = {python_literal(prov.revision)}",
            f"STATUS = {python_literal(prov.status)}",
            f"PARAMETERS = {python_literal(dict(system.values))}",
        ]
        return "\n".join(out) + "\n" + numpy_code(system)


@hookimpl
def register_exporters():
    return [GeodesicCExporter(), GeodesicNumpyExporter()]
