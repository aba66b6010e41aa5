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
