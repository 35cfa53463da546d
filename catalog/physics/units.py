"""SI <-> geometrized units (G = c = 1) for observer physics.

In geometrized units every quantity of the catalogue is a power of a length: a
mass M stands for the length G M / c^2, a time t for the length c t, an angular
velocity Omega for Omega / c (per metre), a specific angular momentum for
L / c (metres). A central body is given, as in celestial mechanics, by its
gravitational parameter GM (m^3/s^2), which is known far more precisely than G
or M alone; its geometrized mass is the length GM / c^2.

Constants:

* ``C`` = 299 792 458 m/s, exact by the definition of the metre (BIPM, The
  International System of Units, 9th edition, 2019, section 2.3.1).
* ``G`` = 6.674 30e-11 m^3 kg^-1 s^-2, the CODATA 2018 recommended value
  (Tiesinga et al., Rev. Mod. Phys. 93 (2021) 025010); only
  :func:`kilograms_to_length` needs it.
* ``SECONDS_PER_DAY`` = 86 400 s (the SI day used for clock rates).

This module imports nothing heavy; every function takes and returns floats.
"""

from __future__ import annotations

C = 299_792_458.0
G = 6.674_30e-11
SECONDS_PER_DAY = 86_400.0
MICROSECONDS_PER_DAY = SECONDS_PER_DAY * 1e6

SYSTEMS = ("geometrized", "si")

# what each reported quantity means in each system (documented in the --json shape)
UNIT_NAMES: dict[str, dict[str, str]] = {
    "geometrized": {
        "length": "chart coordinate units (G = c = 1)",
        "angular_velocity": "1/length (G = c = 1)",
        "specific_angular_momentum": "length (G = c = 1)",
        "specific_energy": "dimensionless (units of the rest energy)",
        "clock_rate": "dimensionless (proper time per coordinate time)",
    },
    "si": {
        "length": "m",
        "angular_velocity": "rad/s",
        "specific_angular_momentum": "m^2/s",
        "specific_energy": "dimensionless (units of the rest energy m c^2)",
        "clock_rate": "dimensionless (proper time per coordinate time); offsets in microseconds per day",
    },
}


def gm_to_length(gm: float) -> float:
    """Geometrized mass (m) of a body with gravitational parameter ``gm`` (m^3/s^2): GM / c^2."""
    return gm / C**2


def length_to_gm(length: float) -> float:
    """Inverse of :func:`gm_to_length`: the gravitational parameter (m^3/s^2) of a mass length (m)."""
    return length * C**2


def kilograms_to_length(kg: float) -> float:
    """Geometrized mass (m) of ``kg`` kilograms: G M / c^2 (limited by the precision of G)."""
    return G * kg / C**2


def seconds_to_length(seconds: float) -> float:
    """A time interval as a length: c t."""
    return C * seconds


def length_to_seconds(length: float) -> float:
    """A length as a light-travel time: L / c."""
    return length / C


def angular_velocity_to_si(omega: float) -> float:
    """Geometrized angular velocity (1/m, per unit ct) to rad/s."""
    return omega * C


def angular_velocity_from_si(omega: float) -> float:
    """Angular velocity in rad/s to geometrized units (1/m)."""
    return omega / C


def angular_momentum_to_si(ell: float) -> float:
    """Geometrized specific angular momentum (m) to m^2/s (angular momentum per unit rest mass)."""
    return ell * C


def per_day_microseconds(fraction: float) -> float:
    """A fractional clock-rate offset as microseconds gained (+) or lost (-) per day (86 400 s)."""
    return fraction * MICROSECONDS_PER_DAY
