"""Boundary loops, boundary chains and group seams of a Part, as ordered polylines with stable ids.

Ids: `loop-N` (closed boundary loops), `chain-N.K` (loop N split where the boundary turns sharply or
the group beside it changes), `seam-N` (where the face group changes: across shared edges, or between
separate shells whose boundaries touch within a tolerance). Numbering follows a deterministic order
(group order in the file, then position), so the same file always gives the same ids.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.sparse as sp
from scipy.spatial import cKDTree

from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.polyline import polyline_length

CORNER_ANGLE_DEG = 35.0  # a boundary turning more than this at a vertex starts a new chain; from memory
TOUCH_RELATIVE = 0.25  # separate shells touch within this fraction of the median edge length; from memory
NAMED_GAP_EDGES = 10.0  # a named pair's borders may face each other across up to this many median edges
# (a gap a tolerance profile fails many times over); common practice, no published source
FACING_ANGLE = np.radians(30.0)  # across a gap the other border lies within this of the edge's normal


@dataclass(frozen=True, eq=False)
class Curve:
    """An ordered polyline on a part: a boundary loop, a boundary chain or a seam between two groups.

    ``vertices`` are part vertex indices in order (for a seam between separate shells, those of one
    side, kept when the request names the groups the other way round); ``points`` their positions. ``groups`` names the group(s) beside it: one for a
    loop or chain, the two groups (A, B) for a seam.
    """

    id: str
    kind: str  # "loop", "chain" or "seam"
    vertices: np.ndarray
    points: np.ndarray
    closed: bool
    groups: tuple[str, ...]

    @property
    def length(self) -> float:
        return polyline_length(self.points, self.closed)

    def to_dict(self) -> dict:
        return {
            "id": self.id,
            "kind": self.kind,
            "length": self.length,
            "vertices": int(len(self.vertices)),
            "closed": bool(self.closed),
            "groups": list(self.groups),
            "start": self.points[0].tolist(),
            "end": self.points[-1].tolist(),
        }


def boundary_half_edges(part: Part) -> np.ndarray:
    """(b, 2) boundary edges directed as their one triangle runs along them."""
    half = _boundary_half_edge_indices(part)
    face, corner = np.divmod(half, 3)
    return np.stack([part.faces[face, corner], part.faces[face, (corner + 1) % 3]], axis=1)


def _grouped_boundary(part: Part) -> tuple[np.ndarray, np.ndarray]:
    """The boundary half-edges (boundary_half_edges) and the group of each one's triangle."""
    return boundary_half_edges(part), part.face_group[_boundary_face_of_half_edges(part)]


def _boundary_half_edge_indices(part: Part) -> np.ndarray:
    """Indices (into the face-major half edges, Part.half_edges) of the half edges on the boundary."""
    return np.flatnonzero(part.edge_face_count[part.half_edge_edge] == 1)


def _boundary_face_of_half_edges(part: Part) -> np.ndarray:
    return _boundary_half_edge_indices(part) // 3


def _walk_paths(edges: np.ndarray) -> list[tuple[np.ndarray, bool]]:
    """Split an edge set into ordered vertex paths: closed cycles and open runs; branch vertices
    (more than two edges) end runs."""
    if len(edges) == 0:
        return []
    nodes, local = np.unique(edges.reshape(-1), return_inverse=True)
    local = local.reshape(-1, 2)
    n = len(nodes)
    adjacency = sp.coo_matrix((np.ones(2 * len(local)), (np.r_[local[:, 0], local[:, 1]],
                                                         np.r_[local[:, 1], local[:, 0]])), shape=(n, n)).tocsr()
    adjacency.data[:] = 1
    degree = np.asarray(adjacency.sum(axis=1)).reshape(-1)
    neighbours = [adjacency.indices[adjacency.indptr[i]:adjacency.indptr[i + 1]] for i in range(n)]
    used_edge: set[tuple[int, int]] = set()
    paths = []

    def walk(start: int, first: int) -> list[int]:
        path = [start, first]
        used_edge.add((min(start, first), max(start, first)))
        while degree[path[-1]] == 2 and path[-1] != start:
            here, before = path[-1], path[-2]
            nxt = [v for v in neighbours[here] if v != before and (min(here, v), max(here, v)) not in used_edge]
            if not nxt:
                break
            used_edge.add((min(here, nxt[0]), max(here, nxt[0])))
            path.append(nxt[0])
        return path

    for start in sorted(np.flatnonzero(degree != 2), key=lambda i: nodes[i]):
        for first in neighbours[start]:
            if (min(start, first), max(start, first)) not in used_edge:
                path = walk(start, first)
                paths.append((nodes[np.array(path)], False))
    for start in range(n):
        for first in neighbours[start]:
            if (min(start, first), max(start, first)) not in used_edge:
                path = walk(start, first)
                closed = path[-1] == path[0]
                paths.append((nodes[np.array(path[:-1] if closed else path)], closed))
    return paths


@dataclass(frozen=True, eq=False)
class SeamIndex:
    """Every loop, chain and seam of a part, found once."""

    part: Part
    touch_tolerance: float | None = None

    @cached_property
    def loops(self) -> list[Curve]:
        return boundary_loops(self.part)

    @cached_property
    def chains(self) -> list[Curve]:
        return boundary_chains(self.part, self.loops)

    @cached_property
    def seams(self) -> list[Curve]:
        return group_seams(self.part, self.touch_tolerance)

    def all(self) -> list[Curve]:
        return [*self.loops, *self.chains, *self.seams]

    def find(self, spec: str) -> list[Curve]:
        """Curves named by a command-line spec: an id, `GROUP_A:GROUP_B`, or `all` (every seam)."""
        if spec == "all":
            if not self.seams:
                raise InputError(f"{self.part.source or 'part'}: has no group seams (one group, or groups that do not touch)")
            return list(self.seams)
        for curve in self.all():
            if curve.id == spec:
                return [curve]
        if ":" in spec:
            a, b = spec.split(":", 1)
            self.part.group_index(a), self.part.group_index(b)
            found = [c for c in self.seams if set(c.groups) == {a, b}] or gap_seams(self.part, a, b)
            if not found:
                raise InputError(f"{self.part.source or 'part'}: groups {a!r} and {b!r} do not meet, not even across a"
                                 f" gap of {NAMED_GAP_EDGES:g} typical edges; see `surfcheck loops`")
            return [c if c.groups == (a, b) else _flip_sides(c, self.part, a, b) for c in found]
        ids = ", ".join(c.id for c in self.all()[:12]) or "none"
        raise InputError(f"{self.part.source or 'part'}: no seam, chain or loop {spec!r} (known: {ids})")


def gap_seams(part: Part, a: str, b: str) -> list[Curve]:
    """The seams of two named groups whose borders face each other across a gap wider than the touch
    tolerance, up to NAMED_GAP_EDGES median edges (a shell moved off its face: a G0 defect to grade,
    not a missing seam). Only for a pair the user names: unnamed, so wide a tolerance would pair
    faces that merely lie near each other. Ids are "A:B"."""
    ia, ib = part.group_index(a), part.group_index(b)
    edge = float(np.median(part.edge_lengths))
    pair = (min(ia, ib), max(ia, ib))
    edges = _touching_seam_edges(part, NAMED_GAP_EDGES * edge, pair).get(pair)
    if edges is None:
        return []
    edges = edges[_facing(part, edges, pair[1], edge / 40.0)]
    paths = [(v, closed) for v, closed in _walk_paths(edges) if len(v) >= 2]
    return [Curve(f"{a}:{b}" if len(paths) == 1 else f"{a}:{b}.{k}", "seam", v, part.vertices[v], closed, (a, b))
            for k, (v, closed) in enumerate(paths, start=1)]


def _facing(part: Part, edges: np.ndarray, other: int, spacing: float) -> np.ndarray:
    """Which of the border ``edges`` face group ``other``'s border across the gap: from each end, the
    nearest point of the other border lies off the edge's line (within FACING_ANGLE of its normal),
    as across a seam, not ahead along it, as from the cap edges that run up to a corner. The other
    border is sampled ``spacing`` apart."""
    half, group = _grouped_boundary(part)
    theirs = half[group == other]
    V = part.vertices
    samples = _densify(V[theirs[:, 0]], V[theirs[:, 1]], spacing)
    direction = V[edges[:, 1]] - V[edges[:, 0]]
    direction /= np.maximum(np.linalg.norm(direction, axis=1), 1e-300)[:, None]
    _, nearest = cKDTree(samples).query(V[edges.reshape(-1)])
    across = (samples[nearest] - V[edges.reshape(-1)]).reshape(-1, 2, 3)
    along = np.abs(np.einsum("kij,kj->ki", across, direction))
    return (along <= np.sin(FACING_ANGLE) * np.linalg.norm(across, axis=2) + 1e-12).all(axis=1)


def _flip_sides(curve: Curve, part: Part, a: str, b: str) -> Curve:
    return Curve(curve.id, curve.kind, curve.vertices, curve.points, curve.closed, (a, b))


def boundary_loops(part: Part) -> list[Curve]:
    """Closed boundary loops, each ordered as its triangles run along it."""
    half = boundary_half_edges(part)
    paths = _walk_paths(half)
    groups_of = _boundary_vertex_groups(part)
    found = []
    forward = set(map(tuple, half.tolist()))  # built once: per path it made the walk quadratic
    for vertices, closed in paths:
        vertices = _orient_like(vertices, forward, closed)
        found.append((vertices, closed))
    found.sort(key=lambda item: (-polyline_length(part.vertices[item[0]], item[1]), int(item[0].min())))
    return [
        Curve(f"loop-{i}", "loop", v, part.vertices[v], closed, groups_of(v))
        for i, (v, closed) in enumerate(found, start=1)
    ]


def _orient_like(vertices: np.ndarray, forward: set[tuple[int, int]], closed: bool) -> np.ndarray:
    """Reverse a path if it runs against the directed boundary half edges ``forward``; start a loop
    at its smallest vertex index so ids and starts are stable."""
    if len(vertices) >= 2:
        if (int(vertices[0]), int(vertices[1])) not in forward:
            vertices = vertices[::-1]
    if closed:
        vertices = np.roll(vertices, -int(np.argmin(vertices)))
    return vertices


def _boundary_vertex_groups(part: Part):
    half = boundary_half_edges(part)
    face = _boundary_face_of_half_edges(part)
    group_of_start = dict(zip(half[:, 0].tolist(), part.face_group[face].tolist()))

    def groups(vertices: np.ndarray) -> tuple[str, ...]:
        seen = sorted({group_of_start[int(v)] for v in vertices if int(v) in group_of_start})
        return tuple(part.group_names[g] for g in seen)

    return groups


def boundary_chains(part: Part, loops: list[Curve] | None = None) -> list[Curve]:
    """Boundary loops split where the boundary turns by more than CORNER_ANGLE_DEG at a vertex, or
    where the group beside it changes: one side of a rectangle is one chain."""
    loops = boundary_loops(part) if loops is None else loops
    half = boundary_half_edges(part)
    face = _boundary_face_of_half_edges(part)
    group_of_start = dict(zip(half[:, 0].tolist(), part.face_group[face].tolist()))
    chains = []
    for number, loop in enumerate(loops, start=1):
        v = loop.vertices
        cuts = _chain_cuts(loop.points, loop.closed)
        group = np.array([group_of_start.get(int(x), -1) for x in v])
        cuts = sorted(set(cuts) | set(np.flatnonzero(group != np.roll(group, 1)).tolist() if loop.closed else []))
        pieces = _split_at(v, cuts, loop.closed)
        for k, piece in enumerate(pieces, start=1):
            names = sorted({part.group_names[group_of_start[int(x)]] for x in piece[:-1] if int(x) in group_of_start}
                           or {part.group_names[group_of_start.get(int(piece[0]), 0)]})
            closed = loop.closed and len(pieces) == 1
            chains.append(Curve(f"chain-{number}.{k}", "chain", piece, part.vertices[piece], closed, tuple(names)))
    return chains


def _chain_cuts(points: np.ndarray, closed: bool) -> list[int]:
    """Vertex positions where the polyline turns more than CORNER_ANGLE_DEG."""
    if len(points) < 3:
        return []
    incoming = points - np.roll(points, 1, axis=0)
    outgoing = np.roll(points, -1, axis=0) - points
    cosine = np.einsum("ij,ij->i", incoming, outgoing) / (
        np.linalg.norm(incoming, axis=1) * np.linalg.norm(outgoing, axis=1) + 1e-300)
    sharp = cosine < np.cos(np.radians(CORNER_ANGLE_DEG))
    if not closed:
        sharp[[0, -1]] = False
    return np.flatnonzero(sharp).tolist()


def _split_at(vertices: np.ndarray, cuts: list[int], closed: bool) -> list[np.ndarray]:
    """Pieces of a path between cut positions; pieces share their end vertices."""
    if not cuts:
        return [vertices]
    if closed:
        rolled = np.roll(vertices, -cuts[0])
        shifted = [c - cuts[0] for c in cuts] + [len(vertices)]
        ring = np.append(rolled, rolled[0])
        return [ring[a:b + 1] for a, b in zip(shifted[:-1], shifted[1:])]
    bounds = [0, *[c for c in cuts if 0 < c < len(vertices) - 1], len(vertices) - 1]
    return [vertices[a:b + 1] for a, b in zip(bounds[:-1], bounds[1:])]


def group_seams(part: Part, touch_tolerance: float | None = None) -> list[Curve]:
    """Polylines where the face group changes: shared edges between two groups, and boundary edges
    of one group lying within ``touch_tolerance`` of another group's boundary (separate shells)."""
    if len(part.group_names) < 2:
        return []
    if touch_tolerance is None:
        touch_tolerance = TOUCH_RELATIVE * float(np.median(part.edge_lengths))
    pieces: dict[tuple[int, int], list[np.ndarray]] = {}
    for pair, edges in _shared_seam_edges(part).items():
        pieces.setdefault(pair, []).append(edges)
    for pair, edges in _touching_seam_edges(part, touch_tolerance).items():
        pieces.setdefault(pair, []).append(edges)
    found = []
    for (a, b), edge_sets in pieces.items():
        for vertices, closed in _walk_paths(np.vstack(edge_sets)):
            if len(vertices) < 2:
                continue
            if closed:
                vertices = np.roll(vertices, -int(np.argmin(vertices)))
            elif tuple(part.vertices[vertices[-1]]) < tuple(part.vertices[vertices[0]]):
                vertices = vertices[::-1]
            found.append(((a, b), vertices, closed))
    found.sort(key=lambda item: (item[0], tuple(np.round(part.vertices[item[1][0]], 9))))
    return [
        Curve(f"seam-{i}", "seam", v, part.vertices[v], closed, (part.group_names[a], part.group_names[b]))
        for i, ((a, b), v, closed) in enumerate(found, start=1)
    ]


def _shared_seam_edges(part: Part) -> dict[tuple[int, int], np.ndarray]:
    """Edges whose two triangles lie in different groups, by (group, group) pair (lower first)."""
    # per edge the lowest and highest group of its faces, a corner at a time (no edge-face matrix)
    corners = part.half_edge_edge.reshape(-1, 3)
    low = np.full(len(part.edges), len(part.group_names), dtype=np.int64)
    high = np.full(len(part.edges), -1, dtype=np.int64)
    for corner in range(3):
        np.minimum.at(low, corners[:, corner], part.face_group)
        np.maximum.at(high, corners[:, corner], part.face_group)
    interior = np.flatnonzero((part.edge_face_count == 2) & (low != high))
    groups = np.stack([low[interior], high[interior]], axis=1)
    out = {}
    for pair in np.unique(groups, axis=0):
        mask = (groups[:, 0] == pair[0]) & (groups[:, 1] == pair[1])
        out[(int(pair[0]), int(pair[1]))] = part.edges[interior[mask]]
    return out


def _touching_seam_edges(part: Part, tolerance: float,
                         only: tuple[int, int] | None = None) -> dict[tuple[int, int], np.ndarray]:
    """Boundary edges of group A whose two ends lie within ``tolerance`` of group B's boundary
    (B's boundary densified to points spaced tolerance / 2), keyed (lower group, higher group);
    ``only`` restricts it to that one pair."""
    half, group = _grouped_boundary(part)
    if only is not None:
        keep = np.isin(group, only)
        half, group = half[keep], group[keep]
    if len(half) == 0:
        return {}
    V = part.vertices
    out: dict[tuple[int, int], list[np.ndarray]] = {}
    for b in np.unique(group):
        lower = group < b  # the boundary edges of every group A before B, queried at once
        if not lower.any():
            continue
        theirs = half[group == b]
        tree = cKDTree(_densify(V[theirs[:, 0]], V[theirs[:, 1]], tolerance / 2))
        mine, owner = half[lower], group[lower]
        near = tree.query(V[mine.reshape(-1)], distance_upper_bound=tolerance)[0].reshape(-1, 2)
        # an edge with a vertex of B's own faces continues B's boundary where the groups are welded
        # (the cap edge of a fillet beside a plane's), it does not face B across a gap
        touching = np.isfinite(near).all(axis=1) & ~part.touches_group(mine, b).reshape(-1, 2).any(axis=1)
        for a in np.unique(owner[touching]):
            out.setdefault((int(a), int(b)), []).append(mine[touching & (owner == a)])
    return {pair: np.vstack(edges) for pair, edges in out.items()}


def _densify(start: np.ndarray, end: np.ndarray, spacing: float) -> np.ndarray:
    """Points along each segment start->end, at most ``spacing`` apart, ends included."""
    length = np.linalg.norm(end - start, axis=1)
    count = np.maximum(1, np.ceil(length / max(spacing, 1e-300)).astype(int))
    segment = np.repeat(np.arange(len(start)), count + 1)
    offsets = np.arange(len(segment)) - np.repeat(np.cumsum(count + 1) - (count + 1), count + 1)
    t = offsets / np.repeat(count, count + 1)
    return start[segment] + t[:, None] * (end[segment] - start[segment])
