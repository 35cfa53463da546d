"""The ``limits`` verifier on substitutions that make a domain or range relation undefined."""

from __future__ import annotations

import json
from pathlib import Path

import gravicat

RN = Path(gravicat.__file__).parent / "data" / "spacetimes" / "reissner-nordstrom.toml"


def test_limit_that_makes_a_domain_bound_zero_over_zero(cli, tmp_path):
    # Reissner-Nordstrom with M = Q = 0 is Minkowski space in spherical coordinates
    # (S. M. Carroll, Spacetime and Geometry, 2004, chapter 6, the Reissner-Nordstrom metric with
    # M = Q = 0; recalled from memory). The extra domain
    # bound r > Q**2/M becomes r > 0/0 there; it must be dropped, not crash the verifier.
    text = RN.read_text().replace(
        'domain = ["r > M + sqrt(M**2 - Q**2)", "0 < theta < pi"]',
        'domain = ["r > M + sqrt(M**2 - Q**2)", "r > Q**2/M", "0 < theta < pi"]',
    )
    assert "r > Q**2/M" in text
    text += '\n[limits.massless]\nchart = "static"\nset = { M = "0", Q = "0" }\nreduces-to = "minkowski:spherical"\n'
    text += '\n[limits.neutral-massless]\nchart = "static"\nset = { M = "0" }\nreduces-to = "minkowski:spherical"\n'
    path = tmp_path / "rn-bounds.toml"
    path.write_text(text)
    r = cli("check", str(path), "--chart", "static", "--only", "limits", "--json")
    checks = {c["check"]: c for c in json.loads(r.stdout)["charts"][0]["checks"]}
    assert checks["limits:massless"]["status"] == "pass", checks
    # M = 0 with Q != 0 leaves g_tt = -(1 + Q**2/r**2): not flat space, so the limit fails
    # with a counterexample instead of crashing on r > Q**2/0
    assert checks["limits:neutral-massless"]["status"] == "fail", checks
    assert checks["limits:neutral-massless"]["counterexample"], checks
    assert not any(c["status"] == "error" for c in checks.values())
