"""Image benchmark: a Kerr a = 0.9 sky image traced by gravicat against per-ray scipy solve_ivp.

Not collected by pytest. Run by hand:

    python tests/benchmarks/bench_image.py [--size 256] [--sample 24]

* gravicat: the 256x256 sky scene of Kerr (M = 1, a = 0.9) from a static observer at r = 50 M on the equator,
  field of view 2 atan(12/50), every ray advanced together (:func:`gravicat.physics.camera.trace_image`),
  CPU seconds, seconds per ray, median and maximum Hamiltonian drift;
* baseline, measured in the same run: ``scipy.integrate.solve_ivp`` (DOP853) on a random sample of the
  same rays, one ray at a time, with the same right-hand side callables and the same stopping radii, its
  tolerance tightened until the sample's median drift is at or below gravicat's median drift on the same
  rays; seconds per ray and the ratio;
* peak resident memory of the process (``resource.getrusage``);
* ``--outline``: the Kerr a = 0.9 shadow seen from r = 1000 M edge-on and at 60 degrees, traced at
  ``--size`` pixels over a field of view of 0.024 rad, its edge against Bardeen's analytic curve
  (J. M. Bardeen, in Black Holes, Les Houches 1973, the critical impact parameters xi, eta of the
  spherical photon orbits): the largest distance in pixels (target: within one pixel at 256x256;
  tests/test_image.py checks the same at 40x40).
"""

from __future__ import annotations

import argparse
import math
import resource
import time

import numpy as np


def main() -> None:
    from scipy.integrate import solve_ivp

    from gravicat.export.hamiltonian import hamiltonian_system
    from gravicat.format.bundled import bundled_path, read_bundled
    from gravicat.format.metricfile import build_chart
    from gravicat.physics.camera import build_camera, trace_image
    from gravicat.physics.equatorial import EquatorialChart
    from gravicat.physics.geodesics import Stops

    ap = argparse.ArgumentParser()
    ap.add_argument("--size", type=int, default=256)
    ap.add_argument("--sample", type=int, default=24)
    ap.add_argument("--outline", action="store_true", help="the Kerr shadow outline against Bardeen's curve")
    args = ap.parse_args()
    if args.outline:
        return outline(args.size)
    doc = read_bundled(bundled_path("kerr"))
    spec = build_chart(doc, "boyer-lindquist")
    values = {"M": 1, "a": 0.9}
    system = hamiltonian_system(spec, values, skip_domain=("theta",))
    chart = EquatorialChart(spec, doc.chart_names)
    camera = build_camera(system, chart, {"r": 50.0})
    rh = 1 + math.sqrt(1 - 0.81)
    stops = Stops(radial=1, inner=1.01 * rh, outer=100.0, polar=2)
    fov = 2 * math.atan(12 / 50)
    cpu = time.process_time()
    img = trace_image(system, camera, stops, size=args.size, fov=fov, max_steps=20000, max_cpu=3600)
    ours = time.process_time() - cpu
    rays = img.rays
    n = args.size * args.size
    print(f"gravicat: {args.size}x{args.size} = {n} rays in {ours:.1f} CPU s ({ours / n * 1e3:.3f} ms/ray); "
          f"drift median {np.median(rays.drift):.2e}, max {rays.drift.max():.2e}; "
          f"ends: {', '.join(f'{e} {rays.count(e)}' for e in ('horizon', 'escape', 'step-limit', 'cpu-limit'))}")

    rng = np.random.default_rng(1)
    pick = rng.choice(n, size=min(args.sample, n), replace=False)
    x0, p0 = camera.rays(np.tan(img.alpha).ravel()[pick], np.tan(img.beta).ravel()[pick])
    target = float(np.median(rays.drift[pick]))

    def rhs(_l, y):
        dx, dp = system.rhs(y[:4, None], y[4:, None])
        return np.concatenate([dx[:, 0], dp[:, 0]])

    def captured(_l, y):
        return y[1] - stops.inner
    captured.terminal = True

    def escaped(_l, y):
        return y[1] - stops.outer
    escaped.terminal = True

    for rtol in (1e-9, 1e-10, 1e-11, 1e-12):
        cpu = time.process_time()
        drifts = []
        for k in range(len(pick)):
            y0 = np.concatenate([x0[k], p0[k]])
            sol = solve_ivp(rhs, (0, 1e5), y0, method="DOP853", rtol=rtol, atol=rtol * 1e-2,
                            events=(captured, escaped))
            y = sol.y[:, -1]
            drifts.append(abs(system.hamiltonian(y[:4, None], y[4:, None])[0]
                              - system.hamiltonian(y0[:4, None], y0[4:, None])[0]))
        base = (time.process_time() - cpu) / len(pick)
        if np.median(drifts) <= max(target, 1e-15):
            break
    print(f"baseline: scipy solve_ivp DOP853 one ray at a time, rtol {rtol:g}: {base * 1e3:.2f} ms/ray, "
          f"median drift {np.median(drifts):.2e} (gravicat on the same rays {target:.2e})")
    print(f"ratio: gravicat is {base / (ours / n):.1f}x faster per ray")
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak resident memory: {peak:.0f} MiB")


def outline(size: int) -> None:
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # tests/_shadow.py
    from _shadow import bardeen_curve

    from gravicat.export.hamiltonian import hamiltonian_system
    from gravicat.format.bundled import bundled_path, read_bundled
    from gravicat.format.metricfile import build_chart
    from gravicat.physics.camera import build_camera, shadow_outline, trace_image
    from gravicat.physics.equatorial import EquatorialChart
    from gravicat.physics.geodesics import Stops

    doc = read_bundled(bundled_path("kerr"))
    spec = build_chart(doc, "boyer-lindquist")
    M, a, r_obs = 1.0, 0.9, 1000.0
    system = hamiltonian_system(spec, {"M": M, "a": a}, skip_domain=("theta",))
    chart = EquatorialChart(spec, doc.chart_names)
    rh = M + math.sqrt(M * M - a * a)
    for name, inclination in (("edge-on", math.pi / 2), ("60 degrees", math.pi / 3)):
        camera = build_camera(system, chart, {"r": r_obs, "theta": inclination})
        cpu = time.process_time()
        image = trace_image(system, camera, Stops(radial=1, inner=1.01 * rh, outer=2 * r_obs, polar=2), size=size,
                            fov=0.024, max_steps=4000, max_cpu=3600)
        seconds = time.process_time() - cpu
        edge = np.array(shadow_outline(image))
        curve = bardeen_curve(M, a, inclination, r_obs)
        dist = np.array([np.min(np.hypot(px - curve[:, 0], py - curve[:, 1])) for px, py in edge])
        print(f"Kerr a = 0.9 shadow {name}, {size}x{size}, pixel {image.pixel:.2e} rad: {len(edge)} edge points, "
              f"largest distance to Bardeen's curve {dist.max() / image.pixel:.2f} pixels, median "
              f"{np.median(dist) / image.pixel:.2f}; {seconds:.1f} CPU s; drift max {image.rays.drift.max():.1e}")


if __name__ == "__main__":
    main()
