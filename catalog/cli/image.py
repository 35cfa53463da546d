"""`gravicat image`: a picture of a stationary entry seen by a static (or zero-angular-momentum) observer."""

from __future__ import annotations

import math
import sys
import time
from pathlib import Path
from typing import Annotated

import typer

from gravicat.cli._base import app_context, open_subject, reports_errors
from gravicat.cli._output import emit_json
from gravicat.errors import InputError

app = typer.Typer()

SCENES = ("sky", "disk")


def parse_angle(text: str) -> float:
    """``1.2deg`` or a number of radians (``0.02``); a one-line error otherwise."""
    raw = text.strip().lower()
    scale = 1.0
    if raw.endswith("deg"):
        raw, scale = raw[:-3].strip(), math.pi / 180
    try:
        value = float(raw) * scale
    except ValueError:
        raise InputError("--fov", None, f"'{text}' is not an angle (e.g. 1.2deg or 0.02 for radians)") from None
    if not (0 < value < math.pi) or not math.isfinite(value):
        raise InputError("--fov", None, f"'{text}' is not an angle between 0 and 180 degrees")
    return value


def _progress():
    if not sys.stderr.isatty():
        return None
    last = [0.0]

    def show(done: int, total: int) -> None:
        now = time.monotonic()
        if now - last[0] < 0.2 and done < total:
            return
        last[0] = now
        width = 30
        filled = int(width * done / max(total, 1))
        sys.stderr.write(f"\rtracing [{'#' * filled}{'.' * (width - filled)}] {done}/{total} rays")
        if done >= total:
            sys.stderr.write("\n")
        sys.stderr.flush()

    return show


@app.command("image")
@reports_errors
def image(
    ctx: typer.Context,
    subject: Annotated[str, typer.Argument(help="Metric file (FILE[:CHART]) or catalogue entry "
                                                "(ID[@REVISION][:CHART]).", show_default=False)],
    observer: Annotated[str, typer.Option("--observer", help="Camera position, e.g. r=50,theta=1.2 "
                                                             "(theta defaults to pi/2).", show_default=False)],
    output: Annotated[Path, typer.Option("-o", "--output", help="PNG to write (an .npz is written beside it).",
                                         show_default=False)],
    chart: Annotated[str | None, typer.Option("--chart", help="Chart (default: the first).")] = None,
    settings: Annotated[list[str] | None, typer.Option(
        "--set", metavar="NAME=VALUE", help="Parameter value (repeatable; default: the file's defaults).",
        show_default=False)] = None,
    size: Annotated[int, typer.Option("--size", help="Pixels per side.")] = 128,
    fov: Annotated[str | None, typer.Option("--fov", help="Full field of view: 1.2deg or radians (default: "
                                                          "about four shadow diameters).", show_default=False)] = None,
    scene: Annotated[str, typer.Option("--scene", help="sky (coordinate grid at infinity) or disk (thin "
                                                       "equatorial disk of circular emitters).")] = "sky",
    max_steps: Annotated[int, typer.Option("--max-steps", help="Cap on the integrator's iterations.")] = 20_000,
    max_cpu: Annotated[float, typer.Option("--max-cpu", help="Cap on the CPU seconds of the integration.")] = 600.0,
    as_json: Annotated[bool, typer.Option("--json", help="Print JSON (shape in docs/image.md).")] = False,
) -> None:
    """Trace one backward null geodesic per pixel and write a PNG (and an .npz of the end states)."""
    import numpy as np

    from gravicat.export.hamiltonian import hamiltonian_system
    from gravicat.format.assign import parse_assignments
    from gravicat.format.metricfile import build_chart
    from gravicat.physics import orbits as lib
    from gravicat.physics.camera import build_camera, shadow_outline, trace_image
    from gravicat.physics.geodesics import ENDS, Stops

    if scene not in SCENES:
        raise InputError("--scene", None, f"'{scene}' is not one of {', '.join(SCENES)}")
    if not 2 <= size <= 2048:
        raise InputError("--size", None, f"{size} is not between 2 and 2048 pixels")
    if output.suffix.lower() != ".png":
        raise InputError("--output", str(output), "the image is written as PNG: give a name ending in .png")
    try:
        import matplotlib
    except ImportError:
        raise InputError("--output", str(output), "writing the image needs matplotlib "
                                                  "(pip install 'gravicat[plot]')") from None
    app_ctx = app_context(ctx)
    found = open_subject(app_ctx, subject, chart=chart)
    doc, chart = found.document, found.chart or doc_first_chart(found.document)
    from gravicat.format.charts import require_spacetime

    require_spacetime(doc, "image")
    spec = build_chart(doc, chart)
    params = lib.resolve_parameters(doc, spec, settings or ())
    model_chart = lib.EquatorialChart(spec, doc.chart_names)
    model = model_chart.bind(params)
    values = {str(p): params.exact[str(p)] for p in spec.params}
    polar = str(model_chart.polar) if model_chart.polar is not None else "theta"
    where = parse_assignments(observer, "--observer", {str(c): c for c in spec.coords}, values,
                              kind="coordinate of this chart")
    system = hamiltonian_system(spec, values, skip_domain=(polar,))
    camera = build_camera(system, model_chart, {k: float(v) for k, v in where.items()})
    r_obs = float(camera.x[camera.radial])
    horizons = [q.radius for q in model.horizons.roots if q.radius < r_obs]
    inner = 1.01 * max(horizons) if horizons else None
    scale = model.scale
    outer = max(2 * r_obs, 50 * scale)
    if model.cosmological_horizon is not None:
        outer = min(outer, 0.99 * float(model.cosmological_horizon))
    field = parse_angle(fov) if fov else 2 * math.atan(min(12 * scale / r_obs, 10.0))
    stops = Stops(radial=camera.radial, inner=inner, outer=outer, polar=camera.polar)
    if scene == "disk":
        isco = model.landmarks["isco"].get("prograde")
        if isco is None:
            raise InputError("--scene", "disk", f"{doc.id}:{chart} has no innermost stable circular orbit with "
                                                "these values; the disk needs one")
        stops.disk = (float(isco), max(20 * scale, 3 * float(isco)))
    start = time.perf_counter()
    img = trace_image(system, camera, stops, size=size, fov=field, model=model if scene == "disk" else None,
                      max_steps=max_steps, max_cpu=max_cpu, progress=None if as_json else _progress())
    seconds = time.perf_counter() - start
    rays = img.rays
    outline = shadow_outline(img)
    end_names = np.array(ENDS)[rays.end].reshape(size, size)
    npz = output.with_suffix(".npz")
    _paint(matplotlib, img, end_names, output, scene)
    np.savez_compressed(npz, alpha=img.alpha, beta=img.beta, end=end_names, x=rays.x.reshape(size, size, -1),
                        p=rays.p.reshape(size, size, -1), redshift=img.redshift,
                        drift=rays.drift.reshape(size, size), coordinates=np.array(system.coords))
    report = {
        "metric": doc.id, "chart": chart, "observer": {**{k: float(v) for k, v in where.items()}, "kind": camera.kind},
        "scene": scene, "size": size, "fov": field, "seconds": seconds, "rays": int(size * size),
        "ends": {e: rays.count(e) for e in ENDS if rays.count(e)},
        "drift": {"max": float(rays.drift.max()), "median": float(np.median(rays.drift))},
        "pixel": img.pixel, "shadow": {"outline": outline},
        "files": {"png": str(output), "npz": str(npz)},
    }
    if as_json:
        emit_json(report)
    else:
        typer.echo(f"{doc.id}:{chart}: {size}x{size} rays from a {camera.kind} observer at "
                   + ", ".join(f"{k}={float(v):g}" for k, v in where.items())
                   + f" in {seconds:.1f} s; Hamiltonian drift max {report['drift']['max']:.1e}, "
                   f"median {report['drift']['median']:.1e}")
        typer.echo("ends: " + ", ".join(f"{k} {v}" for k, v in report["ends"].items()))
        typer.echo(f"wrote {output} and {npz}")
    if rays.limited:
        raise InputError("--max-steps" if rays.count("step-limit") else "--max-cpu", None,
                         f"{rays.limited} rays were still running at the cap (shown magenta); raise the cap")


def doc_first_chart(doc) -> str:
    return doc.chart_names[0]


def _paint(matplotlib, img, ends, path: Path, scene: str) -> None:
    import numpy as np

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    n = img.size
    rgb = np.zeros((n, n, 3))
    x = img.rays.x.reshape(n, n, -1)
    esc = ends == "escape"
    # the celestial sphere: a 10-degree checkerboard of the end point's polar and azimuthal coordinates
    th = np.mod(x[..., 2], 2 * np.pi)
    ph = x[..., 3] + np.where(th > np.pi, np.pi, 0.0)
    th = np.where(th > np.pi, 2 * np.pi - th, th)
    cell = (np.floor(th / (np.pi / 18)) + np.floor(ph / (np.pi / 18))).astype(int) % 2
    sky = np.where(cell[..., None] == 1, [0.55, 0.65, 0.85], [0.15, 0.2, 0.35])
    rgb[esc] = sky[esc] * (0.6 if scene == "disk" else 1.0)
    disk = ends == "disk"
    if disk.any():
        colour = matplotlib.colormaps["inferno"](np.clip((img.redshift - 0.3) / 1.2, 0, 1))[..., :3]
        rgb[disk] = colour[disk]
    rgb[(ends == "step-limit") | (ends == "cpu-limit")] = [1.0, 0.0, 1.0]
    rgb[(ends == "edge") | (ends == "failed") | (ends == "range")] = [0.5, 0.5, 0.5]
    ext = np.degrees([img.alpha.min(), img.alpha.max(), img.beta.min(), img.beta.max()])
    fig, ax = plt.subplots(figsize=(6, 6))
    ax.imshow(rgb, extent=ext, origin="upper", interpolation="nearest")
    ax.set_xlabel("alpha (deg, along the rotation)")
    ax.set_ylabel("beta (deg, towards the axis)")
    fig.savefig(path, dpi=100)
    plt.close(fig)
