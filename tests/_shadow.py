"""Bardeen's analytic edge of the Kerr shadow, for tests/test_image.py and tests/benchmarks/bench_image.py
(not collected: no test_ prefix).

J. M. Bardeen, in Black Holes (Les Houches 1972), 1973: the critical impact parameters of the spherical
photon orbits, xi = (r^2 (3M - r) - a^2 (r + M))/(a (r - M)), eta = r^3 (4 a^2 M - r (r - 3M)^2)/(a^2 (r - M)^2);
an observer far away at inclination theta_O sees the edge at alpha = -xi/sin(theta_O),
beta = +-sqrt(eta + a^2 cos^2(theta_O) - xi^2 cot^2(theta_O)) (units of M, divided by the observer's r_O for
angles; the finite distance changes them by O(M/r_O) relative).
"""

from __future__ import annotations

import math

import numpy as np


def bardeen_curve(M: float, a: float, inclination: float, r_obs: float, samples: int = 20000) -> np.ndarray:
    """Points (alpha, beta) in radians of the shadow's edge seen from ``r_obs`` at ``inclination``."""
    r = np.linspace(1.0001, 4.9999, samples) * M
    xi = (r * r * (3 * M - r) - a * a * (r + M)) / (a * (r - M))
    eta = r**3 * (4 * a * a * M - r * (r - 3 * M) ** 2) / (a * a * (r - M) ** 2)
    c, s = math.cos(inclination), math.sin(inclination)
    b2 = eta + a * a * c * c - xi * xi * c * c / (s * s)
    keep = b2 >= 0
    return np.vstack([np.column_stack([-xi[keep] / s, np.sqrt(b2[keep])]),
                      np.column_stack([-xi[keep] / s, -np.sqrt(b2[keep])])]) / r_obs
