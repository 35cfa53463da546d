"""Repair suggestions: find the copying slip that makes a metric file fail its checks.

The commonest reason a newly typed metric fails is a slip in one place: a sign, a power, a
factor of 2 (or a dropped /3 of a cosmological constant, a 4 or a 6), a swapped symbol, ``sin``
for ``cos``. :func:`find_repairs` looks for it:

1. **Baseline.** The chart is checked with the verifiers that set ``screens_repairs = True``
   (the built-in ``structure``, ``signature``, ``field-equations`` and ``limits``: the same plugins
   ``gravicat check`` runs, selected by that attribute, never by name). Only a
   failing field-equation, signature or limit check is repaired; otherwise there is nothing
   to repair.
2. **Candidates.** Every expression the failing claim is built from (each ``define``
   sub-expression that reaches it, the line element or each metric component, and the
   matter fields: potential, fluid, null dust, cosmological constant) is parsed by the
   whitelist parser (:mod:`gravicat.format.expr`), and its syntax tree is edited in one place; the
   edit kinds are :data:`KINDS`. An edited tree is printed back to text, parsed and checked
   again (nothing is ever evaluated as code), and edits are de-duplicated by the resulting
   expression.
3. **Screening.** Every candidate is evaluated at the same few points of the chart's domain
   (drawn once by :class:`gravicat.engine.geometry.Geometry` from the failing chart, so they are
   the points ``check`` samples, plus the counterexample point of each failing check): the
   metric, its first and second derivatives and the matter fields are computed as
   second-order jets in ball arithmetic (python-flint ``arb``, 256 bits: every value is an
   interval certain to contain the exact one), and the claim's residual follows from the
   engine's curvature (:class:`gravicat.engine.curvature.BallCurvature`, the ball backend of the
   formulas ``check`` proves with) and the shared claim residuals of
   :mod:`gravicat.physics.claims` (the code the field-equation, signature and limits verifiers
   run): repair has no curvature or stress tensor of its own. A candidate is discarded as soon
   as one residual component is certainly non-zero at one point; it must hold at every point, for the failing checks and
   for the signature / field-equation / limit checks that passed before. Candidates are
   screened in parallel (``jobs`` forked processes, through :func:`gravicat.engine.fork.run_many`
   with CPU-second limits).
4. **Proof.** Each survivor is written into a copy of the document, validated with
   :func:`gravicat.format.metricfile.validate`, and checked again by the registered verifiers
   (exact sampled stage, then the symbolic proof), in a child process with a hard time
   limit. A survivor that still fails, or that breaks a check which did not fail before, is
   dropped.

A repaired chart that is flat (the Riemann tensor vanishes at every sample point) while a declared
invariant still fails contradicts the entry's own claim of curvature: it is kept as a *doubtful*
suggestion, ranked after every other one and never the one ``--write`` applies unasked (when all
suggestions are doubtful the status is ``no-repair-found``). Otherwise suggestions are ranked by edit
size (one edit before two), then by how many other checks that
failed before still fail (a repair that also mends a failing transform or observer comes
first), then by proof status and by how common the kind of slip is. A suggestion is a
hypothesis to be checked against the source paper: several different metrics may satisfy the
same claim (a vacuum metric with the sign of the mass flipped is still a vacuum metric), which
is why the checks that passed before must keep passing.

Modules: :mod:`.reports` (constants, the report dataclasses), :mod:`.jets` (ball-arithmetic jets
and the tree evaluator), :mod:`.model` (the chart's editable targets, sample points),
:mod:`.screening` (claims at points, the screen), :mod:`.edits` (edit kinds, candidates,
corruptions), :mod:`.search` (baseline, screening in workers, proofs, ranking: :func:`find_repairs`),
:mod:`.writing` (:func:`write_suggestion`). Limit targets are resolved in this document and the
documents passed as ``docs`` (the bundled catalogue), not in the user's catalogue.

Room: ``repair`` may import ``physics``, ``export``, ``engine``, ``format`` and the core
contract; never the store, api or cli rooms.
"""


from __future__ import annotations

from gravicat.repair.edits import corruptions, edited_document, enumerate_edits
from gravicat.repair.jets import _J, _Evaluator, _NotQuadratic, _Prec, _Undefined
from gravicat.repair.model import _Model, _PointEnv, _Target
from gravicat.repair.reports import (
    HYPOTHESIS_NOTE,
    KINDS,
    SMALL_FACTORS,
    ChartRepair,
    EditInfo,
    RepairReport,
    Suggestion,
    screens_repairs,
)
from gravicat.repair.screening import _Screen, ball_curvature, field_equation_residual, riemann_values
from gravicat.repair.search import find_repairs, suggestion_rank
from gravicat.repair.writing import Written, write_suggestion

__all__ = [
    "KINDS",
    "SMALL_FACTORS",
    "HYPOTHESIS_NOTE",
    "EditInfo",
    "Suggestion",
    "ChartRepair",
    "RepairReport",
    "Written",
    "find_repairs",
    "suggestion_rank",
    "screens_repairs",
    "corruptions",
    "edited_document",
    "enumerate_edits",
    "write_suggestion",
    "ball_curvature",
    "field_equation_residual",
    "riemann_values",
]
# internal names the tests and benchmarks reach through the package
_INTERNAL = (_J, _Evaluator, _NotQuadratic, _Prec, _Undefined, _Model, _PointEnv, _Target, _Screen)
