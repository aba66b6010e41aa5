"""Pictures render headless, are not blank, carry their colour bar, and show the curvature jump where the
blend has one: along both tangent lines of a circular fillet, nowhere on a smooth-step blend."""

from __future__ import annotations

import matplotlib
import numpy as np
import pytest
from PIL import Image
from scipy.spatial import cKDTree

from surfcheck.geometry.fields import vertex_field
from surfcheck.review.folder import without_boundary_band
from surfcheck.review.render import SeamOverlay, overview_views, render_field, seam_views
from surfcheck.seams import SeamIndex
from tests.fixtures.blend_parts import DEPTH, EDGE, R, blend_mesh, blend_part


def pixels(path) -> np.ndarray:
    return np.asarray(Image.open(path).convert("RGB")).astype(float)


def colour_bar_rows(image: np.ndarray, cmap: str, tolerance: float = 10.0) -> list[int]:
    """Rows of the image that hold the colour map as a left-to-right gradient: more than a third of the
    row's pixels match an entry of matplotlib's table of the map (the reference), and the matched
    entries rise along the row from the map's bottom end to its top end."""
    table = matplotlib.colormaps[cmap](np.linspace(0.0, 1.0, 256))[:, :3] * 255.0
    distance, entries = cKDTree(table).query(image.reshape(-1, 3))
    distance, entries = distance.reshape(image.shape[:2]), entries.reshape(image.shape[:2])
    found = []
    for r in range(image.shape[0]):
        entry, close = entries[r], distance[r] < tolerance
        if close.sum() < image.shape[1] / 3:
            continue
        levels = entry[close]
        rising = np.mean(np.diff(levels) >= 0)
        if rising > 0.97 and levels[:20].mean() < 20 and levels[-20:].mean() > 235:
            found.append(r)
    return found


@pytest.fixture(scope="module")
def fillet():
    return blend_part("fillet")


@pytest.fixture(scope="module")
def pictures(tmp_path_factory, fillet):
    """The jump field of both blends, drawn with the same colour limits 0 .. 1/R, and the fillet's mean
    curvature (a signed field) with a seam drawn over it."""
    out = tmp_path_factory.mktemp("pictures")
    paths = {}
    for kind in ("fillet", "smooth-step"):
        part = blend_part(kind)
        field = without_boundary_band(part, vertex_field(part, "jump"))  # as the review draws it
        paths[kind] = render_field(part.vertices, part.faces, field.values, out / f"{kind}-jump.png",
                                   quantity="jump", unit=field.unit, signed=False, limits=(0.0, 1.0 / R),
                                   views=overview_views(part.vertices, part.faces), title=kind)
    seam = SeamIndex(fillet).find("a:blend")[0]
    status = tuple("fail" if i % 2 else "ok" for i in range(len(seam.points)))
    overlay = SeamOverlay(seam.points, status, seam.id)
    mean = vertex_field(fillet, "mean")
    views = seam_views(fillet.vertices, fillet.faces, seam.points, seam.points[len(seam.points) // 2], 3.0, seam.id)
    paths["seam"] = render_field(fillet.vertices, fillet.faces, mean.values, out / "seam-mean.png", quantity="mean",
                                 unit=mean.unit, signed=True, seams=[overlay], views=views)
    return paths


def test_pictures_are_not_blank(pictures):
    for path in pictures.values():
        image = pixels(path)
        assert image.shape == (800, 1600, 3)
        assert image.std() > 20.0  # an empty or one-colour picture has none; common practice, no published source
        packed = (image[..., 0] * 65536 + image[..., 1] * 256 + image[..., 2]).astype(np.int64)
        assert len(np.unique(packed)) > 500  # shading and a colour map, not a flat fill


@pytest.mark.parametrize("name, cmap", [("fillet", "viridis"), ("seam", "RdBu_r")])
def test_colour_bar_is_drawn_below_the_views(pictures, name, cmap):
    image = pixels(pictures[name])
    rows = colour_bar_rows(image, cmap)
    assert len(rows) >= 10  # the bar is 30 px high; the colour table is matplotlib's (reference library)
    assert min(rows) > 0.75 * image.shape[0]  # below the views, not a part of the surface


def test_seam_is_drawn_in_both_views(pictures):
    image = pixels(pictures["seam"])
    fail = np.array([0xD7, 0x26, 0x3D], dtype=float)  # the tube colour of a failing station
    ok = np.array([0x1F, 0x9E, 0x89], dtype=float)
    half = image.shape[1] // 2
    for panel in (image[:650, :half], image[:650, half:]):
        for colour in (fail, ok):
            assert (np.linalg.norm(panel - colour, axis=2) < 12).sum() > 30  # tube pixels (drawn unlit, in their own colour)


def test_ok_tube_is_outlined_so_a_mid_range_field_cannot_hide_it(pictures):
    # the ok colour is a mid value of viridis; beside every ok tube pixel, within the outline's width,
    # lies a pixel of the dark outline (render.OUTLINE_COLOUR), on both sides of the tube
    image = pixels(pictures["seam"])[:650]
    ok = np.linalg.norm(image - np.array([0x1F, 0x9E, 0x89], float), axis=2) < 12
    dark = np.linalg.norm(image - np.array([0x11, 0x11, 0x11], float), axis=2) < 60
    rows, cols = np.nonzero(ok)
    outlined = [dark[r, max(c - 6, 0):c].any() and dark[r, c + 1:c + 7].any()
                or dark[max(r - 6, 0):r, c].any() and dark[r + 1:r + 7, c].any() for r, c in zip(rows, cols)]
    assert len(outlined) > 60 and np.mean(outlined) > 0.9


def test_jump_field_peaks_on_the_fillet_tangent_lines_and_not_on_the_smooth_step():
    """The curvature of a circle of radius R is 1/R and of a plane 0 (a handbook fact), so across the
    fillet's tangent lines the curvature jumps by 1/R; a smooth-step blend's curvature is continuous
    (C-infinity steps), so one-sided estimates there differ only by the curvature's slope over the fit."""
    peaks = {}
    for kind in ("fillet", "smooth-step"):
        mesh = blend_mesh(kind)
        part = blend_part(kind)
        jump = vertex_field(part, "jump").values
        z = part.vertices[:, 2]
        inland = (z > 1.5) & (z < DEPTH - 1.5)  # away from the open ends of the extrusion
        on_seam = np.zeros(part.n_vertices, dtype=bool)
        for seam in mesh.seams:
            on_seam[seam.vertices_a] = True
        near = np.zeros(part.n_vertices, dtype=bool)
        for seam in mesh.seams:
            d = np.linalg.norm(part.vertices[:, None, :2] - part.vertices[seam.vertices_a][None, :1, :2], axis=2)
            near |= d[:, 0] < 4.0 * EDGE
        elsewhere = inland & ~near
        peaks[kind] = (np.median(jump[on_seam & inland]), np.nanmedian(jump[elsewhere]), np.nanmax(jump[inland]))
    tangent, median_elsewhere, _ = peaks["fillet"]
    assert tangent > 0.7 / R  # the jump is 1/R; a fit over a neighbourhood may round it off somewhat
    assert tangent > 10.0 * median_elsewhere + 0.1 / R  # a peak, well above the rest of the part
    at_seams, _, largest = peaks["smooth-step"]
    assert at_seams < 0.1 / R  # no jump where the steps meet the planes (curvature 0 on both sides)
    assert largest < 0.25 * tangent  # nowhere near the fillet's peak


def test_pictures_show_the_jump_on_the_fillet_only(pictures):
    """Drawn with the same limits 0 .. 1/R, the fillet's jump reaches the bright top of the colour map
    (viridis: yellow) along its tangent lines; the smooth-step blend's stays dark."""
    def bright(path):
        image = pixels(path)[:650]  # the views, above the colour bar
        r, g, b = image[..., 0], image[..., 1], image[..., 2]
        return int(((r > 140) & (g > 130) & (b < 0.45 * g)).sum())  # yellow, lit or half in shade

    assert bright(pictures["fillet"]) > 200
    assert bright(pictures["smooth-step"]) < 20
