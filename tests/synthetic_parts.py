"""Synthetic labelled parts with known faces and fillets for the segmentation and transfer tests.

Profiles are polylines whose corners are rounded by circular arcs of given radii (the classic tangent
construction: tangent length r tan(phi/2) for a turn of phi); parts are the profile extruded along z or
revolved about z. Every triangle carries the label of the profile piece it was swept from, so the true
faces, their kinds and their radii are known exactly.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import trimesh
from scipy.spatial.transform import Rotation

from surfcheck.part import Part


@dataclass(frozen=True)
class Profile:
    """A sampled 2-D profile: points (k,2), piece (k-1,) label of each segment, the pieces' names and
    fillet radii (0 for a straight piece)."""

    points: np.ndarray
    piece: np.ndarray
    names: tuple[str, ...]
    radii: tuple[float, ...]


def filleted_profile(corners, radii, spacing: float) -> Profile:
    """The open polyline through ``corners`` with interior corner i rounded by radius ``radii[i-1]``."""
    C = np.asarray(corners, dtype=float)
    pieces: list[np.ndarray] = []
    kinds: list[float] = []
    start = C[0]
    for i in range(1, len(C) - 1):
        u_in = (C[i] - C[i - 1]) / np.linalg.norm(C[i] - C[i - 1])
        u_out = (C[i + 1] - C[i]) / np.linalg.norm(C[i + 1] - C[i])
        r = radii[i - 1]
        if r <= 0:
            pieces.append(_line(start, C[i], spacing))
            kinds.append(0.0)
            start = C[i]
            continue
        turn = np.arccos(np.clip(u_in @ u_out, -1, 1))
        tangent = r * np.tan(turn / 2)
        a, b = C[i] - tangent * u_in, C[i] + tangent * u_out
        left = np.sign(u_in[0] * u_out[1] - u_in[1] * u_out[0])
        centre = a + r * left * np.array([-u_in[1], u_in[0]])
        pieces.append(_line(start, a, spacing))
        kinds.append(0.0)
        pieces.append(_arc(centre, a, b, r, left, spacing))
        kinds.append(r)
        start = b
    pieces.append(_line(start, C[-1], spacing))
    kinds.append(0.0)
    points = [pieces[0][:1]] + [p[1:] for p in pieces]
    piece = np.concatenate([np.full(len(p) - 1, j) for j, p in enumerate(pieces)])
    n_plane = n_fillet = 0
    names = []
    for r in kinds:
        if r > 0:
            n_fillet += 1
            names.append(f"true-fillet-{n_fillet}")
        else:
            n_plane += 1
            names.append(f"true-wall-{n_plane}")
    return Profile(np.vstack(points), piece, tuple(names), tuple(kinds))


def _line(a, b, spacing):
    n = max(int(np.ceil(np.linalg.norm(b - a) / spacing)), 1)
    t = np.linspace(0, 1, n + 1)[:, None]
    return a + t * (b - a)


def _arc(centre, a, b, r, left, spacing):
    t0 = np.arctan2(*(a - centre)[::-1])
    t1 = np.arctan2(*(b - centre)[::-1])
    sweep = (t1 - t0) % (2 * np.pi) if left > 0 else -((t0 - t1) % (2 * np.pi))
    n = max(int(np.ceil(abs(sweep) * r / spacing)), 2)
    t = t0 + np.linspace(0, sweep, n + 1)
    return centre + r * np.column_stack([np.cos(t), np.sin(t)])


def extrude(profile: Profile, length: float, spacing: float) -> Part:
    """The profile swept along z over [0, length]: an open sheet, one group per profile piece."""
    P = profile.points
    k = len(P)
    nz = max(int(np.ceil(length / spacing)), 1) + 1
    z = np.linspace(0, length, nz)
    V = np.column_stack([np.repeat(P, nz, axis=0), np.tile(z, k)])
    i, j = np.meshgrid(np.arange(k - 1), np.arange(nz - 1), indexing="ij")
    a = (i * nz + j).ravel()
    b, c, d = a + nz, a + nz + 1, a + 1
    F = np.vstack([np.column_stack([a, b, c]), np.column_stack([a, c, d])])
    group = np.tile(np.repeat(profile.piece, nz - 1), 2)
    return Part(V, F, group, profile.names, source="synthetic extrusion")


def revolve(profile: Profile, segments: int) -> Part:
    """The (r, z) profile revolved about z; ends with r = 0 close as fans, one group per piece."""
    P = profile.points
    on_axis = np.isclose(P[:, 0], 0.0)
    theta = np.linspace(0, 2 * np.pi, segments, endpoint=False)
    rows, vertices = [], []
    count = 0
    for i, (r, z) in enumerate(P):
        if on_axis[i]:
            vertices.append([[0.0, 0.0, z]])
            rows.append(np.full(segments, count))
            count += 1
        else:
            vertices.append(np.column_stack([r * np.cos(theta), r * np.sin(theta), np.full(segments, z)]))
            rows.append(count + np.arange(segments))
            count += segments
    V = np.vstack(vertices)
    faces, group = [], []
    for i in range(len(P) - 1):
        a, b = rows[i], rows[i + 1]
        a1, b1 = np.roll(a, -1), np.roll(b, -1)
        tris = np.vstack([np.column_stack([a, b1, a1]), np.column_stack([a, b, b1])])
        keep = (tris[:, 0] != tris[:, 1]) & (tris[:, 1] != tris[:, 2]) & (tris[:, 0] != tris[:, 2])
        faces.append(tris[keep])
        group.append(np.full(int(keep.sum()), profile.piece[i]))
    return Part(V, np.vstack(faces), np.concatenate(group), profile.names, source="synthetic revolution")


def scanned(part: Part, noise: float, seed: int, rotate: bool = True) -> tuple[Part, np.ndarray]:
    """A noisy, unlabelled, randomly moved copy: Gaussian noise of ``noise`` along the vertex normals,
    a random rotation and translation. Returns the copy (one group) and the 4x4 motion applied."""
    rng = np.random.default_rng(seed)
    normals = trimesh.Trimesh(part.vertices, part.faces, process=False).vertex_normals
    V = part.vertices + normals * rng.normal(0.0, noise, (part.n_vertices, 1))
    motion = np.eye(4)
    if rotate:
        motion[:3, :3] = Rotation.random(random_state=seed).as_matrix()
        motion[:3, 3] = rng.normal(0.0, 0.5 * part.diagonal, 3)
    V = V @ motion[:3, :3].T + motion[:3, 3]
    return Part(V, part.faces, np.zeros(part.n_faces, dtype=np.int64), ("scan",), source="synthetic scan"), motion


def bracket(spacing: float = 0.8) -> tuple[Part, Profile]:
    """An extruded bracket, 40 mm long: five plane walls, three circular fillets (radius 6 over 90
    degrees, 8 over 45 degrees, 5 over 90 degrees) and one sharp 45-degree corner."""
    corners = [(0, 0), (40, 0), (40, 25), (55, 40), (85, 40), (85, 10)]
    profile = filleted_profile(corners, [6.0, 0.0, 8.0, 5.0], spacing)
    return extrude(profile, 40.0, spacing), profile


def boss_on_plate(segments: int = 160, spacing: float = 0.8) -> tuple[Part, Profile]:
    """A round plate (radius 40, 10 thick) with a cylinder boss (radius 15, 20 high) on top: the boss
    top edge rounded by 3 mm, its foot by 5 mm, the plate's edges sharp. Revolved about z."""
    corners = [(0, 30), (15, 30), (15, 10), (40, 10), (40, 0), (0, 0)]
    profile = filleted_profile(corners, [3.0, 5.0, 0.0, 0.0], spacing)
    return revolve(profile, segments), profile
