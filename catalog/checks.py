"""Verification results and the plugin contract: verifiers, exporters and what they receive.

A verifier is any object with ``name`` (str), ``version`` (str) and
``check(subject: PreparedChart) -> list[CheckResult]``, contributed through the
``register_verifiers`` hook. ``subject`` is a prepared chart: the typed view
:class:`PreparedChart` lists exactly what a verifier may use (the core passes a
:class:`gravicat.engine.geometry.Geometry`, shared by every verifier of one run).
The core runs verifiers, isolates their crashes, times them and records
provenance; a verifier only computes and reports. A verifier may also set
``screens_repairs = True``: ``gravicat repair`` then reruns it on every candidate
it proposes (the core selects verifiers by that attribute, never by name).

An exporter is any object with ``name``, ``version``, ``suffix`` and
``export(document, context: ExportContext) -> str``; :class:`ExportContext` is the
frozen record of what the caller asks for (revision, stored checks, chart,
fixed parameters, ...).

Both names are exported from ``gravicat``. This module is imported by the CLI at
start-up: keep it free of sympy.
"""

from __future__ import annotations

import enum
from collections.abc import Callable, Iterator, Mapping
from contextlib import AbstractContextManager
from dataclasses import dataclass, field, fields, replace
from typing import Any, Protocol, runtime_checkable


class Status(enum.StrEnum):
    """Outcome of one check. :data:`SEVERITY` orders them for the overall status."""

    PASS = "pass"
    SKIPPED = "skipped"
    INCONCLUSIVE = "inconclusive"
    FAIL = "fail"
    ERROR = "error"  # the verifier itself crashed: a bug to report, never a pass


# A skipped check neither helps nor harms: it only shows when nothing else ran.
SEVERITY = {Status.SKIPPED: 0, Status.PASS: 1, Status.INCONCLUSIVE: 2, Status.FAIL: 3, Status.ERROR: 4}


def worst(statuses) -> Status:
    """The worst of ``statuses``; ``skipped`` only when every check was skipped (or none ran)."""
    out = Status.SKIPPED
    for s in statuses:
        s = Status(s)
        if SEVERITY[s] > SEVERITY[out]:
            out = s
    return out


class Method(enum.StrEnum):
    SYMBOLIC = "symbolic"  # proved identically (exact rational-function normal form)
    SAMPLED = "sampled"  # exact rational evaluation at random points of the domain
    NONE = "none"  # nothing was computed (skipped)


@dataclass
class CheckResult:
    """One check of one chart.

    ``counterexample`` (on failure) holds the parameter and coordinate values
    (as strings of exact numbers), the offending component and its residual:
    ``{"point": {"M": "1", "r": "7/2", ...}, "component": "R[t,r]",
    "residual": "-3/49"}``. ``data`` carries extra machine-readable output
    (for example computed invariants) and may be empty.
    """

    check: str
    status: Status
    method: Method
    detail: str
    counterexample: dict[str, Any] | None = None
    seconds: float = 0.0
    verifier: str = ""
    version: str = ""
    data: dict[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        return {
            "check": self.check,
            "status": Status(self.status).value,
            "method": Method(self.method).value,
            "detail": self.detail,
            "counterexample": self.counterexample,
            "seconds": round(self.seconds, 6),
            "verifier": self.verifier,
            "version": self.version,
        }


@runtime_checkable
class PreparedChart(Protocol):
    """What a verifier may use of the prepared chart it receives (a typed, read-only view).

    Values "of the path" are exact: flint rational-function elements on the fast path
    (``path == "flint"``), sympy expressions on the fallback (``path == "sympy"``); never compare
    them with ``==``, use :meth:`is_zero`, and turn them into sympy with :meth:`to_sympy`. Tensor
    components are nested lists indexed by coordinate number. Curvature members are computed on
    first use and cached (shared by every verifier of the run). Anything not listed here (names
    with a leading underscore in particular) is internal and may change without notice.
    """

    # -- the chart
    spec: Any  #: the ChartSpec (metric, coords, params, domain, claims; ``spec.entry``, ``spec.chart``)
    #: ``spec.extra.get("declarations")``: the chart's declared statements, or None when it declares none:
    #: ``{"petrov-type": "D", "killing": {name: (xi^a sympy, ...)}, "killing-tensors": {name: {"indices":
    #: "lower" | "upper", "components": sympy Matrix}}, "energy-conditions": {"null": "holds" | "violated", ...}}``
    #: (only the keys declared; :mod:`gravicat.format.declarations`)
    coords: tuple  #: coordinate symbols (sympy), in chart order
    params: tuple  #: parameter symbols (sympy), in file order
    n: int  #: dimension
    path: str  #: "flint" (exact rational functions) or "sympy"
    field: Any  #: the exact field of the flint path, or None on the sympy path
    budget: float  #: CPU seconds a proof may take (the run's ``--budget``)
    seed: int  #: seed of the sample points
    samples: int  #: number of sample points of a sampled stage
    # -- exact values of the path (cached)
    g: list  #: g[a][b]
    zero: Any  #: 0 of the path
    one: Any  #: 1 of the path
    det: Any  #: determinant of the metric
    ginv: list  #: inverse metric g^ab
    dg: list  #: dg[c][a][b] = d_c g_ab
    christoffel: list  #: christoffel[a][b][c] = Gamma^a_bc
    riemann: list  #: riemann[a][b][c][d] = R^a_bcd
    ricci: list  #: ricci[a][b] = R_ab
    ricci_scalar: Any  #: R
    einstein: list  #: einstein[a][b] = G_ab
    kretschmann: Any  #: R_abcd R^abcd
    opaque: dict  #: placeholder function -> the sub-expression it stands for (see :meth:`legend`)
    sampler: Any  #: the generic sample-point generator of the chart (:mod:`gravicat.engine.sampling`)

    def val(self, expr: Any) -> Any:
        """An expression of the chart (sympy, chart symbols) as a value of the path."""

    def to_sympy(self, v: Any, opaque: bool = False) -> Any:
        """A value of the path as a factored sympy expression in the chart's symbols."""

    def is_zero(self, v: Any) -> bool:
        """Exact zero test of the path."""

    def label(self, name: str, *idx: int) -> str:
        """A component label such as ``R[t,r]``."""

    def legend(self) -> str:
        """The text explaining the placeholders of ``to_sympy(v, opaque=True)``."""

    def degeneracy(self) -> str | None:
        """Why the inverse metric does not exist on the domain, or None."""

    def deadline(self, seconds: float | None) -> AbstractContextManager[None]:
        """Cooperative CPU-time limit for flint computations (raises BudgetExceeded)."""

    def sample_points(self) -> list:
        """The seeded, cached generic sample points (``PointData``)."""

    def draw_point(self, tries: int = 400, need_inverse: bool = True) -> Any:
        """A new generic sample point (``PointData``), or None when none was found."""

    def verify(self, fn: Callable[[Any], dict], *, budget: float | None = None,
               what: str = "the claim") -> Any:
        """Sampled stage, then an exact proof that every value ``fn(self)`` returns is zero: an
        ``Outcome`` (status, method, detail, counterexample, path); use
        ``gravicat.plugins._common``-style conversion to a :class:`CheckResult`."""

    def prove_values(self, fn: Callable[[], Any], budget: float | None = None) -> Any:
        """Run ``fn`` (symbolic values) within the budget."""


@runtime_checkable
class Verifier(Protocol):
    """A check of prepared charts: ``name`` and ``version`` (bump it when the logic changes: stored
    results of another version are stale); optional ``screens_repairs`` (bool, default False) and
    ``kinds`` (the kinds of entry it checks, default ``("spacetime",)``; ``"initial-data"`` for
    3-geometries; charts of another kind get a ``skipped`` result without a call)."""

    name: str
    version: str

    def check(self, subject: PreparedChart) -> list[CheckResult]: ...


@dataclass(frozen=True)
class ExportContext:
    """What the caller of an exporter asks for (frozen; derive a changed copy with :meth:`replace`).

    ``revision``          content hash of the exported revision (required)
    ``checks``            stored result dicts of that revision (``{"check", "status", "chart", ...}``)
    ``status``            overall status; None: the worst of ``checks``, ``"unverified"`` without any
    ``chart``             chart name; None: the first chart
    ``params``            None or ``"symbolic"`` (every parameter stays a symbol), ``NAME=VALUE`` text
                          (``"M=1,a=9/10"``), or a mapping name -> value (number or expression text)
    ``allow_unverified``  export a failed or unverified revision (the header says so)
    ``date``              ISO date for the header; None: today (UTC)
    ``source``            where the document came from (file path or catalogue entry), for the header
    ``christoffel``       latex: also list the nonzero Christoffel symbols
    ``budget``            CPU seconds for that symbolic computation

    Exporters written against the older dict context keep working for one release: ``context["x"]``
    and ``context.get("x")`` read the fields, and :meth:`coerce` accepts a mapping.
    """

    revision: str
    checks: tuple[Mapping[str, Any], ...] = ()
    status: str | None = None
    chart: str | None = None
    params: str | Mapping[str, Any] | None = None
    allow_unverified: bool = False
    date: str | None = None
    source: str | None = None
    christoffel: bool = False
    budget: float = 60.0

    def __post_init__(self) -> None:
        object.__setattr__(self, "revision", str(self.revision))
        object.__setattr__(self, "checks", tuple(self.checks or ()))

    def replace(self, **changes: Any) -> ExportContext:
        """A copy with some fields changed."""
        return replace(self, **changes)

    @classmethod
    def coerce(cls, context: ExportContext | Mapping[str, Any]) -> ExportContext:
        """``context`` itself, or the context a mapping with the same keys describes."""
        if isinstance(context, cls):
            return context
        from gravicat.errors import CatalogError

        if not isinstance(context, Mapping):
            raise CatalogError(f"an export context must be an ExportContext, not {type(context).__name__} "
                               f"(a bug in the caller)")
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(context) - known)
        if unknown:
            raise CatalogError(f"export context: unknown field(s) {', '.join(map(str, unknown))} "
                               f"(fields: {', '.join(sorted(known))}; a bug in the caller)")
        if "revision" not in context:
            raise CatalogError("export context without 'revision' (a bug in the caller)")
        values = {k: v for k, v in context.items() if not (v is None and k in ("checks", "budget"))}
        return cls(**values)

    # read access for exporters written against the dict context (one release)
    def __getitem__(self, key: str) -> Any:
        if key not in self.__dataclass_fields__:
            raise KeyError(key)
        return getattr(self, key)

    def get(self, key: str, default: Any = None) -> Any:
        value = getattr(self, key, None) if key in self.__dataclass_fields__ else None
        return default if value is None else value

    def keys(self) -> list[str]:
        return list(self.__dataclass_fields__)

    def __iter__(self) -> Iterator[str]:
        return iter(self.__dataclass_fields__)


@runtime_checkable
class Exporter(Protocol):
    """An export target: ``name`` is the ``--to`` value; ``suffix`` the file ending.

    ``export(document, context)`` returns the text to write. ``document`` is a
    :class:`gravicat.format.metricfile.MetricDocument`; ``context`` an :class:`ExportContext`.
    Catalogue text (title, notes, names...) must reach the output only through the target
    language's escaping (:mod:`gravicat.export.escape` for the built-in targets).
    """

    name: str
    version: str
    suffix: str

    def export(self, document: Any, context: ExportContext) -> str: ...
