"""An orbiting clock against a clock on the rotating surface of the central body."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from gravicat.errors import InputError

if TYPE_CHECKING:
    from gravicat.physics.equatorial import Equatorial


@dataclass(frozen=True)
class ClockComparison:
    """An orbiting clock against a clock on the rotating surface of the central body.

    Each part is a fractional rate offset (orbit clock rate / surface clock rate - 1);
    ``net`` = (1 + gravitational)(1 + orbital_velocity)(1 + surface_rotation) - 1 exactly.

    * gravitational: static observer at the orbit against static observer at the
      surface, sqrt(-g_tt(r)) / sqrt(-g_tt(R)), with the body's quadrupole J2 added
      to the surface potential in the weak-field form Phi = -(GM/R)(1 + J2/2) at
      the equator (GM/R taken from the metric as (1 + g_tt(R))/2);
    * orbital_velocity: the orbiting clock against a static clock at the orbit
      (d tau/dt = 1/u^t over sqrt(-g_tt)); negative: moving clocks run slow;
    * surface_rotation: a static clock at the surface against the surface clock
      carried round at angular velocity Omega_E (positive: the ground clock runs slow).
    """

    orbit_radius: float
    surface_radius: float
    surface_rotation: float
    j2: float
    direction: str
    orbit_rate: float
    surface_rate: float
    net: float
    gravitational: float
    orbital_velocity: float
    surface_rotation_part: float


def compare_clocks(model: Equatorial, orbit_radius: float, surface_radius: float, surface_rotation: float,
                   *, j2: float = 0.0, direction: str = "prograde") -> ClockComparison:
    """Rate of a clock on a circular equatorial orbit relative to a clock on the rotating surface.

    All inputs in the chart's geometrized units (``surface_rotation`` in 1/length);
    use :mod:`gravicat.physics.units` for SI. Raises InputError when either clock cannot exist.
    """
    orbit = model.circular(orbit_radius, direction)
    if not orbit["exists"]:
        raise InputError("--radius", f"{orbit_radius:g}", f"no {direction} circular orbit: {orbit['reason']}")
    static_orbit = model.static_observer(orbit_radius)
    static_surface = model.static_observer(surface_radius)
    surface = model.rotating_clock_rate(surface_radius, surface_rotation)
    if not static_surface["exists"] or surface is None:
        raise InputError("--surface-radius", None, f"no clock can rotate at {surface_rotation:g} on the surface "
                                                   f"r = {surface_radius:g}: it would move faster than light")
    if not static_orbit["exists"]:
        raise InputError("--radius", f"{orbit_radius:g}", "inside the static limit: no static reference clock")
    potential = (1 - static_surface["clock_rate"] ** 2) / 2  # GM/R from the metric: -g_tt = 1 - 2GM/R
    quadrupole = 1 - j2 * potential / 2  # rate factor for Phi_J2 = -(GM/R) J2/2 at the equator
    orbit_rate = orbit["clock_rate"]
    surface_rate = surface * quadrupole
    grav = static_orbit["clock_rate"] / (static_surface["clock_rate"] * quadrupole) - 1
    vel = orbit_rate / static_orbit["clock_rate"] - 1
    rot = static_surface["clock_rate"] / surface - 1
    net = orbit_rate / surface_rate - 1
    return ClockComparison(float(orbit_radius), float(surface_radius), float(surface_rotation), float(j2),
                           direction, orbit_rate, surface_rate, net, grav, vel, rot)
