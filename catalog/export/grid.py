"""Fields on a rectangular grid of a chart's own coordinates, written to HDF5 (h5py) or ``.npz``.

Used by ``gravicat split --grid``: :func:`parse_axes` reads ``--grid NAME=LO:HI:N`` (one per spatial
coordinate of the chart, named by the chart's coordinates: ``x``, ``y``, ``z`` for a Cartesian chart,
``r``, ``theta``, ``phi`` for a spherical one - the grid is never mapped to other coordinates);
:func:`evaluate` turns sympy expressions into float64 arrays on that grid (numpy from
``sympy.lambdify``, vectorised; a value that is not finite or not real somewhere is an error naming
the field and the point); :func:`write_grid` writes them through a temporary file in the target's
directory, renamed over the target at the end (the target is complete or untouched).

Layout (both formats): one dataset per field (``alpha`` with the grid's shape, ``beta`` with
``(3, *shape)``, ``gamma`` and ``K`` with ``(3, 3, *shape)``, index order = coordinate order), one
1-D dataset per axis (``axis_x``...), and the attributes (HDF5 attributes of the file's root; in
``.npz`` the JSON text ``attributes``).

Room: ``export`` may import ``engine``, ``format`` and the core contract.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

from gravicat.errors import InputError

__all__ = ["Axis", "parse_axes", "evaluate", "write_grid", "SUFFIXES", "MAX_POINTS"]

SUFFIXES = (".h5", ".hdf5", ".npz")
MAX_POINTS = 64_000_000  # points of the whole grid: 16 fields of float64 at this size need ~8 GB
_AXIS = re.compile(r"^\s*([^=\s]+)\s*=\s*([^:]+):([^:]+):([^:]+)\s*$")


class Axis:
    """One axis: ``name`` (a coordinate), ``lo``, ``hi``, ``n`` points (both ends included)."""

    def __init__(self, name: str, lo: float, hi: float, n: int):
        self.name, self.lo, self.hi, self.n = name, lo, hi, n

    def values(self):
        import numpy as np

        return np.linspace(self.lo, self.hi, self.n)

    def to_json(self) -> dict:
        return {"name": self.name, "lo": self.lo, "hi": self.hi, "points": self.n}


def _number(text: str, option: str, what: str) -> float:
    from gravicat.format.assign import real_number
    from gravicat.format.expr import Names, check_expression, to_sympy

    tree = check_expression(text.strip(), Names(symbols=frozenset()), source=option, field=what)
    return float(real_number(to_sympy(tree, {}), option, what, text.strip()).evalf(20))


def parse_axes(texts: list[str], coords: list[str], option: str = "--grid") -> list[Axis]:
    """The axes of ``--grid NAME=LO:HI:N`` texts, in the order of ``coords`` (the chart's spatial
    coordinates): every coordinate exactly once, ``LO < HI`` (numbers or constants such as ``pi/2``),
    ``N >= 3`` an integer; at most :data:`MAX_POINTS` points in all."""
    found: dict[str, Axis] = {}
    for text in texts:
        m = _AXIS.match(text)
        if not m:
            raise InputError(option, None, f"'{text}' is not NAME=LO:HI:N (e.g. {option} x=-8:8:65)")
        name, lo_t, hi_t, n_t = m.groups()
        if name not in coords:
            raise InputError(option, name, f"is not a spatial coordinate of the chart (give {', '.join(coords)})")
        if name in found:
            raise InputError(option, name, "is given twice")
        lo, hi = _number(lo_t, option, name), _number(hi_t, option, name)
        if not n_t.strip().isdigit() or int(n_t) < 3:
            raise InputError(option, name, f"the number of points '{n_t.strip()}' must be an integer >= 3")
        if not lo < hi:
            raise InputError(option, name, f"the range {lo_t.strip()}:{hi_t.strip()} is empty (LO must be below HI)")
        found[name] = Axis(name, lo, hi, int(n_t))
    missing = [c for c in coords if c not in found]
    if missing:
        raise InputError(option, None, f"give every spatial coordinate of the chart: missing {', '.join(missing)} "
                                       f"(e.g. {' '.join(f'{option} {c}=LO:HI:N' for c in missing)})")
    axes = [found[c] for c in coords]
    total = 1
    for a in axes:
        total *= a.n
    if total > MAX_POINTS:
        raise InputError(option, None, f"{total} grid points is more than the limit of {MAX_POINTS}")
    return axes


def evaluate(fields: dict[str, Any], coords, axes: list[Axis], subs: dict, domain=()) -> dict:
    """``fields``: name -> sympy expression, or nested lists of them; ``coords``: the sympy symbols the
    axes stand for; ``subs``: symbol -> number for everything else; ``domain``: sympy inequalities every
    grid point must satisfy. Returns name -> float64 array of shape ``(*component_shape, *grid_shape)``.
    A grid point outside the domain, or a field that is not finite and real at a grid point, is an
    :class:`InputError` naming the relation or the field, and the point."""
    import numpy as np
    import sympy as sp

    mesh = np.meshgrid(*[a.values() for a in axes], indexing="ij")
    shape = mesh[0].shape
    for rel in domain:
        test = sp.sympify(rel).subs(subs)
        if test in (sp.true, sp.false):
            ok = np.full(shape, bool(test))
        else:
            with np.errstate(all="ignore"):
                ok = np.broadcast_to(np.asarray(sp.lambdify(list(coords), test, modules="numpy")(*mesh)), shape)
        if not ok.all():
            where = np.argwhere(~ok)[0]
            point = ", ".join(f"{a.name} = {a.values()[i]:.6g}" for a, i in zip(axes, where, strict=True))
            raise InputError("--grid", None, f"the grid leaves the chart's domain ({sp.sstr(rel)} fails at {point})")
    out = {}
    for name, value in fields.items():
        arr = np.asarray(value, dtype=object)
        flat = [sp.sympify(e) for e in arr.reshape(-1)]
        left = set().union(*(e.free_symbols for e in flat)) - set(coords) - set(subs)
        if left:
            raise InputError("--set", ", ".join(sorted(map(str, left))),
                             f"{name} depends on it; give a value with --set NAME=VALUE")
        names = list(subs)  # passed as arguments: large expressions are printed once, subexpressions shared
        f = sp.lambdify([*coords, *names], flat, modules="numpy", cse=True, docstring_limit=0)
        with np.errstate(all="ignore"):
            vals = f(*mesh, *[float(subs[k]) for k in names])
        data = np.empty((len(flat), *shape))
        for k, v in enumerate(vals):
            v = np.broadcast_to(np.asarray(v), shape)
            if np.iscomplexobj(v):
                bad = np.abs(v.imag) > 1e-12 * np.maximum(1.0, np.abs(v.real))
                if bad.any():
                    _refuse(name, arr.shape, k, axes, bad, "not real")
                v = v.real
            v = v.astype(float)
            bad = ~np.isfinite(v)
            if bad.any():
                _refuse(name, arr.shape, k, axes, bad, "not finite")
            data[k] = v
        out[name] = data.reshape(*arr.shape, *shape) if arr.shape else data[0]
    return out


def _refuse(name, comp_shape, k, axes, bad, what):
    import numpy as np

    where = np.argwhere(bad)[0]
    point = ", ".join(f"{a.name} = {a.values()[i]:.6g}" for a, i in zip(axes, where, strict=True))
    comp = np.unravel_index(k, comp_shape) if comp_shape else ()
    label = name + (f"[{','.join(axes[i].name for i in comp)}]" if comp else "")
    raise InputError("--grid", None, f"{label} is {what} at {point}: choose a grid inside the chart's domain "
                                     "(away from singularities and coordinate axes)")


def write_grid(path: Path, arrays: dict, axes: list[Axis], attributes: dict[str, Any]) -> None:
    """Write ``arrays`` (name -> numpy array), the axes and ``attributes`` (name -> str, number or
    JSON-able value) to ``path`` (``.h5`` / ``.hdf5``: HDF5; ``.npz``: numpy), whole or not at all."""
    import contextlib
    import os
    import tempfile

    suffix = path.suffix.lower()
    if suffix not in SUFFIXES:
        raise InputError(str(path), None, f"unknown grid format '{path.suffix or '(none)'}' "
                                          f"(use {', '.join(SUFFIXES)})")
    try:
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".part" + suffix)
    except OSError as exc:
        raise InputError(str(path), None, f"cannot write ({exc.strerror or exc})") from None
    os.close(fd)
    try:
        if suffix == ".npz":
            _write_npz(tmp, arrays, axes, attributes)
        else:
            _write_h5(tmp, arrays, axes, attributes)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise InputError(str(path), None, f"cannot write ({exc.strerror or exc})") from None
        raise


def _attr(value):
    return value if isinstance(value, (str, int, float)) else json.dumps(value, ensure_ascii=False)


def _write_h5(tmp: str, arrays, axes, attributes) -> None:
    import h5py

    with h5py.File(tmp, "w") as fh:
        for name, data in arrays.items():
            fh.create_dataset(name, data=data)
        for a in axes:
            fh.create_dataset(f"axis_{a.name}", data=a.values())
        for key, value in attributes.items():
            fh.attrs[key] = _attr(value)


def _write_npz(tmp: str, arrays, axes, attributes) -> None:
    import numpy as np

    with open(tmp, "wb") as fh:
        np.savez(fh, **arrays, **{f"axis_{a.name}": a.values() for a in axes},
                 attributes=np.array(json.dumps(attributes, ensure_ascii=False)))
