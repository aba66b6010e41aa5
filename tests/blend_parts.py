"""Small grouped parts for the picture and review tests: a plane, a blend of peak curvature 1/R, a plane.

The circular fillet is a quarter arc of radius R between two planes (G1: the curvature jumps from 0 to
1/R at both tangent lines); the smooth-step blend turns the same quarter turn with its curvature
rising from 0 to 1/R and back by C-infinity smooth steps (G3 and better at every joint). Both are
built by surfcheck.shapes from their curvature along arc length and extruded.
"""

from __future__ import annotations

import numpy as np

from surfcheck.part import Part
from surfcheck.shapes import Profile, SyntheticMesh, arc, extrude, line, ramp

R = 2.0  # mm, fillet radius and the smooth-step blend's smallest radius of curvature
FLAT = 6.0  # mm of plane on each side
DEPTH = 6.0  # mm of extrusion
EDGE = 0.25  # mm


def blend_mesh(kind: str) -> SyntheticMesh:
    """``kind`` "fillet" or "smooth-step"; groups a, the blend piece(s), b."""
    if kind == "fillet":
        pieces = (line(FLAT, "a"), arc(R, "blend", angle_deg=90.0), line(FLAT, "b"))
    else:
        quarter = np.pi * R / 2.0  # each ramp turns (1/R) L / 2: two of them a quarter turn
        pieces = (line(FLAT, "a"), ramp(quarter, 0.0, 1.0 / R, "blend-in"), ramp(quarter, 1.0 / R, 0.0, "blend-out"),
                  line(FLAT, "b"))
    return extrude(Profile(pieces, start=(0.0, 0.0), heading_deg=0.0), DEPTH, EDGE)


def blend_part(kind: str) -> Part:
    """The blend mesh as a Part, with one group for the blend (the smooth-step's two ramps merged)."""
    mesh = blend_mesh(kind)
    names = ["a", "blend", "b"]
    regroup = np.array([names.index("blend" if n.startswith("blend") else n) for n in mesh.group_names])
    return Part(mesh.vertices, mesh.faces, regroup[mesh.face_group], tuple(names), "mm", f"{kind}.obj")
