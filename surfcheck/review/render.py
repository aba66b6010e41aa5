"""Pictures of per-vertex fields: PyVista renders the views off-screen, matplotlib lays them out.

Works without a display or GPU (VTK falls back to software rendering). Each picture holds one or more
views of the part coloured by the field, seams drawn as dark-outlined tubes coloured by their per-station result, one
colour bar titled with the quantity and its unit whose limits are robust percentiles of the field
(stated under the bar; arrows on the bar where values are clipped); signed fields get a diverging map
centred on zero.

Views are chosen from the geometry: a direction is scored by the projected area of the faces that
face it (sum of A_f max(0, n_f . d) over a Fibonacci lattice of directions, Gonzalez 2010, Math.
Geosci. 42:49), the best one for the whole part or for the faces near a seam, then tilted by TILT_DEG
so that the surface is seen at an angle, not edge-on or flat.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from io import BytesIO
from pathlib import Path

import numpy as np

from surfcheck.grading.status import Status
from surfcheck.io import write_atomic

STATUS_COLOURS = {Status.OK: "#1f9e89", Status.FAIL: "#d7263d", Status.NOT_RESOLVED: "#4b4f56"}
STATUS_TEXT = {Status.OK: "#137a69", Status.FAIL: "#b0172c", Status.NOT_RESOLVED: "#3c4043"}  # darker, for text
NO_VALUE_COLOUR = "#e4e4e4"  # the field's "no value": far lighter than the "not resolved" seam colour
OUTLINE_COLOUR = "#111111"  # every seam tube and station ball is outlined, so no field colour hides it
STRIPE_COLOURS = ["#1d2b44", "#fbf6e4"]  # a stripe field's dark and light band
MAX_STRIPES = 200  # at most this many level intervals in a stripe picture
OUTLINE_RATIO = 2.0  # radius of the outline over that of the tube or ball
PERCENTILES = (2.0, 98.0)  # colour limits; common practice, no published source
TILT_DEG = 30.0  # views are tilted this far out of the best-facing direction; common practice
CANDIDATE_DIRECTIONS = 400
DPI = 100
AMBIENT = 0.45  # share of a surface's colour kept where it faces away from the light
TUBE_PIXELS = 2.5  # seam tubes are this many pixels in radius in every view, station balls 2.5 times


@dataclass(frozen=True)
class SeamOverlay:
    """A seam to draw over a heatmap: ordered points and one status per point (a key of
    STATUS_COLOURS); ``markers`` are extra points (stations) drawn as small balls, ``marker_status``
    their statuses."""

    points: np.ndarray
    status: tuple[str, ...]
    label: str = ""
    markers: np.ndarray | None = None
    marker_status: tuple[str, ...] = ()


@dataclass(frozen=True)
class View:
    """A camera: ``direction`` from the focus towards the eye, ``up`` for the picture's vertical,
    and what to frame: the whole part (``focus`` None) or a ball of ``radius`` about ``focus``."""

    direction: np.ndarray
    up: np.ndarray
    name: str
    focus: np.ndarray | None = None
    radius: float = 0.0


def colour_limits(values: np.ndarray, signed: bool) -> tuple[float, float]:
    """Robust limits: the PERCENTILES of the finite values; symmetric about 0 for a signed field."""
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return (-1.0, 1.0) if signed else (0.0, 1.0)
    if signed:
        bound = float(np.percentile(np.abs(finite), PERCENTILES[1])) or 1e-12
        return -bound, bound
    low, high = (float(p) for p in np.percentile(finite, PERCENTILES))
    return (low, high) if high > low else (low, low + 1e-12)


def limits_text(signed: bool, where: str = "") -> str:
    """How colour_limits chose its limits, in words (``where``: of which values, e.g. "within 8 mm
    of seam-2")."""
    low, high = PERCENTILES
    rule = f"{_ordinal(high)} percentile of |value|" if signed else f"{_ordinal(low)} to {_ordinal(high)} percentile"
    return f"{rule} {where}".strip()


def _ordinal(x: float) -> str:
    n = int(round(x))
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{x:g}{suffix}"


# ---------------------------------------------------------------- choosing views


def fibonacci_directions(count: int) -> np.ndarray:
    """(count, 3) unit vectors spread evenly over the sphere (the Fibonacci lattice, Gonzalez 2010)."""
    i = np.arange(count) + 0.5
    z = 1.0 - 2.0 * i / count
    phi = np.pi * (1.0 + 5.0**0.5) * i
    r = np.sqrt(1.0 - z * z)
    return np.column_stack([r * np.cos(phi), r * np.sin(phi), z])


def _face_normals(V: np.ndarray, F: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Area-weighted face normals (m, 3) (length = twice the area) and face centres (m, 3)."""
    a, b, c = V[F[:, 0]], V[F[:, 1]], V[F[:, 2]]
    return np.cross(b - a, c - a), (a + b + c) / 3.0


def facing_direction(weighted_normals: np.ndarray) -> np.ndarray:
    """The direction that sees the most projected area of these (area-weighted) faces."""
    if len(weighted_normals) > 20000:
        weighted_normals = weighted_normals[np.linspace(0, len(weighted_normals) - 1, 20000).astype(np.int64)]
    candidates = fibonacci_directions(CANDIDATE_DIRECTIONS)
    score = np.maximum(weighted_normals @ candidates.T, 0.0).sum(axis=0)
    return candidates[int(np.argmax(score))]


def principal_axes(points: np.ndarray) -> np.ndarray:
    """Rows: unit principal axes of the points, largest spread first."""
    centred = points - points.mean(axis=0)
    _, _, vt = np.linalg.svd(centred[:: max(1, len(centred) // 20000)], full_matrices=False)
    return vt


def _tilted(direction: np.ndarray, towards: np.ndarray, degrees: float) -> tuple[np.ndarray, np.ndarray]:
    """``direction`` turned by ``degrees`` towards ``towards`` (made normal to it), and an up vector:
    ``towards`` made normal to the result."""
    t = towards - (towards @ direction) * direction
    t = t / np.linalg.norm(t)
    angle = np.radians(degrees)
    d = np.cos(angle) * direction + np.sin(angle) * t
    up = t - (t @ d) * d
    return d / np.linalg.norm(d), up / np.linalg.norm(up)


def _tilt_axis(direction: np.ndarray, axes: np.ndarray) -> np.ndarray:
    """Of the given axes, the one most nearly normal to ``direction`` (the first wins ties), signed so
    that its largest coordinate is positive."""
    k = int(np.argmin(np.round(np.abs(axes @ direction), 6)))
    axis = axes[k]
    return axis if axis[np.argmax(np.abs(axis))] > 0 else -axis


def overview_views(V: np.ndarray, F: np.ndarray) -> list[View]:
    """Two views of the whole part: from the side that shows the most of it, and from the other side."""
    normals, _ = _face_normals(V, F)
    best = facing_direction(normals)
    axis = _tilt_axis(best, principal_axes(V))
    front = _tilted(best, axis, TILT_DEG)
    back = _tilted(-best, axis, TILT_DEG)
    return [View(*front, "front"), View(*back, "back")]


def seam_views(V: np.ndarray, F: np.ndarray, seam_points: np.ndarray, focus: np.ndarray, radius: float,
               name: str) -> list[View]:
    """Two views facing a seam (the direction that sees most of the faces within ``radius`` of it,
    tilted along the seam): the whole part, and a close-up of the ball of ``radius`` about ``focus``."""
    from scipy.spatial import cKDTree

    normals, centres = _face_normals(V, F)
    near = np.unique(np.concatenate(cKDTree(centres).query_ball_point(seam_points, radius)).astype(np.int64))
    best = facing_direction(normals[near] if len(near) else normals)
    along = principal_axes(seam_points)[0] if len(seam_points) > 2 else principal_axes(V)[0]
    if abs(along @ best) > 0.9:  # a seam seen end-on (a closed ring seen from its axis): any normal axis
        along = _tilt_axis(best, principal_axes(V))
    along = along if along[np.argmax(np.abs(along))] > 0 else -along
    d, up = _tilted(best, along, TILT_DEG)
    return [View(d, up, f"{name}: whole part"), View(d, up, f"{name}: close-up", np.asarray(focus, float), radius)]


# ---------------------------------------------------------------- rendering


def offscreen_pyvista():
    """PyVista set to render off-screen, with VTK's log and warnings silenced."""
    import pyvista as pv
    import vtk

    vtk.vtkLogger.SetStderrVerbosity(vtk.vtkLogger.VERBOSITY_OFF)
    vtk.vtkObject.GlobalWarningDisplayOff()
    pv.OFF_SCREEN = True
    return pv


def surface_mesh(pv, V: np.ndarray, F: np.ndarray):
    """The triangles as a PyVista PolyData."""
    cells = np.hstack([np.full((len(F), 1), 3), F]).astype(np.int64).ravel()
    return pv.PolyData(np.asarray(V, dtype=float), cells)


def _outlined(pv, plotter, mesh_at, colour: str, radius: float, towards_eye: np.ndarray) -> list:
    """A tube or ball (``mesh_at(radius, shift)``) drawn unlit in ``colour`` over a dark one
    OUTLINE_RATIO times wider: the coloured one is moved towards the eye by a few radii, which in a
    parallel projection leaves its place in the picture unchanged and keeps it in front of its
    outline. Returns both actors."""
    return [plotter.add_mesh(mesh_at(OUTLINE_RATIO * radius, np.zeros(3)), color=OUTLINE_COLOUR, lighting=False),
            plotter.add_mesh(mesh_at(radius, 3.0 * OUTLINE_RATIO * radius * towards_eye), color=colour,
                             lighting=False)]


def status_runs(seam: SeamOverlay) -> list[tuple[np.ndarray, str]]:
    """The seam cut into runs of equal status: (points (k >= 2, 3), status) each, every run sharing
    its last point with the next."""
    runs, status, start = [], list(seam.status), 0
    for i in range(1, len(status) + 1):
        if i == len(status) or status[i] != status[start]:
            points = seam.points[start:min(i + 1, len(status))]
            if len(points) >= 2:
                runs.append((points, status[start]))
            start = i
    return runs


def _add_seam(pv, plotter, seam: SeamOverlay, radius: float, towards_eye: np.ndarray) -> list:
    """Each run of equal status along the seam as one outlined tube of that status's colour; station
    markers as outlined balls (``towards_eye``: unit vector from the part to the camera). Returns the
    actors added."""
    actors = []
    for points, state in status_runs(seam):
        def tube(r, shift, points=points):
            return pv.lines_from_points(points + shift).tube(radius=r, n_sides=16)

        actors += _outlined(pv, plotter, tube, STATUS_COLOURS.get(state, "#000000"), radius, towards_eye)
    if seam.markers is not None:
        for point, state in zip(np.atleast_2d(seam.markers), seam.marker_status):
            def ball(r, shift, point=point):
                return pv.Sphere(radius=r, center=point + shift, theta_resolution=16, phi_resolution=12)

            actors += _outlined(pv, plotter, ball, STATUS_COLOURS.get(state, "#000000"), 2.5 * radius, towards_eye)
    return actors


def frame_view(view: View, V: np.ndarray, aspect: float) -> tuple[list, float]:
    """PyVista camera position and parallel scale that frame the view's target (the whole part, or the
    vertices within the close-up ball) in a panel of width / height ``aspect``, with a small margin."""
    target = V if view.focus is None else V[np.linalg.norm(V - view.focus, axis=1) <= view.radius]
    if len(target) == 0:
        target = np.asarray(view.focus, dtype=float)[None, :]
    right = np.cross(-view.direction, view.up)
    x, y = target @ right, target @ view.up
    centre = target.mean(axis=0)
    centre = centre + (0.5 * (x.max() + x.min()) - centre @ right) * right + (0.5 * (y.max() + y.min()) - centre @ view.up) * view.up
    half = max(0.5 * float(np.ptp(y)), 0.5 * float(np.ptp(x)) / aspect, 1e-9)
    depth = float(np.linalg.norm(np.ptp(V, axis=0))) + 1e-9
    eye = centre + 2.0 * depth * view.direction
    return [tuple(eye), tuple(centre), tuple(view.up)], 1.06 * half


def render_views(V: np.ndarray, F: np.ndarray, values: np.ndarray, views: list[View], *, cmap,
                 limits: tuple[float, float], seams: list[SeamOverlay], pixels: tuple[int, int],
                 n_colors: int = 256) -> list[np.ndarray]:
    """One RGB image of ``pixels`` (width, height) per view of the part coloured by ``values``
    (clipped to ``limits``; ``cmap`` a name or a matplotlib colour map of ``n_colors`` entries, looked
    up per pixel after interpolating the values), seams on top."""
    pv = offscreen_pyvista()
    V = np.asarray(V, dtype=float)
    surface = surface_mesh(pv, V, F)
    surface.point_data["field"] = np.where(np.isfinite(values), values, np.nan)
    plotter = pv.Plotter(off_screen=True, window_size=list(pixels), border=False, lighting="none")
    plotter.set_background("white")
    # one light at the eye, with an ambient part: a face seen square-on shows its colour-bar colour,
    # an oblique one is darker by up to 1 - AMBIENT
    light = pv.Light(light_type="headlight", intensity=1.0)
    light.ambient_color = "white"
    plotter.add_light(light)
    plotter.add_mesh(surface, scalars="field", cmap=cmap, clim=limits, n_colors=n_colors, nan_color=NO_VALUE_COLOUR,
                     show_scalar_bar=False, interpolate_before_map=True,
                     smooth_shading=True, ambient=AMBIENT, diffuse=1.0 - AMBIENT, specular=0.0)
    diagonal = float(np.linalg.norm(np.ptp(V, axis=0)))
    plotter.enable_parallel_projection()
    images = []
    for view in views:
        position, half = frame_view(view, V, pixels[0] / pixels[1])
        pixel = 2.0 * half / pixels[1]  # world length of one pixel
        actors = [a for seam in seams for a in _add_seam(pv, plotter, seam, TUBE_PIXELS * pixel, view.direction)]
        plotter.camera_position = position
        plotter.camera.parallel_scale = half
        plotter.camera.clipping_range = (1e-3 * diagonal, 5.0 * diagonal)
        plotter.render()
        images.append(plotter.screenshot(return_img=True))
        for actor in actors:
            plotter.remove_actor(actor, render=False)
    plotter.close()
    return images


def render_field(V: np.ndarray, F: np.ndarray, values: np.ndarray, path: str | os.PathLike, *,
                 quantity: str, unit: str, signed: bool, seams: list[SeamOverlay] | None = None,
                 title: str = "", views: list[View] | None = None, limits: tuple[float, float] | None = None,
                 limits_rule: str = "", size: tuple[int, int] = (1600, 800), stripes: float | None = None) -> Path:
    """Write a PNG of a per-vertex field: the views (default: overview_views) side by side, one colour
    bar titled with the quantity and its unit, the colour limits stated under it, and a legend of
    the seam statuses when seams are drawn. ``limits`` default to colour_limits of all values; given,
    ``limits_rule`` says how they were chosen. ``size`` is the picture's size in pixels. With
    ``stripes`` (a level spacing in the field's unit) the field is drawn as stripes instead: a dark
    and a light band per level interval within ``limits`` (no value outside), no colour bar."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.patches import Patch

    values = np.asarray(values, dtype=float)
    seams = seams or []
    views = views or overview_views(np.asarray(V, float), np.asarray(F))
    given = limits
    limits = limits or colour_limits(values, signed)
    cmap, n_colors, shown = ("RdBu_r" if signed else "viridis"), 256, values
    if stripes:
        shown, limits, cmap, n_colors, stripes = stripe_map(values, limits, stripes)
    width, height = size
    pad, gap, head, foot = 16, 20, (86 if title else 40), 150
    panel = ((width - 2 * pad - gap * (len(views) - 1)) // len(views), height - head - foot)
    images = render_views(V, F, shown, views, cmap=cmap, limits=limits, seams=seams, pixels=panel, n_colors=n_colors)

    fig = plt.figure(figsize=(width / DPI, height / DPI), dpi=DPI)
    for k, (image, view) in enumerate(zip(images, views)):
        x0 = pad + k * (panel[0] + gap)
        fig.figimage(image, xo=x0, yo=foot, origin="upper")
        fig.text((x0 + 0.5 * panel[0]) / width, (foot + panel[1] + 8) / height, view.name, fontsize=13,
                 ha="center", va="bottom")
    if title:
        fig.text(pad / width, 1.0 - 12 / height, title, fontsize=15, ha="left", va="top")
    finite = values[np.isfinite(values)]
    if stripes:
        _stripe_legend(fig, quantity, unit, stripes, finite, pad, width, height)
    else:
        _colour_bar(fig, quantity, unit, signed, values, limits, cmap, given, limits_rule, seams, pad, width, height)
    if seams:
        handles = [Patch(facecolor=c, edgecolor=OUTLINE_COLOUR, label=f"seam {s}") for s, c in STATUS_COLOURS.items()]
        if np.isnan(shown).any():
            handles.append(Patch(facecolor=NO_VALUE_COLOUR, edgecolor="#9aa0a6", label="field: no value"))
        # two columns once the no-value entry joins: in one, the legend rises into the pictures
        fig.legend(handles=handles, loc="lower right", bbox_to_anchor=(1.0 - pad / width, 30 / height),
                   fontsize=12, frameon=False, title="result per station", title_fontsize=12,
                   ncols=2 if len(handles) > len(STATUS_COLOURS) else 1)
    return save_figure(fig, path, DPI)


def stripe_map(values: np.ndarray, limits: tuple[float, float], spacing: float):
    """A stripe field as render_views draws it: (values in level intervals, NaN outside ``limits``;
    their limits, whole intervals; the colour map, a dark and a light band per interval; its size;
    the spacing used, widened to whole multiples of ``spacing`` where more than MAX_STRIPES would show)."""
    from matplotlib.colors import ListedColormap

    low, high = limits
    bands = max(1, int(np.ceil(high / spacing) - np.floor(low / spacing)))
    spacing = spacing * int(np.ceil(bands / MAX_STRIPES))
    first, last = int(np.floor(low / spacing)), int(np.ceil(high / spacing))
    last = max(last, first + 1)
    with np.errstate(invalid="ignore"):
        phase = np.where((values >= low) & (values <= high), values / spacing, np.nan)
    return phase, (float(first), float(last)), ListedColormap(STRIPE_COLOURS * (last - first)), 2 * (last - first), spacing


def _stripe_legend(fig, quantity, unit, spacing, finite, pad, width, height) -> None:
    unit = "" if unit == "1" else f" {unit}"
    text = (f"{quantity}: one dark and one light band per {spacing:.3g}{unit};\na band that breaks at a seam marks"
            " a jump of the normals, one that kinks a jump of the curvature")  # two lines: clear of the legend
    fig.text(pad / width, 40 / height, text, fontsize=12, ha="left", va="bottom")
    stated = f"field range {finite.min():.3g} .. {finite.max():.3g}{unit}" if finite.size else "no finite values"
    fig.text(pad / width, 8 / height, stated + "; light grey: no value (or outside the bands shown)", fontsize=11,
             ha="left", va="bottom")


def _colour_bar(fig, quantity, unit, signed, values, limits, cmap, given, limits_rule, seams, pad, width, height):
    import matplotlib
    import matplotlib.pyplot as plt

    bar_right = width - pad - (420 if seams else 0)  # room for the two-column seam legend
    bar_ax = fig.add_axes([(pad + 30) / width, 82 / height, (bar_right - pad - 60) / width, 30 / height])
    finite = values[np.isfinite(values)]
    mappable = plt.cm.ScalarMappable(norm=matplotlib.colors.Normalize(*limits), cmap=cmap)
    bar = fig.colorbar(mappable, cax=bar_ax, orientation="horizontal", extend=_extend(finite, limits))
    bar.ax.tick_params(labelsize=12)
    bar.ax.xaxis.set_major_formatter(matplotlib.ticker.FormatStrFormatter("%.3g"))
    bar.set_label(f"{quantity} [{unit}]", fontsize=13)
    rule = limits_rule or (limits_text(signed) if given is None else "as chosen by the caller")
    stated = f"colour limits {limits[0]:.3g} .. {limits[1]:.3g} {unit} ({rule}); "
    stated += f"field range {finite.min():.3g} .. {finite.max():.3g}" if finite.size else "no finite values"
    if finite.size < values.size:
        stated += "; light grey: no value"
    fig.text(pad / width, 8 / height, stated, fontsize=11, ha="left", va="bottom")


def save_figure(fig, path: str | os.PathLike, dpi: int, tight: bool = False) -> Path:
    """Write a matplotlib figure as PNG through the atomic writer (a unique temporary name beside the
    target, renamed into place; nothing half-written is left on failure) and close it.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure to write.
    path : path-like
        Where the PNG goes.
    dpi : int
        Resolution of the PNG.
    tight : bool
        Grow or crop the canvas to what is drawn (titles, legends and notes outside the axes are never
        cut off); the pictures of fixed size keep False.

    Returns
    -------
    Path
        ``path``.
    """
    import matplotlib.pyplot as plt

    buffer = BytesIO()
    try:
        fig.savefig(buffer, format="png", dpi=dpi, facecolor="white",
                    **({"bbox_inches": "tight", "pad_inches": 0.15} if tight else {}))
    finally:
        plt.close(fig)
    path = Path(path)
    write_atomic(path, buffer.getvalue())
    return path


def _extend(finite: np.ndarray, limits: tuple[float, float]) -> str:
    """matplotlib's colour-bar ``extend``: which ends of the bar have values beyond them."""
    if finite.size == 0:
        return "neither"
    below, above = finite.min() < limits[0], finite.max() > limits[1]
    return {(True, True): "both", (True, False): "min", (False, True): "max"}.get((below, above), "neither")
