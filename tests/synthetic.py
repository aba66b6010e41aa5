"""Test helpers: synthetic fillets of known class as Parts with their seams as Curves."""

from __future__ import annotations

import numpy as np

from surfcheck import shapes as S
from surfcheck.part import Part
from surfcheck.seams import Curve

RADIUS = 5.0  # fillet radius, mm
RAMP = 8.0  # length of the curvature transitions, mm


def fillet(kind: str) -> S.Profile:
    """A fillet profile of known continuity class, starting at radius 30 heading up (so that it
    also revolves about z): sharp edge, circular arc, clothoid ramps into the arc, smooth-step
    (cubic Hermite, C1 curvature) ramps into the arc."""
    k = 1.0 / RADIUS
    start, heading = (30.0, 0.0), 90.0
    pieces = {
        "sharp": (S.line(8, "a"), S.corner(60), S.line(8, "b")),
        "arc": (S.line(8, "a"), S.arc(RADIUS, "b", angle_deg=60), S.line(8, "c")),
        "clothoid": (S.line(8, "a"), S.clothoid(RAMP, 0, k, "b"), S.arc(RADIUS, "c", angle_deg=40),
                     S.clothoid(RAMP, k, 0, "d"), S.line(8, "e")),
        "smoothstep": (S.line(8, "a"), S.ramp(RAMP, 0, k, "b", order=1), S.arc(RADIUS, "c", angle_deg=40),
                       S.ramp(RAMP, k, 0, "d", order=1), S.line(8, "e")),
    }[kind]
    return S.Profile(pieces, start=start, heading_deg=heading)


def build(kind: str, sweep: str, edge: float = 0.1, rotation: int | None = 1, **options) -> S.SyntheticMesh:
    profile = fillet(kind)
    if sweep == "extrude":
        return S.extrude(profile, 4.0, edge, rotation=rotation, skew=0.3, **options)
    return S.revolve(profile, edge, sweep_deg=8.0, rotation=rotation, skew=0.3, **options)


def part_and_seams(mesh: S.SyntheticMesh, vertices: np.ndarray | None = None) -> tuple[Part, list[Curve]]:
    V = mesh.vertices if vertices is None else vertices
    part = Part(V, mesh.faces, mesh.face_group, mesh.group_names)
    seams = [Curve(f"{s.group_a}:{s.group_b}", "seam", s.vertices_a, V[s.vertices_a], s.closed, (s.group_a, s.group_b))
             for s in mesh.seams]
    return part, seams


def knee_beside_line(knee: float, k: float = 0.2, coarse: float = 0.4, fine: float = 0.05,
                     width: float = 4.0) -> tuple[Part, Curve]:
    """An extruded plane curve: a line meshed at ``coarse`` edges, then, meshed at ``fine`` edges (a
    patch finer than the part it joins), a curve of curvature k s^2 / (s^2 + knee^2) for 5 mm (s from
    the seam). Its curvature and curvature rate both vanish at s = 0, so the join is G3 by
    construction, but the curvature reaches k / 2 within ``knee`` of the seam. The coarse row is zipped
    onto the fine one (blend_mesh.zip_rows), so the seam has no T-junctions."""
    from surfcheck.blend_mesh import grid_triangles, zip_rows

    s_a = np.linspace(-8.0, 0.0, int(round(8.0 / coarse)) + 1)
    s_b = np.linspace(0.0, 5.0, int(round(5.0 / fine)) + 1)[1:]
    s = np.concatenate([s_a, s_b])
    dense = np.linspace(s[0], s[-1], 40 * (len(s) - 1) + 1)  # theta' = kappa, (x, y)' = (cos, sin) theta
    kappa = k * np.where(dense > 0, dense**2 / (dense**2 + knee**2), 0.0)

    def integral(f: np.ndarray) -> np.ndarray:
        return np.concatenate([[0.0], np.cumsum(0.5 * (f[1:] + f[:-1]) * np.diff(dense))])

    theta = integral(kappa)
    x, y = np.interp(s, dense, integral(np.cos(theta))), np.interp(s, dense, integral(np.sin(theta)))
    z_a, z_b = (np.linspace(0.0, width, int(round(width / e)) + 1) for e in (coarse, fine))
    n_a, n_b = len(s_a), len(s_b)
    V = np.vstack([np.column_stack([np.repeat(x[:n_a], len(z_a)), np.repeat(y[:n_a], len(z_a)), np.tile(z_a, n_a)]),
                   np.column_stack([np.repeat(x[n_a:], len(z_b)), np.repeat(y[n_a:], len(z_b)), np.tile(z_b, n_b)])])
    first_b = n_a * len(z_a)
    seam = (n_a - 1) * len(z_a) + np.arange(len(z_a))
    faces_a = grid_triangles(0, n_a, len(z_a), False)
    faces_b = np.vstack([zip_rows(seam, z_a / width, first_b + np.arange(len(z_b)), z_b / width, False),
                         grid_triangles(first_b, n_b, len(z_b), False)])
    group = np.concatenate([np.zeros(len(faces_a), dtype=np.int64), np.ones(len(faces_b), dtype=np.int64)])
    part = Part(V, np.vstack([faces_a, faces_b]), group, ("line", "knee"))
    return part, Curve("line:knee", "seam", seam, V[seam], False, ("line", "knee"))
