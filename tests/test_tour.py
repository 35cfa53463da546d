"""docs/tour.ipynb runs on a real Jupyter kernel (nbclient + ipykernel), so the Python API it shows
cannot silently break; its printed results are checked against independent values."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat", reason="the test extra (nbformat, nbclient, ipykernel) is not installed")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")

ROOT = Path(__file__).resolve().parent.parent
TOUR = ROOT / "docs" / "tour.ipynb"


@pytest.fixture(scope="module")
def executed(tmp_path_factory):
    """The notebook executed top to bottom in a fresh kernel (cwd: a temporary folder), as text per cell."""
    import os

    nb = nbformat.read(TOUR, as_version=4)
    work = tmp_path_factory.mktemp("tour")
    env_before = os.environ.get("GRAVICAT_CONFIG")
    os.environ["GRAVICAT_CONFIG"] = str(work / "no-config.toml")  # the kernel inherits it: no user settings
    try:
        client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                         resources={"metadata": {"path": str(work)}})
        client.execute()
    finally:
        if env_before is None:
            os.environ.pop("GRAVICAT_CONFIG", None)
        else:
            os.environ["GRAVICAT_CONFIG"] = env_before
    texts = []
    for cell in nb.cells:
        out = []
        for o in cell.get("outputs", []):
            if o.get("output_type") == "stream":
                out.append(o["text"])
            elif "data" in o:
                out.append("\n".join(str(v) for v in o["data"].values()))
            elif o.get("output_type") == "error":
                out.append("ERROR " + o.get("ename", ""))
        texts.append("".join(out))
    return "\n".join(texts)


def test_the_tour_runs_and_kerr_passes(executed):
    assert "ERROR" not in executed
    assert "kerr check: pass" in executed
    assert "corvin9 check: pass" in executed
    assert "verified: corvin9-exterior pass" in executed
    assert "g g^-1 = 1: True" in executed
    assert re.search(r"refused: .*a.*outside the range", executed)
    assert r"\mathrm{d}s^2" in executed  # the entries displayed as LaTeX
    assert "catalogue ready: " in executed


def test_the_printed_christoffel_values_match_sympy(executed):
    """Gamma^r_tt of Kerr (Boyer-Lindquist) at M = 1, a = 0.9, theta = 1, computed here independently:
    the metric does not depend on t and g^{r mu} has only the rr component, so
    Gamma^r_tt = -g^{rr} d_r g_tt / 2 with g_tt = -(1 - 2 M r / Sigma), g^{rr} = Delta / Sigma
    (Boyer-Lindquist form, e.g. Carroll, Spacetime and Geometry, 2004, eq. 6.70; recalled from memory).
    Tolerance: relative 1e-12 (float64 evaluation of the same closed form)."""
    import sympy as sp

    M, a, r, th = sp.Integer(1), sp.Rational(9, 10), sp.Symbol("r", positive=True), sp.Integer(1)
    sigma = r**2 + a**2 * sp.cos(th) ** 2
    delta = r**2 - 2 * M * r + a**2
    gamma = -(delta / sigma) * sp.diff(-(1 - 2 * M * r / sigma), r) / 2
    found = re.findall(r"numeric Gamma\^r_tt at r=([0-9.]+), theta=1: (\S+)", executed)
    assert len(found) == 4
    for rad, value in found:
        expected = float(gamma.subs(r, sp.Rational(rad)).evalf(30))
        assert abs(float(value) - expected) <= 1e-12 * abs(expected), (rad, value, expected)
