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
