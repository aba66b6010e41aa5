"""A side's section read from its triangles (grading/surface_cut.py), checked against elementary
geometry: a plane cut by a plane is a straight line, so the polyline read from a planar mesh has no
chordal deflection wherever the cut passes, through its vertices included."""

from __future__ import annotations

import numpy as np
from scipy.spatial.transform import Rotation

from surfcheck.grading.surface_cut import cut_side
from surfcheck.part import Part


def _posed_plane_grid(rotation: Rotation) -> Part:
    """A plane of 4 x 4 cells of 2 mm, each cell split along a random diagonal, posed by ``rotation``."""
    rng = np.random.default_rng(5)
    x, y = np.meshgrid(np.arange(5) * 2.0, np.arange(5) * 2.0 - 4.0, indexing="ij")
    V = rotation.apply(np.stack([x.ravel(), y.ravel(), np.zeros(25)], axis=1)) + [31.7, -12.2, 48.9]
    faces = []
    for i in range(4):
        for j in range(4):
            a, b, c, d = 5 * i + j, 5 * (i + 1) + j, 5 * (i + 1) + j + 1, 5 * i + j + 1
            faces += [[a, b, c], [a, c, d]] if rng.random() < 0.5 else [[a, b, d], [b, c, d]]
    F = np.array(faces)
    return Part(V, F, np.zeros(len(F), dtype=np.int64), ("plane",), "mm", "plane.obj")


def test_a_cut_through_a_planes_vertices_has_no_chordal_deflection():
    # The section plane y = 0 holds a row of the grid's vertices; posed at random, rounding puts each
    # of them just above or below it, and the triangles meeting there leave cut segments of ~1e-13 mm.
    # Their directions are rounding, not turns of the section (a plane's cut is a straight line), so
    # the deflection and the floor of the points' spread stay at rounding level (1e-7 mm; NaN or 0.04
    # to 0.9 mm before, read from a sliver's direction).
    for seed in range(8):
        rotation = Rotation.random(random_state=seed)
        part = _posed_plane_grid(rotation)
        origin = rotation.apply([4.0, 0.0, 0.0]) + [31.7, -12.2, 48.9]
        cut = cut_side(part, np.arange(len(part.faces)), origin, rotation.apply([0.0, 1.0, 0.0]), 20.0)
        assert cut is not None
        assert cut.deflection <= 1e-7 and cut.floor <= 1e-7, (seed, cut.deflection)


def test_few_nodes_on_an_arc_state_the_end_headings_interpolation_error():
    # A fillet band of four intervals over 30 degrees of a circle of radius 3.29 mm (a coarse regular
    # mesh carries its rows onto five section points): too few nodes for Richardson's estimate. The
    # true end tangent is the circle's, perpendicular to its radius at the seam point (elementary
    # geometry); the stated heading uncertainty must cover the spline's end-tangent error at k = 2
    # (it was 0 before, the error 0.022 degrees).
    from scipy.interpolate import CubicSpline

    from surfcheck.grading.surface_cut import spline_through

    radius, axis = 3.29, np.array([0.0, 0.0, 1.0])
    angles = np.radians(np.linspace(0.0, 30.0, 5))
    rel = np.stack([radius * np.sin(angles), radius * (1.0 - np.cos(angles)), np.zeros(5)], axis=1)
    cut = spline_through(np.arange(5), rel, 1e-6, axis)
    assert cut is not None
    chord = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(rel, axis=0), axis=1))])
    end = CubicSpline(chord, rel, axis=0, bc_type="not-a-knot")(0.0, 1)
    error = abs(np.arctan2(end[1], end[0]))  # the circle's tangent at the seam point is +x
    assert error > 1e-4  # radians: the interpolation error this checks is there
    assert error <= 2.0 * cut.end_floor[1], (error, cut.end_floor[1])
