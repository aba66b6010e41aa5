"""RawMesh: what a format parser returns before the Part is assembled."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import trimesh


@dataclass
class RawMesh:
    """Vertices (n, 3), triangles (m, 3), the group of each triangle and the group names, as read."""

    vertices: np.ndarray
    faces: np.ndarray
    face_group: np.ndarray
    group_names: list[str]


def single_group(mesh) -> RawMesh:
    if not isinstance(mesh, trimesh.Trimesh):
        mesh = mesh.to_geometry() if hasattr(mesh, "to_geometry") else mesh.dump(concatenate=True)
    F = np.asarray(mesh.faces, dtype=np.int64)
    return RawMesh(np.asarray(mesh.vertices), F, np.zeros(len(F), dtype=np.int64), ["part"])
