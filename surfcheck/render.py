"""Off-screen pictures with PyVista: per-vertex heatmaps and seams drawn as tubes coloured by result.

Works without a display or GPU (VTK falls back to software rendering). Colour limits are robust
percentiles of the field, stated on the colour bar; signed fields get a diverging map centred on zero.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

STATUS_COLOURS = {"ok": "#1f9e89", "fail": "#d7263d", "not resolved": "#9aa0a6"}
PERCENTILES = (2.0, 98.0)  # colour limits; common practice, no published source


@dataclass(frozen=True)
class SeamOverlay:
    """A seam to draw over a heatmap: ordered points and one status per point."""

    points: np.ndarray
    status: tuple[str, ...]
    label: str = ""


def _pyvista():
    import pyvista as pv
    import vtk

    vtk.vtkLogger.SetStderrVerbosity(vtk.vtkLogger.VERBOSITY_OFF)
    vtk.vtkObject.GlobalWarningDisplayOff()
    pv.OFF_SCREEN = True
    return pv


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


def _surface(pv, V: np.ndarray, F: np.ndarray):
    cells = np.hstack([np.full((len(F), 1), 3), F]).astype(np.int64).ravel()
    return pv.PolyData(np.asarray(V, dtype=float), cells)


def _seam_facing_direction(V: np.ndarray, seams: list[SeamOverlay]) -> np.ndarray:
    """A view direction that looks at the seams from outside: from the part's centre out through
    the seams' centre (falls back to an isometric direction)."""
    if not seams:
        return np.array([1.0, 1.0, 1.0]) / np.sqrt(3)
    centre = V.mean(axis=0)
    target = np.vstack([s.points for s in seams]).mean(axis=0)
    direction = target - centre
    norm = np.linalg.norm(direction)
    return direction / norm if norm > 1e-9 * (np.ptp(V, axis=0).max() + 1e-300) else np.array([1.0, 1.0, 1.0]) / np.sqrt(3)


def render_field(V: np.ndarray, F: np.ndarray, values: np.ndarray, path: str | os.PathLike, *,
                 quantity: str, unit: str, signed: bool, seams: list[SeamOverlay] | None = None,
                 title: str = "", size: tuple[int, int] = (1600, 800)) -> Path:
    """Write a PNG heatmap of a per-vertex field in two views (isometric, and facing the seams),
    with a colour bar titled with the quantity, its unit and the clipping percentiles."""
    pv = _pyvista()
    seams = seams or []
    values = np.asarray(values, dtype=float)
    limits = colour_limits(values, signed)
    surface = _surface(pv, V, F)
    surface.point_data[quantity] = np.where(np.isfinite(values), values, np.nan)
    low, high = PERCENTILES
    clipped = f"{high:g}th pct of abs value" if signed else f"{low:g}th-{high:g}th pct"
    bar_title = f"{quantity} [{unit}]  (limits: {clipped})"
    diagonal = float(np.linalg.norm(np.ptp(V, axis=0)))
    plotter = pv.Plotter(off_screen=True, shape=(1, 2), window_size=size, border=False)
    directions = [np.array([1.0, -1.0, 0.8]) / np.linalg.norm([1.0, -1.0, 0.8]), _seam_facing_direction(V, seams)]
    names = ["isometric view", "view facing the seams" if seams else "opposite view"]
    if not seams:
        directions[1] = -directions[0] * np.array([1, 1, -1])
    for column, (direction, name) in enumerate(zip(directions, names)):
        plotter.subplot(0, column)
        actor = plotter.add_mesh(surface.copy(), scalars=quantity, cmap="RdBu_r" if signed else "viridis",
                         clim=limits, nan_color="#cccccc", show_scalar_bar=False, smooth_shading=True,
                         ambient=0.25, diffuse=0.75, specular=0.1)
        for seam in seams:
            _add_seam_tubes(pv, plotter, seam, 0.004 * diagonal)
        plotter.add_text(name, font_size=10, position="upper_right")
        centre = V.mean(axis=0)
        plotter.camera_position = [tuple(centre + 2.5 * diagonal * direction), tuple(centre), _up_vector(direction)]
        plotter.reset_camera()
        plotter.camera.zoom(1.15)
        if column == 0:
            first_mapper = actor.mapper
    plotter.subplot(0, 0)
    plotter.add_scalar_bar(title=bar_title, n_labels=5, fmt="%.3g", vertical=False, position_x=0.15,
                           position_y=0.04, width=0.7, height=0.07, title_font_size=16, label_font_size=14,
                           mapper=first_mapper)
    if title:
        plotter.add_text(title, font_size=12, position="upper_left")
    if seams:
        legend = [(f"seam: {status}", colour) for status, colour in STATUS_COLOURS.items()]
        plotter.subplot(0, 1)
        plotter.add_legend(legend, bcolor="white", size=(0.3, 0.15), loc="upper left", face="rectangle")
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    temporary = path.with_name(f".{path.stem}.tmp.png")
    plotter.screenshot(str(temporary))
    plotter.close()
    os.replace(temporary, path)
    return path


def _up_vector(direction: np.ndarray) -> tuple[float, float, float]:
    up = np.array([0.0, 0.0, 1.0])
    if abs(float(direction @ up)) > 0.95:
        up = np.array([0.0, 1.0, 0.0])
    return tuple(up)


def _add_seam_tubes(pv, plotter, seam: SeamOverlay, radius: float) -> None:
    """Each run of equal status along the seam as one tube of that status's colour."""
    status = list(seam.status)
    start = 0
    for i in range(1, len(status) + 1):
        if i == len(status) or status[i] != status[start]:
            stop = min(i + 1, len(status))
            points = seam.points[start:stop]
            if len(points) >= 2:
                tube = pv.lines_from_points(points).tube(radius=radius, n_sides=12)
                plotter.add_mesh(tube, color=STATUS_COLOURS.get(status[start], "#000000"))
            start = i
