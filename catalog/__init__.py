"""gravicat: a versioned, verified catalogue of spacetime metrics.

The public surface for plugins and library users is listed in ``__all__``;
everything else is internal. Plugins import only from here.

The Python API (documented in docs/api.md)::

    import gravicat
    cat = gravicat.Catalogue()                  # the configured catalogue; Catalogue(url) for another
    bl = cat.get("kerr:boyer-lindquist")        # a Chart (cat.get("kerr") is the Entry)
    bl.christoffel(), bl.invariants(), bl.check(), bl.numeric(M=1, a=0.9)
    entry = gravicat.load_file("my-metric.toml")

``Catalogue``, ``Entry``, ``Chart``, ``CheckResults`` and ``load_file`` are imported on first
use (module ``__getattr__``), so ``import gravicat`` stays as light as the command line needs.
"""

from gravicat.checks import CheckResult, ExportContext, Method, PreparedChart, Status
from gravicat.errors import (
    CatalogError,
    CheckFailed,
    ClusterError,
    Conflict,
    DatabaseError,
    InputError,
    NotFound,
    PluginError,
    SchemaOutdated,
    UnsafeExpression,
)
from gravicat.hookspecs import hookimpl

__version__ = "0.1.0"

# name -> module of the Python API, imported on first access (see __getattr__)
_LAZY = {
    "Catalogue": "gravicat.api.catalogue",
    "Entry": "gravicat.api.entry",
    "Chart": "gravicat.api.entry",
    "CheckResults": "gravicat.api.results",
    "load_file": "gravicat.api.entry",
}


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'gravicat' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))


__all__ = [
    "CatalogError",
    "Catalogue",
    "Chart",
    "CheckResults",
    "CheckFailed",
    "CheckResult",
    "ClusterError",
    "Conflict",
    "DatabaseError",
    "Entry",
    "ExportContext",
    "InputError",
    "Method",
    "NotFound",
    "PluginError",
    "PreparedChart",
    "SchemaOutdated",
    "Status",
    "UnsafeExpression",
    "__version__",
    "hookimpl",
    "load_file",
]
