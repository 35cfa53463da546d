"""A pinhole camera in a stationary, axisymmetric chart: observer, tetrad, one backward ray per pixel.

The observer sits at (t = 0, r_O, theta_O, phi = 0) and is static (u = d_t/sqrt(-g_tt)) where
g_tt < 0, else the zero-angular-momentum observer (u = (d_t + omega d_phi)/alpha with
omega = -g_tphi/g_phiphi, alpha^2 = -(g_tt + omega g_tphi)), else there is no camera. Its
orthonormal tetrad is u followed by Gram-Schmidt (in the metric) of d_r, d_theta, d_phi: e_r,
e_theta, e_phi. The camera looks at the centre (-e_r); an image-plane point (X, Y) (pinhole:
X = tan(alpha), Y = tan(beta)) sees along v ~ -e_r + X e_phi - Y e_theta, so alpha grows along
e_phi, the direction of rotation, and beta towards the axis theta = 0.

The light reaching the pixel has the future momentum k = E (u - v) with E = 1 measured by the
observer; the ray is traced backwards by integrating p = -k_flat (lowered) forward in the affine
parameter (the equations are even in p), so it leaves the camera along v and into the past. The
redshift factor of an emitter with four-velocity u_e met by the ray is then g = E_obs/E_em with
E_em = -k_a u_e^a = p_a u_e^a.

Which coordinates play time, radial, polar and azimuthal parts comes from the equatorial model
(:class:`gravicat.physics.equatorial.EquatorialChart`), the same one ``gravicat orbits`` uses.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from gravicat.errors import InputError


@dataclass
class Camera:
    """Observer position ``x`` (n,), four-velocity and tetrad (contravariant vectors, rows of ``tetrad``:
    u, e_r, e_theta, e_phi), metric there ``g`` (n, n), the kind of observer and coordinate indices."""

    x: Any
    g: Any
    tetrad: Any
    kind: str  # "static" | "zamo"
    time: int
    radial: int
    polar: int
    azimuth: int

    def rays(self, X, Y):
        """Start positions and backward momenta ``(x0, p0)`` (arrays ``(N, n)``) for image-plane points
        ``X = tan(alpha)``, ``Y = tan(beta)`` (arrays of the same shape, flattened)."""
        import numpy as np

        X, Y = np.ravel(X), np.ravel(Y)
        u, er, eth, eph = self.tetrad
        v = -er[:, None] + X[None, :] * eph[:, None] - Y[None, :] * eth[:, None]
        v = v / np.sqrt(1 + X**2 + Y**2)[None, :]
        k = u[:, None] - v  # future-directed, E = 1 for the observer
        p = -(self.g @ k)  # lowered and reversed: integrate forward = trace backward
        x0 = np.tile(self.x, (X.size, 1))
        return x0, p.T.copy()

    def angles(self, p):
        """(alpha, beta) of the viewing direction of backward momenta ``p`` (N, n) at the camera."""
        import numpy as np

        ginv = np.linalg.inv(self.g)
        k = -(ginv @ p.T)  # the future momentum, contravariant
        u, er, eth, eph = self.tetrad
        comp = [np.einsum("a,ab,bn->n", e, self.g, k) for e in (er, eth, eph)]
        vr, vth, vph = (-c for c in comp)  # v = u - k
        return np.arctan2(vph, -vr), np.arctan2(-vth, -vr)


def build_camera(system, model, observer: dict[str, float], *, source: str = "--observer") -> Camera:
    """The camera at ``observer`` (coordinate name -> value; radial required, polar default pi/2).

    ``system``: :class:`gravicat.export.hamiltonian.HamiltonianSystem`; ``model``:
    :class:`gravicat.physics.equatorial.EquatorialChart` (time, radial, polar, azimuth). Raises
    :class:`InputError` naming ``source`` where no camera can be built."""
    import numpy as np

    names = list(system.coords)
    if len(names) != 4:
        raise InputError(source, None, f"a camera needs a four-dimensional chart (this one has {len(names)} "
                                       "coordinates)")
    if model.polar is None:
        raise InputError(source, None, "a camera needs a polar angle theta in the chart (for its orientation)")
    ti, ri = names.index(str(model.time)), names.index(str(model.radial))
    pi_, ai = names.index(str(model.polar)), names.index(str(model.azimuth))
    rname, pname = names[ri], names[pi_]
    unknown = [k for k in observer if k not in (rname, pname)]
    if unknown:
        raise InputError(source, unknown[0], f"give only {rname} and {pname} (the camera sits at "
                                             f"{names[ti]} = 0, {names[ai]} = 0)")
    if rname not in observer:
        raise InputError(source, rname, f"give the observer's {rname}, e.g. {rname}=50")
    x = np.zeros(4)
    x[ri] = float(observer[rname])
    x[pi_] = float(observer.get(pname, math.pi / 2))
    if not (0 < x[pi_] < math.pi):
        raise InputError(source, pname, f"{x[pi_]:g} is not strictly between 0 and pi (the axis has no "
                                        "orientation)")
    where = ", ".join(f"{names[i]}={x[i]:g}" for i in (ri, pi_))
    if system.domain_exprs:
        margins = system.domain_margins(x[:, None])[:, 0]
        outside = [text for (text, _, _), m in zip(system.domain_exprs, margins, strict=True) if not m > 0]
        if outside:
            raise InputError(source, None, f"the observer at {where} is outside the chart's domain ({outside[0]})")
    g = system.metric(x[:, None])[:, :, 0]
    if not np.all(np.isfinite(g)):
        raise InputError(source, None, f"the metric is not finite at the observer ({where})")
    e_t = np.eye(4)[ti]
    gtt = g[ti, ti]
    if gtt < 0:
        u, kind = e_t / math.sqrt(-gtt), "static"
    else:
        gtp, gpp = g[ti, ai], g[ai, ai]
        alpha2 = -(gtt - gtp * gtp / gpp) if gpp > 0 else -1.0
        if gtp == 0 or not alpha2 > 0:
            raise InputError(source, None, f"no static or zero-angular-momentum observer exists at {where} "
                                           "(inside a horizon, or the time coordinate is not timelike there)")
        omega = -gtp / gpp
        u = (e_t + omega * np.eye(4)[ai]) / math.sqrt(alpha2)
        kind = "zamo"
    basis = [u]
    for i in (ri, pi_, ai):
        v = np.eye(4)[i].astype(float)
        for j, e in enumerate(basis):
            sign = -1.0 if j == 0 else 1.0  # g(u, u) = -1
            v = v - sign * (e @ g @ v) * e
        norm = v @ g @ v
        if not norm > 0:
            raise InputError(source, None, f"the coordinate direction {names[i]} is not spacelike for the observer "
                                           f"at {where}; no orthonormal frame")
        basis.append(v / math.sqrt(norm))
    return Camera(x=x, g=g, tetrad=np.array(basis), kind=kind, time=ti, radial=ri, polar=pi_, azimuth=ai)


@dataclass
class Image:
    """The traced image: per-pixel arrays of shape ``(size, size)`` (row 0 at the top, beta > 0)."""

    alpha: Any  # angles of the pixel centres (radians)
    beta: Any
    rays: Any  # gravicat.physics.geodesics.Rays, one per pixel (row-major)
    redshift: Any  # g = E_obs/E_em on the disk, nan elsewhere
    pixel: float  # radians per pixel at the centre
    size: int


def trace_image(system, camera: Camera, stops, *, size: int, fov: float, model=None, direction: str = "prograde",
                max_steps: int, max_cpu: float, rtol: float = 1e-9, atol: float = 1e-11, progress=None) -> Image:
    """One backward null geodesic per pixel, all advanced together. ``fov``: full width in radians.

    On the disk (``stops.disk``) the emitters move on circular equatorial geodesics of ``model``
    (an :class:`gravicat.physics.equatorial.Equatorial`; ``orbit_np`` gives Omega and u^t), and
    the redshift factor is 1/(u^t (p_t + Omega p_phi)) with the backward momentum p."""
    import numpy as np

    from gravicat.physics.geodesics import DISK, integrate

    half = math.tan(fov / 2)
    centres = (np.arange(size) + 0.5) / size * 2 - 1  # -1..1
    X = np.tile(centres * half, (size, 1))
    Y = np.tile((-centres * half)[:, None], (1, size))
    x0, p0 = camera.rays(X, Y)
    rays = integrate(system, x0, p0, stops, rtol=rtol, atol=atol, max_steps=max_steps, max_cpu=max_cpu,
                     progress=progress)
    redshift = np.full(size * size, np.nan)
    on = rays.end == DISK
    if on.any() and model is not None:
        r = rays.x[on, camera.radial]
        orbit = model.orbit_np(r, direction)
        ut, omega = np.asarray(orbit["ut"], dtype=float), np.asarray(orbit["Omega"], dtype=float)
        with np.errstate(all="ignore"):
            e_em = ut * (rays.p[on, camera.time] + omega * rays.p[on, camera.azimuth])
            redshift[on] = np.where(e_em > 0, 1 / e_em, np.nan)
    return Image(alpha=np.arctan(X), beta=np.arctan(Y), rays=rays, redshift=redshift.reshape(size, size),
                 pixel=fov / size, size=size)


def shadow_outline(image: Image):
    """The shadow's edge: midpoints (alpha, beta) between neighbouring pixels of which exactly one ended at a
    horizon, ordered by angle around the shadow's centre; an empty list without a shadow."""
    import numpy as np

    from gravicat.physics.geodesics import HORIZON

    dark = (image.rays.end == HORIZON).reshape(image.size, image.size)
    X, Y = np.tan(image.alpha), np.tan(image.beta)
    pts = []
    for sl_a, sl_b in (((slice(None), slice(1, None)), (slice(None), slice(None, -1))),
                       ((slice(1, None), slice(None)), (slice(None, -1), slice(None)))):
        edge = dark[sl_a] != dark[sl_b]
        mx = (X[sl_a] + X[sl_b])[edge] / 2
        my = (Y[sl_a] + Y[sl_b])[edge] / 2
        pts.append(np.column_stack([mx, my]))
    pts = np.vstack(pts) if pts else np.zeros((0, 2))
    if pts.size == 0 or not dark.any():
        return []
    cx, cy = X[dark].mean(), Y[dark].mean()
    order = np.argsort(np.arctan2(pts[:, 1] - cy, pts[:, 0] - cx))
    pts = pts[order]
    return [[float(np.arctan(a)), float(np.arctan(b))] for a, b in pts]
