"""What a station touches: the vertices, faces and edges of a part near a few given vertices, found
through the part's cached incidence (vertex to faces) and its vertex KD-tree, never by a pass over the
whole part, so that a station costs the same on a part of a thousand triangles or of ten million. (Only
a sparse CAD side, read from its triangles, looks once per seam at its group's faces: FacesNear.)"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from surfcheck.part import Part


def faces_around(part: Part, vertices: np.ndarray) -> np.ndarray:
    """Sorted indices of the faces that have a corner among ``vertices``."""
    return np.unique(part.faces_at(vertices)[1])


def vertices_near(part: Part, point: np.ndarray, radius: float) -> np.ndarray:
    """Sorted indices of the vertices within ``radius`` of ``point``."""
    return np.sort(np.asarray(part.vertex_tree.query_ball_point(point, radius), dtype=np.int64))


def _face_edges(part: Part, faces: np.ndarray) -> np.ndarray:
    """(3 len(faces),) the faces' edges as keys low * n + high (n vertices), face-major order."""
    corners = part.faces[faces]
    ends = np.sort(np.stack([corners, np.roll(corners, -1, axis=1)], axis=2).reshape(-1, 2), axis=1)
    return ends[:, 0] * part.n_vertices + ends[:, 1]


def _edges_of(part: Part, keys: np.ndarray) -> np.ndarray:
    return np.stack(np.divmod(keys, part.n_vertices), axis=1)


def _touches(part: Part, keys: np.ndarray, vertices: np.ndarray) -> np.ndarray:
    low, high = np.divmod(keys, part.n_vertices)
    return np.isin(low, vertices) | np.isin(high, vertices)


def edges_touching(part: Part, vertices: np.ndarray) -> np.ndarray:
    """(k, 2) the unique edges (low, high) of the mesh with an end among ``vertices``, in the order of
    part.edges."""
    keys = np.unique(_face_edges(part, faces_around(part, vertices)))
    return _edges_of(part, keys[_touches(part, keys, vertices)])


def half_edges_among(part: Part, vertices: np.ndarray) -> sp.csr_matrix:
    """(k, k) the half edges of the mesh between the sorted ``vertices`` (k of them), each once
    however many faces share it: entry (i, j) where a face runs from vertex i to vertex j. Every
    edge between two of them is there in one direction at least (undirected, it is the induced
    subgraph of the mesh's edges)."""
    owner, faces = part.faces_at(vertices)
    corners = part.faces[faces]
    at = np.argmax(corners == vertices[owner][:, None], axis=1)
    following = corners[np.arange(len(faces)), (at + 1) % 3]
    column = np.minimum(np.searchsorted(vertices, following), len(vertices) - 1)
    keep = vertices[column] == following
    graph = sp.csr_matrix((np.ones(int(keep.sum())), (owner[keep], column[keep])), shape=(len(vertices),) * 2)
    graph.sum_duplicates()
    return graph


def group_border(part: Part, vertices: np.ndarray, group: int) -> np.ndarray:
    """(k, 2) the edges with an end among ``vertices`` on the border of the group (index ``group``):
    used by one face of the group and no other of it (a mesh boundary) or by faces of the group and of
    another group. Every face of such an edge has a corner among ``vertices``, so the counts are whole."""
    faces = faces_around(part, vertices)
    keys = _face_edges(part, faces)
    touching = _touches(part, keys, vertices)
    of_group = np.repeat(part.face_group[faces] == group, 3)[touching]
    edges, which = np.unique(keys[touching], return_inverse=True)
    count_in = np.bincount(which, weights=of_group, minlength=len(edges))
    count_all = np.bincount(which, minlength=len(edges))
    return _edges_of(part, edges[(count_in >= 1) & ((count_in == 1) | (count_all > count_in))])


class FacesNear:
    """The faces of one group near a seam (bounding boxes within ``margin`` of the seam's box, found on
    first need, once per seam), and of those the ones whose box meets a ball: a station's cut reads only
    these (a CAD face's long triangles reach stations none of their corners is near, so the test is on
    the triangles' boxes, not their corners)."""

    def __init__(self, part: Part, group: int, seam_points: np.ndarray, margin: float) -> None:
        self.part, self.group = part, group
        self.seam_points, self.margin = seam_points, margin
        self._boxes = None

    def _load(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        if self._boxes is None:
            lo_seam = self.seam_points.min(axis=0) - self.margin
            hi_seam = self.seam_points.max(axis=0) + self.margin
            faces = np.flatnonzero(self.part.face_group == self.group)
            corners = self.part.vertices[self.part.faces[faces]]
            lo, hi = corners.min(axis=1), corners.max(axis=1)
            keep = (lo <= hi_seam).all(axis=1) & (hi >= lo_seam).all(axis=1)
            self._boxes = (faces[keep], lo[keep], hi[keep])
        return self._boxes

    def within(self, point: np.ndarray, radius: float) -> np.ndarray:
        """Sorted indices of the group's faces whose bounding box meets the ball of ``radius`` about
        ``point`` (radius at most the margin given)."""
        faces, lo, hi = self._load()
        gap = np.maximum(np.maximum(lo - point, point - hi), 0.0)
        return faces[np.einsum("ij,ij->i", gap, gap) <= radius * radius]
