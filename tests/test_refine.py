"""Splitting long triangles for the stripe pictures (review/refine.py).

Checks by construction: a split triangle keeps its area and its plane; on a cylinder drawn as one
strip of long triangles with its exact (radial) vertex normals, the Phong-interpolated normals
(Phong 1975) are the radial directions of their points (the normalised blend of two radii points
along the chord between their ends, by similar triangles), so the reflection-line parameter on the
split mesh is the one of those normals, which the per-vertex field, linear over a triangle, is not.
"""

from __future__ import annotations

import numpy as np

from surfcheck.geometry.reflection import Lights, reflection_parameter
from surfcheck.review.refine import BUDGET, refine_for_stripes


def _areas(V, F):
    return 0.5 * np.linalg.norm(np.cross(V[F[:, 1]] - V[F[:, 0]], V[F[:, 2]] - V[F[:, 0]]), axis=1)


def _cylinder_strip(radius=4.0, length=30.0, rulings=7, turn=np.pi / 2):
    """A quarter cylinder about z as a strip of triangles the full length long, radial normals."""
    phi = np.linspace(0.0, turn, rulings)
    ring = np.column_stack([radius * np.cos(phi), radius * np.sin(phi)])
    V = np.vstack([np.column_stack([ring, np.zeros(rulings)]), np.column_stack([ring, np.full(rulings, length)])])
    N = np.vstack([np.column_stack([np.cos(phi), np.sin(phi), np.zeros(rulings)])] * 2)
    a, b = np.arange(rulings - 1), np.arange(1, rulings)
    F = np.vstack([np.column_stack([a, b, a + rulings]), np.column_stack([b, b + rulings, a + rulings])])
    return V, F, N, turn / (rulings - 1)


def test_a_split_mesh_keeps_the_area_and_the_planes_of_its_triangles():
    V, F, N, _ = _cylinder_strip()
    split, triangles, normals = refine_for_stripes(V, F, N, target=0.5)
    assert len(triangles) > 50 * len(F)
    assert np.isclose(_areas(split, triangles).sum(), _areas(V, F).sum(), rtol=1e-12)
    np.testing.assert_allclose(np.linalg.norm(normals, axis=1), 1.0, atol=1e-12)
    # every split vertex lies in the plane of a triangle of the strip (here: between two rulings)
    angle = np.arctan2(split[:, 1], split[:, 0])
    assert angle.min() >= -1e-12 and angle.max() <= np.pi / 2 + 1e-12


def test_phong_normals_follow_the_cylinder_and_bend_the_stripes_inside_a_triangle():
    V, F, N, _ = _cylinder_strip()
    split, triangles, normals = refine_for_stripes(V, F, N, target=0.25)
    exact = np.column_stack([split[:, 0], split[:, 1], np.zeros(len(split))])
    exact /= np.linalg.norm(exact, axis=1, keepdims=True)
    assert np.abs(normals - exact).max() <= 1e-12
    lights = Lights(np.array([1.0, 1.0, 0.0]) / np.sqrt(2.0), np.array([10.0, 10.0, 0.0]),
                    np.array([0.0, 0.0, 1.0]), 1.0, np.array([1.0, 1.0, 0.0]) / np.sqrt(2.0), 0.1)
    drawn = reflection_parameter(split, normals, lights)
    truth = reflection_parameter(split, exact, lights)
    per_vertex = reflection_parameter(V, N, lights)  # what a renderer would interpolate linearly
    corner = V[F[3]]  # between the rulings at 45 and 60 deg, facing the light plane
    plane = np.cross(corner[1] - corner[0], corner[2] - corner[0])
    in_plane = np.abs((split - corner[0]) @ plane) <= 1e-9 * np.linalg.norm(plane)
    weights = np.linalg.lstsq(np.column_stack([corner, np.ones(3)]).T, np.column_stack([split, np.ones(len(split))]).T,
                              rcond=None)[0].T  # barycentric weights in the first triangle's plane
    inside = in_plane & (weights >= -1e-9).all(axis=1) & np.isfinite(truth)
    assert inside.sum() > 100
    linear = weights[inside] @ per_vertex[F[3]]
    assert np.abs(drawn[inside] - truth[inside]).max() <= 1e-9
    assert np.abs(linear - truth[inside]).max() > 0.05 * lights.spacing  # a twentieth of a stripe off


def test_the_split_stays_within_its_budget():
    V, F, N, _ = _cylinder_strip(rulings=200)
    split, triangles, _ = refine_for_stripes(V, F, N, target=1e-3)
    assert len(triangles) <= 1.6 * BUDGET
