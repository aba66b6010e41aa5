"""Splitting long triangles for the stripe pictures, so a reflection line or an isophote curves across
a triangle as it does on the surface.

A stripe field is a non-linear function of the normal. Drawn from per-vertex values, a renderer
interpolates the field linearly over each triangle, so on a CAD export's long triangles (a fillet as
one strip, a plane as a few slivers) every stripe turns into a straight segment with a corner at
each edge. Interpolating the normals instead (Phong 1975, "Illumination for computer generated
pictures", CACM 18(6)) and evaluating the field at points a fraction of a stripe apart draws the
stripes the surface's normals give. Each triangle is split into n^2 similar ones (n per triangle,
from its longest edge), positions and normals linear in the barycentric coordinates, normals then
made unit. Neighbours split differently meet at T-junctions, which lie on the shared straight edge
and leave no crack.
"""

from __future__ import annotations

import numpy as np

MAX_SPLIT = 48  # at most this many parts per edge of one triangle
BUDGET = 400_000  # at most about this many triangles in all: a picture, not a model; no published source


def _splits(longest: np.ndarray, target: float) -> np.ndarray:
    """Parts per edge of each triangle for sub-edges near ``target``, shrunk to keep within BUDGET."""
    n = np.clip(np.ceil(longest / target), 1, MAX_SPLIT).astype(np.int64)
    while (n ** 2).sum() > BUDGET and n.max() > 1:
        n = np.maximum(1, np.ceil(n / 1.25).astype(np.int64))
    return n


def _pattern(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Barycentric weights (p, 3) of the points of a triangle split n times per edge, and its n^2
    sub-triangles (indices into them), wound like the triangle."""
    i, j = np.meshgrid(np.arange(n + 1), np.arange(n + 1), indexing="ij")
    keep = i + j <= n
    i, j = i[keep], j[keep]
    weights = np.column_stack([n - i - j, i, j]) / n
    index = -np.ones((n + 1, n + 1), dtype=np.int64)
    index[i, j] = np.arange(len(i))
    up = [(index[a, b], index[a + 1, b], index[a, b + 1]) for a in range(n) for b in range(n - a)]
    down = [(index[a + 1, b], index[a + 1, b + 1], index[a, b + 1]) for a in range(n) for b in range(n - a - 1)]
    return weights, np.array(up + down, dtype=np.int64).reshape(-1, 3)


def refine_for_stripes(V: np.ndarray, F: np.ndarray, normals: np.ndarray, target: float):
    """Split the triangles longer than ``target`` for a stripe picture.

    Parameters
    ----------
    V : (n, 3) float
        Vertices.
    F : (m, 3) int
        Triangles.
    normals : (n, 3) float
        Unit vertex normals (NaN rows allowed: they stay NaN where they weigh in).
    target : float
        The wanted longest sub-edge, part units (a fraction of the stripe spacing).

    Returns
    -------
    tuple of (p, 3) float, (q, 3) int, (p, 3) float
        The split mesh's vertices, triangles and unit normals (Phong-interpolated). Triangles short
        enough stay as they are; shared vertices of split triangles are not merged.
    """
    V, F, normals = np.asarray(V, float), np.asarray(F, np.int64), np.asarray(normals, float)
    P = V[F]
    longest = np.linalg.norm(P - np.roll(P, 1, axis=1), axis=2).max(axis=1)
    n = _splits(longest, target)
    vertices, faces, unit = [V], [F[n == 1]], [normals]
    base = len(V)
    for parts in np.unique(n[n > 1]):
        chosen = F[n == parts]
        weights, triangles = _pattern(int(parts))
        points = np.einsum("pk,tkd->tpd", weights, V[chosen]).reshape(-1, 3)
        blended = np.einsum("pk,tkd->tpd", weights, normals[chosen]).reshape(-1, 3)
        blended /= np.linalg.norm(blended, axis=1, keepdims=True)
        offsets = base + len(weights) * np.arange(len(chosen))
        faces.append((offsets[:, None, None] + triangles[None]).reshape(-1, 3))
        vertices.append(points)
        unit.append(blended)
        base += len(points)
    return np.concatenate(vertices), np.concatenate(faces), np.concatenate(unit)
