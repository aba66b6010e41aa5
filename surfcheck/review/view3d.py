"""An interactive 3D view of a part for the review folder: one self-contained HTML file that a browser
turns with the mouse, with no server and no network.

The scene (the part coloured by a field, the seams as tubes in their result colours) is built with
PyVista, serialised into vtk.js's scene format by trame-vtk's serialisers, and embedded in
trame-vtk's offline viewer page (vtk.js and the scene inline, base64). The viewer's only outside
reference, a favicon address it would add at run time, is replaced by an empty data address so that
the page asks nothing of the network.
"""

from __future__ import annotations

import io
import json
import os
import zipfile
from pathlib import Path

import numpy as np

from surfcheck.io import write_atomic
from surfcheck.review.render import (NO_VALUE_COLOUR, STATUS_COLOURS, SeamOverlay, View, frame_view, offscreen_pyvista,
                                     status_runs, surface_mesh)

TUBE_SHARE = 0.004  # seam tube radius: this share of the part's bounding-box diagonal
_FAVICON = "https://kitware.github.io/vtk-js/icon/favicon-${t}x${t}.png"


def available() -> bool:
    """Whether trame-vtk (the offline viewer and the serialisers) is installed."""
    try:
        import trame_vtk.tools.vtksz2html  # noqa: F401
    except ImportError:
        return False
    return True


def field_colours(values: np.ndarray, limits: tuple[float, float], cmap: str) -> np.ndarray:
    """(n, 3) uint8 colours of the values in ``cmap`` over ``limits`` (clipped); NO_VALUE_COLOUR for NaN."""
    import matplotlib
    from matplotlib.colors import to_rgb

    low, high = limits
    scaled = np.clip((np.asarray(values, float) - low) / max(high - low, 1e-300), 0.0, 1.0)
    rgb = matplotlib.colormaps[cmap](np.nan_to_num(scaled))[:, :3]
    rgb[~np.isfinite(values)] = to_rgb(NO_VALUE_COLOUR)
    return np.round(rgb * 255.0).astype(np.uint8)


def write_view(V: np.ndarray, F: np.ndarray, values: np.ndarray, path: str | os.PathLike, *,
               limits: tuple[float, float], seams: list[SeamOverlay], view: View, cmap: str = "viridis") -> Path:
    """Write the interactive view of a part coloured by ``values`` to ``path`` (HTML).

    Parameters
    ----------
    V, F : arrays
        The part's vertices (n, 3) and triangles (m, 3).
    values : (n,) float
        The field; NaN draws NO_VALUE_COLOUR.
    path : path-like
        The HTML file (written atomically).
    limits : (float, float)
        The colour limits of the field.
    seams : list of SeamOverlay
        Seams drawn as tubes in their per-point result colours.
    view : View
        The starting camera (render.overview_views gives one).
    cmap : str
        A matplotlib colour map name.

    Returns
    -------
    Path
        ``path``.
    """
    from trame_vtk.modules.vtk.serializers import (SynchronizationContext, extract_array_hash,
                                                   initialize_serializers, reference_id, serialize)
    from trame_vtk.tools.vtksz2html import write_html

    pv = offscreen_pyvista()
    V = np.asarray(V, dtype=float)
    surface = surface_mesh(pv, V, F)
    surface.point_data["colour"] = field_colours(values, limits, cmap)
    plotter = pv.Plotter(off_screen=True, window_size=[1000, 700])
    plotter.set_background("white")
    plotter.add_mesh(surface, scalars="colour", rgb=True, smooth_shading=True)
    radius = TUBE_SHARE * float(np.linalg.norm(np.ptp(V, axis=0)))
    for seam in seams:
        _add_tubes(pv, plotter, seam, radius)
    position, _ = frame_view(view, V, 1000 / 700)
    plotter.camera_position = position
    plotter.reset_camera_clipping_range()
    plotter.render()
    initialize_serializers()
    context = SynchronizationContext()
    window = plotter.render_window
    camera = window.GetRenderers().GetFirstRenderer().GetActiveCamera()
    scene = serialize(None, window, reference_id(window), context, 1)
    scene["extra"] = {"vtkRefId": reference_id(window), "centerOfRotation": camera.GetFocalPoint(),
                      "camera": reference_id(camera)}
    hashes = {entry["hash"]: dict(**entry, content=context.get_cached_data_array(entry["hash"], False))
              for entry in extract_array_hash(scene)}
    plotter.close()
    archive = io.BytesIO()
    with zipfile.ZipFile(archive, "a") as zipped:
        zipped.writestr("index.json", json.dumps({"hashes": hashes, "scene": scene}),
                        compress_type=zipfile.ZIP_DEFLATED)
    page = io.StringIO()
    write_html(archive.getvalue(), page)
    path = Path(path)
    write_atomic(path, page.getvalue().replace(_FAVICON, "data:,").encode("utf-8"))
    return path


def _add_tubes(pv, plotter, seam: SeamOverlay, radius: float) -> None:
    """Each run of equal status along the seam as one tube of that status's colour."""
    for points, state in status_runs(seam):
        plotter.add_mesh(pv.lines_from_points(points).tube(radius=radius, n_sides=12),
                         color=STATUS_COLOURS.get(state, "#000000"))
