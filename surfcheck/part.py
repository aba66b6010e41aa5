"""Part: a triangle mesh with face groups, its units and its source, plus cached adjacency."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.sparse as sp

from surfcheck.errors import InputError

CHUNK = 1 << 20  # rows of a per-edge computation held at once


def check_mesh_arrays(V: np.ndarray, F: np.ndarray, where: str) -> None:
    """InputError unless V is (n, 3) finite, F is (m, 3) indexing V, and neither is empty."""
    if V.ndim != 2 or V.shape[1] != 3 or F.ndim != 2 or F.shape[1] != 3:
        raise InputError(f"{where}: vertices must be (n, 3) and faces (m, 3)")
    if len(V) == 0 or len(F) == 0:
        raise InputError(f"{where}: the mesh is empty (no vertices or no triangles)")
    if not np.isfinite(V).all():
        bad = int((~np.isfinite(V).all(axis=1)).sum())
        raise InputError(f"{where}: {bad} vertices have NaN or infinite coordinates; repair the export")
    if F.min() < 0 or F.max() >= len(V):
        raise InputError(f"{where}: a triangle refers to a vertex that does not exist")


def half_edges(F: np.ndarray) -> np.ndarray:
    """(3m, 2) directed edges (F[:,0]->F[:,1], F[:,1]->F[:,2], F[:,2]->F[:,0]), face-major order."""
    return np.stack([F, np.roll(F, -1, axis=1)], axis=2).reshape(-1, 2)


def median_edge_length(V: np.ndarray, F: np.ndarray) -> float:
    """The median length of the triangles' nonzero edges (each counted once per triangle); 0 if none.
    It follows the typical triangle: a stray far vertex moves it no more than any other one edge."""
    ends = half_edges(F)
    lengths = np.linalg.norm(V[ends[:, 1]] - V[ends[:, 0]], axis=1)
    lengths = lengths[lengths > 0]
    return float(np.median(lengths)) if len(lengths) else 0.0


def edge_table(F: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The edges of the triangles F over n vertices: (e, 2) unique undirected edges as (low, high)
    vertex index, (3m,) the edge of each of the half_edges, and (e,) how many faces use each edge (1 on
    a boundary, 2 inside, more where non-manifold)."""
    keys = np.empty((len(F), 3), dtype=np.int64)  # low * n + high of each half edge, one corner at a time
    for corner in range(3):
        a, b = F[:, corner], F[:, (corner + 1) % 3]
        np.add(np.minimum(a, b) * n, np.maximum(a, b), out=keys[:, corner])
    keys = keys.reshape(-1)
    order = np.argsort(keys, kind="stable")
    ordered = keys[order]
    del keys
    first = np.empty(len(ordered), dtype=bool)  # where a new edge starts in key order
    first[:1] = True
    np.not_equal(ordered[1:], ordered[:-1], out=first[1:])
    edges = np.stack(np.divmod(ordered[first], n), axis=1)
    del ordered
    inverse = np.empty(len(order), dtype=np.int64)
    inverse[order] = np.cumsum(first) - 1
    return edges, inverse, np.bincount(inverse, minlength=len(edges))


@dataclass(frozen=True, eq=False)
class Part:
    """A triangle mesh: vertices (n,3) float64, faces (m,3) int64, face_group (m,) int64.

    ``group_names[g]`` names group ``g``. Lengths are in ``units``; ``source`` names the file it came
    from. Adjacency is computed once, on first use.
    """

    vertices: np.ndarray
    faces: np.ndarray
    face_group: np.ndarray
    group_names: tuple[str, ...]
    units: str = "mm"
    source: str = ""

    def __post_init__(self) -> None:
        V = np.ascontiguousarray(self.vertices, dtype=np.float64)
        F = np.ascontiguousarray(self.faces, dtype=np.int64)
        G = np.ascontiguousarray(self.face_group, dtype=np.int64)
        where = self.source or "mesh"
        check_mesh_arrays(V, F, where)
        if G.shape != (len(F),):
            raise InputError(f"{where}: face_group must hold one group per triangle")
        if len(G) and (G.min() < 0 or G.max() >= len(self.group_names)):
            raise InputError(f"{where}: a face group has no name")
        for name, value in (("vertices", V), ("faces", F), ("face_group", G)):
            value.setflags(write=False)
            object.__setattr__(self, name, value)
        object.__setattr__(self, "group_names", tuple(self.group_names))

    @property
    def n_vertices(self) -> int:
        return len(self.vertices)

    @property
    def n_faces(self) -> int:
        return len(self.faces)

    def group_index(self, name: str) -> int:
        """The index of the group called ``name``; InputError naming the known groups otherwise."""
        try:
            return self.group_names.index(name)
        except ValueError:
            known = ", ".join(self.group_names) or "none"
            raise InputError(f"{self.source or 'part'}: no group named {name!r} (groups: {known})") from None

    @cached_property
    def face_areas(self) -> np.ndarray:
        """Area of each triangle."""
        a, b, c = (self.vertices[self.faces[:, i]] for i in range(3))
        return 0.5 * np.linalg.norm(np.cross(b - a, c - a), axis=1)

    def group_areas(self, faces: np.ndarray | None = None) -> np.ndarray:
        """(groups,) area of the triangles ``faces`` (a boolean mask; None: all) in each group."""
        chosen = np.ones(self.n_faces, dtype=bool) if faces is None else faces
        return np.bincount(self.face_group[chosen], weights=self.face_areas[chosen], minlength=len(self.group_names))

    @cached_property
    def half_edges(self) -> np.ndarray:
        """(3m, 2) directed edges (F[:,0]->F[:,1], F[:,1]->F[:,2], F[:,2]->F[:,0]), face-major order."""
        return half_edges(self.faces)

    @cached_property
    def _edge_table(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        return edge_table(self.faces, self.n_vertices)

    @property
    def edges(self) -> np.ndarray:
        """(e, 2) unique undirected edges, each as (low, high) vertex index."""
        return self._edge_table[0]

    @property
    def half_edge_edge(self) -> np.ndarray:
        """(3m,) the undirected edge index of each half edge."""
        return self._edge_table[1]

    @cached_property
    def edge_faces(self) -> sp.csr_matrix:
        """(e, m) sparse incidence: edge i lies on face j."""
        m = self.n_faces
        faces_of_half = np.repeat(np.arange(m), 3)
        data = np.ones(3 * m, dtype=np.int8)
        return sp.csr_matrix((data, (self.half_edge_edge, faces_of_half)), shape=(len(self.edges), m))

    @property
    def edge_face_count(self) -> np.ndarray:
        """(e,) how many faces use each edge: 1 on a boundary, 2 inside, more where non-manifold."""
        return self._edge_table[2]

    @cached_property
    def vertex_faces(self) -> sp.csr_matrix:
        """(n, m) sparse incidence: vertex i is a corner of face j."""
        m = self.n_faces
        data = np.ones(3 * m, dtype=np.int8)
        return sp.csr_matrix(
            (data, (self.faces.reshape(-1), np.repeat(np.arange(m), 3))), shape=(self.n_vertices, m)
        )

    def faces_at(self, vertices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The faces with a corner at each of the vertices, read from their rows of vertex_faces (no
        pass over the whole part): (position in ``vertices``, face) of each pair."""
        vertices = np.asarray(vertices, dtype=np.int64).reshape(-1)
        incidence = self.vertex_faces
        start, stop = incidence.indptr[vertices], incidence.indptr[vertices + 1]
        counts = stop - start
        owner = np.repeat(np.arange(len(vertices)), counts)
        entries = np.repeat(start, counts) + np.arange(int(counts.sum())) - np.repeat(np.cumsum(counts) - counts, counts)
        return owner, incidence.indices[entries].astype(np.int64)

    def touches_group(self, vertices: np.ndarray, group: int) -> np.ndarray:
        """(len(vertices),) whether each vertex is a corner of a face of the group (index ``group``)."""
        owner, faces = self.faces_at(vertices)
        hit = np.zeros(np.size(vertices), dtype=bool)
        hit[owner[self.face_group[faces] == group]] = True
        return hit

    @cached_property
    def group_sizes(self) -> np.ndarray:
        """(groups,) how many faces each group has."""
        return np.bincount(self.face_group, minlength=len(self.group_names))

    @cached_property
    def vertex_tree(self):
        """A KD-tree of the vertices (scipy.spatial.cKDTree) for ball and nearest-point queries; built
        unbalanced (twice as fast to build, and a query finds the same points)."""
        from scipy.spatial import cKDTree

        return cKDTree(self.vertices, balanced_tree=False, compact_nodes=False)

    @cached_property
    def face_components(self) -> np.ndarray:
        """(m,) the connected component of each face (faces joined through shared edges)."""
        inc = self.edge_faces
        adjacency = (inc.T @ inc).tocsr()
        _, labels = sp.csgraph.connected_components(adjacency, directed=False)
        return labels

    @cached_property
    def edge_lengths(self) -> np.ndarray:
        """(e,) length of each unique edge (CHUNK edges at a time: the end points of all of them at
        once would weigh three times the vertex array)."""
        e = self.edges
        out = np.empty(len(e))
        for lo in range(0, len(e), CHUNK):
            part = e[lo:lo + CHUNK]
            out[lo:lo + CHUNK] = np.linalg.norm(self.vertices[part[:, 1]] - self.vertices[part[:, 0]], axis=1)
        return out

    @property
    def bounds(self) -> np.ndarray:
        """(2, 3) lower and upper corner of the bounding box."""
        return np.stack([self.vertices.min(axis=0), self.vertices.max(axis=0)])

    @property
    def diagonal(self) -> float:
        """Length of the bounding box diagonal."""
        lo, hi = self.bounds
        return float(np.linalg.norm(hi - lo))

    def faces_of_group(self, name: str) -> np.ndarray:
        """Indices of the faces in the group called ``name``."""
        return np.flatnonzero(self.face_group == self.group_index(name))

    def with_groups(self, face_group: np.ndarray, group_names: tuple[str, ...] | list[str]) -> "Part":
        """The same mesh with other face groups."""
        return Part(self.vertices, self.faces, face_group, tuple(group_names), self.units, self.source)
