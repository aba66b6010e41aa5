"""Tessellation of a B-rep: the kernel's BRepMesh_IncrementalMesh triangulates every face within a
chordal deflection (largest distance between a triangle and its surface) and an angular deflection;
the faces' triangles become one mesh with one group per B-rep face.

The kernel discretises each edge once and both faces beside it take those nodes, so the copies of a
shared edge's nodes coincide exactly and welding them (io) makes every B-rep edge a welded seam.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from OCP.Bnd import Bnd_Box
from OCP.BRep import BRep_Tool
from OCP.BRepBndLib import BRepBndLib
from OCP.BRepMesh import BRepMesh_IncrementalMesh
from OCP.TopAbs import TopAbs_REVERSED
from OCP.TopLoc import TopLoc_Location

from surfcheck.cad.kernel import silenced
from surfcheck.cad.step import Brep
from surfcheck.errors import InputError

DEFLECTION_RELATIVE = 1e-3  # default chordal deflection, of the bounding-box diagonal; common practice, from memory
DEFLECTION_CAP = 0.05  # ... and at most this, in the shape's length unit (mm); common practice, from memory
ANGULAR_DEFLECTION = 0.2  # radians between neighbouring triangle normals at most; common practice, from memory


@dataclass
class Tessellation:
    """The faces' triangles on one vertex array (not yet welded), the B-rep face of each triangle and
    the face names."""

    vertices: np.ndarray
    faces: np.ndarray
    face_group: np.ndarray
    group_names: list[str]
    deflection: float


def diagonal(brep: Brep) -> float:
    """Length of the bounding-box diagonal of the shape."""
    box = Bnd_Box()
    BRepBndLib.Add_s(brep.shape, box)
    lo, hi = np.array(box.CornerMin().Coord()), np.array(box.CornerMax().Coord())
    return float(np.linalg.norm(hi - lo))


def default_deflection(brep: Brep) -> float:
    """DEFLECTION_RELATIVE of the bounding-box diagonal, at most DEFLECTION_CAP."""
    return min(DEFLECTION_RELATIVE * diagonal(brep), DEFLECTION_CAP)


def tessellate(brep: Brep, deflection: float | None = None) -> Tessellation:
    """Triangulate every face of a B-rep within a chordal deflection.

    Parameters
    ----------
    brep : Brep
        The shape and its faces (step.read_step).
    deflection : float, optional
        Largest distance between a triangle and its surface, in the shape's length unit (default:
        default_deflection).

    Returns
    -------
    Tessellation
        Triangles oriented along each face's outward normal, one group per face.
    """
    if deflection is None:
        deflection = default_deflection(brep)
    if not (np.isfinite(deflection) and deflection > 0):
        raise InputError(f"--deflection must be a positive length, not {deflection!r}")
    with silenced():
        BRepMesh_IncrementalMesh(brep.shape, float(deflection), False, ANGULAR_DEFLECTION, True)
    vertices, faces, groups = [], [], []
    offset = 0
    for number, face in enumerate(brep.faces):
        location = TopLoc_Location()
        triangulation = BRep_Tool.Triangulation_s(face, location)
        if triangulation is None or triangulation.NbTriangles() == 0:
            raise InputError(f"{brep.source}: face {brep.names[number]} could not be tessellated")
        moved = location.Transformation()
        nodes = np.array([triangulation.Node(i).Transformed(moved).Coord()
                          for i in range(1, triangulation.NbNodes() + 1)])
        triangles = np.array([triangulation.Triangle(i).Get() for i in range(1, triangulation.NbTriangles() + 1)],
                             dtype=np.int64) - 1
        if face.Orientation() == TopAbs_REVERSED:
            triangles = triangles[:, ::-1]
        vertices.append(nodes)
        faces.append(triangles + offset)
        groups.append(np.full(len(triangles), number, dtype=np.int64))
        offset += len(nodes)
    return Tessellation(np.vstack(vertices), np.vstack(faces), np.concatenate(groups), list(brep.names),
                        float(deflection))
