"""Geometric checks of a blend patch: fold-over and intersection with itself or with the parts.

Fold-over: two triangles sharing an edge whose normals differ by more than 90 degrees; a sampled
smooth surface never does that, so the patch turned back on itself (trimesh's face adjacency angles).
Intersection: triangle pairs that share no vertex and cross; each pair is tested edge against triangle
both ways with the Moller-Trumbore ray-triangle test (Moller and Trumbore, "Fast, minimum storage
ray-triangle intersection", JGT 1997) restricted to the segment, vectorised over the candidate pairs
that a k-d tree of triangle centres yields. Coplanar overlaps are not reported.
"""

from __future__ import annotations

import numpy as np
import trimesh
from scipy.spatial import cKDTree

FOLD_ANGLE = np.pi / 2


def folded_faces(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """Indices of faces on an edge where the two neighbouring normals differ by more than 90 degrees."""
    mesh = trimesh.Trimesh(V, F, process=False, validate=False)
    folded = mesh.face_adjacency[mesh.face_adjacency_angles > FOLD_ANGLE]
    return np.unique(folded)


def crossing_pairs(V: np.ndarray, F: np.ndarray, query: np.ndarray) -> np.ndarray:
    """(k, 2) pairs (query face, other face) of faces that intersect and share no vertex.

    Two triangles can meet only if their centres lie within the sum of their reaches (centre to
    farthest corner), so within twice the larger reach: each candidate pair is found from its larger
    triangle's ball (a fixed-radius search per face; the work follows the local triangle sizes, not the
    largest triangle of the part, so a fine patch beside coarse faces stays cheap), then tested edge
    against triangle.
    """
    corners = V[F]
    centre = corners.mean(axis=1)
    reach = np.linalg.norm(corners - centre[:, None, :], axis=2).max(axis=1)
    rank = np.lexsort((np.arange(len(F)), reach))  # faces by (reach, index): "larger" is later
    order = np.empty(len(F), dtype=np.int64)
    order[rank] = np.arange(len(F))
    query = np.unique(np.asarray(query, dtype=np.int64))
    is_query = np.zeros(len(F), dtype=bool)
    is_query[query] = True
    box = (centre[query].min(axis=0) - 2.0 * reach.max(), centre[query].max(axis=0) + 2.0 * reach.max())
    around = np.flatnonzero(~is_query & np.all((centre >= box[0]) & (centre <= box[1]), axis=1))
    found = [
        _smaller_within(query, np.arange(len(F)), centre, reach, order),  # the query face is the larger
        _smaller_within(around, query, centre, reach, order)[:, ::-1],  # another face is the larger
    ]
    first, second = np.concatenate(found).T
    shares = (F[first][:, :, None] == F[second][:, None, :]).any(axis=(1, 2))
    close = np.linalg.norm(centre[first] - centre[second], axis=1) <= reach[first] + reach[second]
    first, second = first[~shares & close], second[~shares & close]
    hit = _edges_cross(corners[first], corners[second]) | _edges_cross(corners[second], corners[first])
    return np.stack([first[hit], second[hit]], axis=1)


def _smaller_within(larger: np.ndarray, among: np.ndarray, centre: np.ndarray, reach: np.ndarray,
                    order: np.ndarray) -> np.ndarray:
    """(k, 2) pairs (i, j): i of ``larger``, j of ``among`` ranked below i, centres within 2 reach[i]."""
    if len(larger) == 0 or len(among) == 0:
        return np.empty((0, 2), dtype=np.int64)
    balls = cKDTree(centre[among]).query_ball_point(centre[larger], 2.0 * reach[larger], return_sorted=False)
    sizes = np.fromiter((len(b) for b in balls), dtype=np.int64, count=len(balls))
    i = np.repeat(larger, sizes)
    j = among[np.fromiter((k for b in balls for k in b), dtype=np.int64, count=int(sizes.sum()))]
    below = order[j] < order[i]
    return np.stack([i[below], j[below]], axis=1)


def _edges_cross(edge_tris: np.ndarray, tris: np.ndarray) -> np.ndarray:
    """Whether any edge of each triangle in ``edge_tris`` pierces the matching triangle in ``tris``."""
    a, b, c = tris[:, 0], tris[:, 1], tris[:, 2]
    e1, e2 = b - a, c - a
    scale = np.maximum(np.linalg.norm(e1, axis=1), np.linalg.norm(e2, axis=1))
    crossed = np.zeros(len(tris), dtype=bool)
    for k in range(3):
        origin = edge_tris[:, k]
        direction = edge_tris[:, (k + 1) % 3] - origin
        h = np.cross(direction, e2)
        det = np.sum(e1 * h, axis=1)
        ok = np.abs(det) > 1e-12 * scale**2 * np.linalg.norm(direction, axis=1)
        inv = np.where(ok, 1.0 / np.where(ok, det, 1.0), 0.0)
        s = origin - a
        u = inv * np.sum(s * h, axis=1)
        q = np.cross(s, e1)
        v = inv * np.sum(direction * q, axis=1)
        t = inv * np.sum(e2 * q, axis=1)
        crossed |= ok & (u >= 0) & (v >= 0) & (u + v <= 1) & (t >= 0) & (t <= 1)
    return crossed
