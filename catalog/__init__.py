"""gravicat: a versioned, verified catalogue of spacetime metrics.

The public surface for plugins and library users is listed in ``__all__``;
everything else is internal. Plugins import only from here.
"""

from gravicat.checks import CheckResult, Method, Status
from gravicat.errors import (
    CatalogError,
    CheckFailed,
    DatabaseError,
    InputError,
    NotFound,
    PluginError,
    SchemaOutdated,
    UnsafeExpression,
)
from gravicat.hookspecs import hookimpl

__version__ = "0.1.0"

__all__ = [
    "CatalogError",
    "CheckFailed",
    "CheckResult",
    "DatabaseError",
    "InputError",
    "Method",
    "NotFound",
    "PluginError",
    "SchemaOutdated",
    "Status",
    "UnsafeExpression",
    "__version__",
    "hookimpl",
]
