"""Rigid alignment of a scan to a nominal part and transfer of the nominal's face groups to the scan.

Alignment: a coarse start from the principal axes of both surfaces (area-weighted second moments of
the triangles), with the sign and order ambiguity of the axes resolved by trying every proper axis map
for a few iterations and keeping the best; then point-to-plane ICP (Chen and Medioni 1991, "Object
modelling by registration of multiple range images"; the linearised step of Low 2004, "Linear
least-squares optimization for point-to-plane ICP surface registration") with pairs farther than three
times the median distance left out (trimmed ICP, Chetverikov et al. 2002).

Transfer: each scan triangle takes the group of the nominal triangle nearest to its centroid (exact
point-triangle distances among the nearest candidates), preferring triangles that face the same way, so
the two sides of a thin wall keep their own groups.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
import trimesh
from scipy.spatial import cKDTree
from scipy.spatial.transform import Rotation

from surfcheck.errors import InputError
from surfcheck.part import Part

COARSE_ITERATIONS = 6
CANDIDATE_FACES = 8
CHUNK = 65536  # points whose candidate triangles are weighed at once
MAX_SAMPLES = 10000
POINT_WEIGHT = 0.2  # weight of the point-to-point rows beside the point-to-plane ones


@dataclass(frozen=True, eq=False)
class Alignment:
    """``matrix`` (4,4) maps scan coordinates onto the nominal part; ``rms`` is the root-mean-square
    distance of the scan's vertices to the nominal surface after alignment (inliers: within three
    median distances, their share is ``inlier_fraction``); ``iterations`` of the final ICP."""

    matrix: np.ndarray
    rms: float
    inlier_fraction: float
    iterations: int

    def apply(self, points: np.ndarray) -> np.ndarray:
        return points @ self.matrix[:3, :3].T + self.matrix[:3, 3]

    def to_json(self) -> dict:
        return {
            "matrix": [[round(float(x), 9) for x in row] for row in self.matrix],
            "rms": round(self.rms, 6),
            "inlier_fraction": round(self.inlier_fraction, 6),
            "iterations": self.iterations,
        }


def _moments(part: Part) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Area-weighted centroid, principal axes (right-handed columns, largest first), variances."""
    w = part.face_areas / part.face_areas.sum()
    c = part.vertices[part.faces].mean(axis=1)
    mean = w @ c
    d = c - mean
    values, axes = np.linalg.eigh((d * w[:, None]).T @ d)
    axes = axes[:, ::-1]
    axes[:, 2] *= np.sign(np.linalg.det(axes))  # right-handed, so axis maps stay proper rotations
    return mean, axes, values[::-1]


def _proper_axis_maps() -> list[np.ndarray]:
    """The 24 rotations that map coordinate axes onto coordinate axes (signed permutations, det +1)."""
    maps = []
    for perm in itertools.permutations(range(3)):
        for signs in itertools.product((1.0, -1.0), repeat=3):
            M = np.zeros((3, 3))
            M[list(perm), [0, 1, 2]] = signs
            if np.linalg.det(M) > 0:
                maps.append(M)
    return maps


def sample_vertices(part: Part, count: int) -> np.ndarray:
    """At most ``count`` of the part's vertices, a fixed random choice."""
    rows = np.random.default_rng(0).permutation(part.n_vertices)[:count]
    return part.vertices[rows]


def _icp(source: np.ndarray, tree: cKDTree, target: np.ndarray, normals: np.ndarray, start: np.ndarray,
         iterations: int, tolerance: float) -> tuple[np.ndarray, float, float, int]:
    """Trimmed point-to-plane ICP from ``start`` (4,4). Returns (matrix, rms, inlier share, steps).
    It stops when a step moves no source point by more than about ``tolerance``.

    Each step solves the linearised point-to-plane problem (Low 2004) plus POINT_WEIGHT times the
    point-to-point one, which holds the directions a plane cannot (sliding along an extrusion, turning
    about a revolved part's axis) without biasing the others. Pairs farther apart than three median
    distances are left out.
    """
    T = start.copy()
    rms, share = np.inf, 0.0
    size = float(np.linalg.norm(source - source.mean(axis=0), axis=1).max())
    for step in range(1, iterations + 1):
        P = source @ T[:3, :3].T + T[:3, 3]
        gap, j = tree.query(P)
        q, n = target[j], normals[j]
        keep = gap <= 3.0 * max(np.median(gap), 1e-12)
        share = float(keep.mean())
        P, q, n = P[keep], q[keep], n[keep]
        d = np.einsum("ij,ij->i", P - q, n)
        plane_rows = np.hstack([np.cross(P, n), n])
        skew = np.zeros((len(P), 3, 3))
        skew[:, 0, 1], skew[:, 0, 2], skew[:, 1, 2] = P[:, 2], -P[:, 1], P[:, 0]
        skew -= np.swapaxes(skew, 1, 2)  # [P]x, so that omega x P = -[P]x omega
        point_rows = POINT_WEIGHT * np.concatenate([-skew, np.broadcast_to(np.eye(3), skew.shape)], axis=2)
        normal = plane_rows.T @ plane_rows + np.einsum("nki,nkj->ij", point_rows, point_rows)
        rhs = plane_rows.T @ -d + np.einsum("nki,nk->i", point_rows, POINT_WEIGHT * (q - P))
        x = np.linalg.solve(normal + 1e-12 * np.eye(6), rhs)
        move = np.eye(4)
        move[:3, :3] = Rotation.from_rotvec(x[:3]).as_matrix()
        move[:3, 3] = x[3:]
        T = move @ T
        rms = float(np.sqrt(np.mean(d**2)))
        if np.linalg.norm(x[:3]) * size + np.linalg.norm(x[3:]) < tolerance:
            return T, rms, share, step
    return T, rms, share, iterations


@dataclass(frozen=True, eq=False)
class Target:
    """The nominal side of an alignment: its vertices, their normals and a k-d tree over them."""

    vertices: np.ndarray
    normals: np.ndarray
    tree: cKDTree
    tolerance: float

    @classmethod
    def of(cls, nominal: Part) -> "Target":
        normals = trimesh.Trimesh(nominal.vertices, nominal.faces, process=False).vertex_normals
        return cls(nominal.vertices, normals, cKDTree(nominal.vertices), 1e-5 * nominal.diagonal)

    def icp(self, source: np.ndarray, start: np.ndarray, iterations: int):
        return _icp(source, self.tree, self.vertices, self.normals, start, iterations, self.tolerance)


def coarse_pose(scan: Part, nominal: Part, target: Target) -> np.ndarray:
    """The start pose (4,4): principal axes matched under each of the 24 proper axis maps, each refined
    by COARSE_ITERATIONS ICP steps on 1,000 scan vertices; the lowest rms per inlier share wins."""
    ms, axes_s, _ = _moments(scan)
    mn, axes_n, _ = _moments(nominal)
    coarse = sample_vertices(scan, 1000)
    best = None
    for M in _proper_axis_maps():
        start = np.eye(4)
        start[:3, :3] = axes_n @ M @ axes_s.T
        start[:3, 3] = mn - start[:3, :3] @ ms
        T, rms, share, _ = target.icp(coarse, start, COARSE_ITERATIONS)
        score = rms / max(share, 1e-9)
        if best is None or score < best[0]:
            best = (score, T)
    return best[1]


def align(scan: Part, nominal: Part, max_iterations: int = 60) -> Alignment:
    """Rigidly align ``scan`` to ``nominal`` (see the module docstring)."""
    target = Target.of(nominal)
    T, _, share, steps = target.icp(sample_vertices(scan, MAX_SAMPLES), coarse_pose(scan, nominal, target), max_iterations)
    moved = scan.vertices @ T[:3, :3].T + T[:3, 3]
    _, distance = nearest_faces(nominal, moved)
    inliers = distance <= 3.0 * max(np.median(distance), 1e-12)
    rms = float(np.sqrt(np.mean(distance[inliers] ** 2)))
    return Alignment(T, rms, float(inliers.mean()), steps)


class FaceLocator:
    """The nearest triangle of a part to given points: a k-d tree over the triangles' centroids, built
    once, and exact point-triangle distances among each point's CANDIDATE_FACES nearest centroids,
    taken CHUNK points at a time (the candidates of millions of points at once would outweigh the part)."""

    def __init__(self, part: Part) -> None:
        self.part = part
        self.tree = cKDTree(part.vertices[part.faces].mean(axis=1))
        self._normals = None

    @property
    def face_normals(self) -> np.ndarray:
        if self._normals is None:
            self._normals = trimesh.Trimesh(self.part.vertices, self.part.faces, process=False).face_normals
        return self._normals

    def nearest(self, points: np.ndarray, normals: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """For each point, the nearest triangle and the distance to it; with ``normals``, candidates
        facing the other way (normal dot < 0) are passed over unless no candidate faces the same way."""
        face = np.empty(len(points), dtype=np.int64)
        distance = np.empty(len(points))
        for lo in range(0, len(points), CHUNK):
            hi = min(lo + CHUNK, len(points))
            face[lo:hi], distance[lo:hi] = self._nearest(points[lo:hi], None if normals is None else normals[lo:hi])
        return face, distance

    def _nearest(self, points: np.ndarray, normals: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
        part = self.part
        k = min(CANDIDATE_FACES, part.n_faces)
        _, cand = self.tree.query(points, k=k)
        cand = cand.reshape(len(points), k)
        tris = part.vertices[part.faces[cand.ravel()]]
        foot = trimesh.triangles.closest_point(tris, np.repeat(points, k, axis=0))
        dist = np.linalg.norm(foot - np.repeat(points, k, axis=0), axis=1).reshape(len(points), k)
        if normals is not None:
            facing = np.einsum("nki,ni->nk", self.face_normals[cand], normals) >= 0
            facing[~facing.any(axis=1)] = True
            dist_pick = np.where(facing, dist, np.inf)
        else:
            dist_pick = dist
        col = np.argmin(dist_pick, axis=1)
        rows = np.arange(len(points))
        return cand[rows, col], dist[rows, col]


def nearest_faces(part: Part, points: np.ndarray, normals: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """For each point, the nearest triangle of ``part`` and the distance to it (FaceLocator.nearest).

    Candidates are the CANDIDATE_FACES triangles with the nearest centroids; exact point-triangle
    distances pick among them. With ``normals``, candidates facing the other way (normal dot < 0) are
    passed over unless no candidate faces the same way.
    """
    return FaceLocator(part).nearest(points, normals)


def transfer_groups(nominal: Part, scan: Part, alignment: Alignment | None = None) -> Part:
    """The scan with each triangle in the group of the nearest nominal triangle (after alignment)."""
    if len(nominal.group_names) < 2:
        raise InputError(
            f"{nominal.source or 'nominal part'}: it has {len(nominal.group_names)} face group; "
            "the nominal part must carry the face groups to transfer"
        )
    alignment = align(scan, nominal) if alignment is None else alignment
    mesh = trimesh.Trimesh(scan.vertices, scan.faces, process=False)
    centroids = alignment.apply(mesh.triangles_center)
    normals = mesh.face_normals @ alignment.matrix[:3, :3].T
    locator = FaceLocator(nominal)
    face, _ = locator.nearest(centroids)
    if np.median(np.einsum("ij,ij->i", locator.face_normals[face], normals)) < 0:
        normals = -normals  # the scan's triangles are wound the other way round
    face, _ = locator.nearest(centroids, normals)
    return scan.with_groups(nominal.face_group[face], nominal.group_names)
