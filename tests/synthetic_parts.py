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
    """A sampled 2-D profile: points (k,2), piece (k-1,) label of each segment, the pieces' names, kinds
    ("wall", "arc" or "blend-G2"/"blend-G3") and radii (the arc radius, 0 otherwise)."""

    points: np.ndarray
    piece: np.ndarray
    names: tuple[str, ...]
    kinds: tuple[str, ...]
    radii: tuple[float, ...]


def _blend_curvature(t: np.ndarray, order: int) -> np.ndarray:
    """Curvature shape over a blend, integrating to 1: the derivative of the Hermite smoothstep of
    degree 2k+1 (k = order - 1), so curvature starts from zero with order-2 vanishing derivatives."""
    if order == 2:
        return 6 * t * (1 - t)
    if order == 3:
        return 30 * t**2 * (1 - t) ** 2
    raise ValueError("blend order must be 2 or 3")


def turtle_profile(start, heading_deg: float, steps, spacing: float) -> Profile:
    """A profile drawn by steps from ``start``: ("line", length), ("arc", radius, turn_deg),
    ("blend", length, turn_deg, order) or ("corner", turn_deg); positive turns are anticlockwise.

    Each line, arc or blend is one labelled piece; blends turn by curvature theta S'(s/L)/L with S
    the smoothstep (order 2: 3t^2 - 2t^3, order 3: 6t^5 - 15t^4 + 10t^3), integrated numerically.
    """
    position = np.asarray(start, dtype=float)
    heading = np.radians(heading_deg)
    points, piece, names, kinds, radii = [position[None]], [], [], [], []
    walls = fillets = 0
    for step in steps:
        if step[0] == "corner":
            heading += np.radians(step[1])
            continue
        if step[0] == "line":
            length, turn, shape = step[1], 0.0, None
        elif step[0] == "arc":
            length, turn, shape = step[1] * np.radians(abs(step[2])), np.radians(step[2]), "arc"
        else:
            length, turn, shape = step[1], np.radians(step[2]), f"blend-G{step[3]}"
        n = max(int(np.ceil(length / spacing)), 2)
        fine = np.linspace(0.0, 1.0, 16 * n + 1)
        if shape is None:
            kappa = np.zeros_like(fine)
        elif shape == "arc":
            kappa = np.full_like(fine, turn / length)
        else:
            kappa = turn / length * _blend_curvature(fine, step[3])
        angle = heading + np.concatenate([[0.0], np.cumsum(0.5 * (kappa[1:] + kappa[:-1]) * np.diff(fine) * length)])
        step_xy = np.column_stack([np.cos(angle), np.sin(angle)])
        path = position + np.concatenate([[[0, 0]], np.cumsum(0.5 * (step_xy[1:] + step_xy[:-1]) * (length / (16 * n)), axis=0)])
        points.append(path[16::16])
        piece.append(np.full(n, len(names)))
        position, heading = path[-1], angle[-1]
        if shape is None:
            walls += 1
            names.append(f"true-wall-{walls}")
        else:
            fillets += 1
            names.append(f"true-fillet-{fillets}")
        kinds.append(shape or "wall")
        radii.append(step[1] if shape == "arc" else 0.0)
    return Profile(np.vstack(points), np.concatenate(piece), tuple(names), tuple(kinds), tuple(radii))


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
    on_axis = np.abs(P[:, 0]) < 1e-3 * np.abs(P[:, 0]).max()
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
    steps = [("line", 34), ("arc", 6, 90), ("line", 19), ("corner", -45), ("line", 18), ("arc", 8, -45),
             ("line", 22), ("arc", 5, -90), ("line", 25)]
    profile = turtle_profile((0, 0), 0, steps, spacing)
    return extrude(profile, 40.0, spacing), profile


def housing(spacing: float = 0.8) -> tuple[Part, Profile]:
    """An extruded housing wall, 40 mm long: plane walls joined by a sharp corner, a circular fillet
    (radius 6), a G2 blend and a G3 blend (each 10 mm long, turning 90 degrees)."""
    steps = [("line", 25), ("corner", 60), ("line", 20), ("arc", 6, -60), ("line", 20), ("blend", 10, -90, 2),
             ("line", 20), ("blend", 10, -90, 3), ("line", 25)]
    profile = turtle_profile((0, 0), 0, steps, spacing)
    return extrude(profile, 40.0, spacing), profile


def boss_on_plate(segments: int = 160, spacing: float = 0.8) -> tuple[Part, Profile]:
    """A round plate (radius 40, 10 thick) with a cylinder boss (radius 15, 20 high) on top: the boss
    top edge rounded by 3 mm, its foot by 5 mm, the plate's edges sharp. Revolved about z."""
    steps = [("line", 12), ("arc", 3, -90), ("line", 12), ("arc", 5, 90), ("line", 20), ("corner", -90),
             ("line", 10), ("corner", -90), ("line", 40)]
    profile = turtle_profile((0, 30), 0, steps, spacing)
    return revolve(profile, segments), profile
