"""RawMesh: what a format parser returns before the Part is assembled."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class RawMesh:
    """Vertices (n, 3), triangles (m, 3), the group of each triangle and the group names, as read."""

    vertices: np.ndarray
    faces: np.ndarray
    face_group: np.ndarray
    group_names: list[str]


def single_group(corners: np.ndarray, faces: np.ndarray | None = None) -> RawMesh:
    """A mesh in one group "part"; without ``faces``, ``corners`` holds three rows per triangle."""
    if faces is None:
        faces = np.arange(len(corners), dtype=np.int64).reshape(-1, 3)
    return RawMesh(corners, faces, np.zeros(len(faces), dtype=np.int64), ["part"])


def fan_triangles(sizes: np.ndarray, corners: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Polygons as triangle fans: polygon p (its ``sizes[p]`` corners, consecutive in ``corners``)
    becomes (c0, c1, c2), (c0, c2, c3), ...; returns the (t, 3) triangles and each one's polygon."""
    sizes = np.asarray(sizes, dtype=np.int64)
    first = np.cumsum(sizes) - sizes
    per_polygon = sizes - 2
    polygon = np.repeat(np.arange(len(sizes)), per_polygon)
    step = np.arange(len(polygon)) - np.repeat(np.cumsum(per_polygon) - per_polygon, per_polygon) + 1
    start = first[polygon]
    triangles = np.stack([corners[start], corners[start + step], corners[start + step + 1]], axis=1)
    return triangles, polygon
