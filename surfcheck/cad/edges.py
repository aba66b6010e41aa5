"""The B-rep edges shared by two faces and the exact geometry of both faces along them.

At a station on an edge (parameter t of its 3D curve), each face's point is found through the edge's
curve on that face (its pcurve, BRep_Tool.CurveOnSurface; by projection of the 3D point onto the surface
where the edge is not same-parameter) and the surface is evaluated there with its derivatives up to third
order (BRepAdaptor_Surface.D3). From these, computed here and not by the kernel: each face's point and
outward unit normal (reversed on a face used TopAbs_REVERSED), the in-surface direction across the edge
(N x T for the edge as the face's wire runs it points into the face), and the curvature and curvature
rate of each face's normal section across the edge (geometry.normalsection, from the fundamental forms
and the third derivatives), travelled from face A into face B.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from OCP.BRep import BRep_Tool
from OCP.BRepAdaptor import BRepAdaptor_Curve, BRepAdaptor_Curve2d, BRepAdaptor_Surface
from OCP.GCPnts import GCPnts_AbscissaPoint
from OCP.GeomAPI import GeomAPI_ProjectPointOnSurf
from OCP.gp import gp_Pnt, gp_Vec
from OCP.TopAbs import TopAbs_EDGE, TopAbs_REVERSED
from OCP.TopExp import TopExp_Explorer
from OCP.TopoDS import TopoDS, TopoDS_Edge

from surfcheck.cad.step import Brep
from surfcheck.geometry.normalsection import normal_section

_DERIVATIVES = ("u", "v", "uu", "vv", "uv", "uuu", "vvv", "uuv", "uvv")


@dataclass(frozen=True, eq=False)
class SharedEdge:
    """An edge between two different faces: the faces' indices in Brep.faces and the edge as each
    face's wire uses it (its orientation there says on which side the face lies)."""

    faces: tuple[int, int]
    uses: tuple[TopoDS_Edge, TopoDS_Edge]

    @property
    def edge(self) -> TopoDS_Edge:
        return self.uses[0]

    @property
    def length(self) -> float:
        return GCPnts_AbscissaPoint.Length_s(BRepAdaptor_Curve(self.edge))

    def midpoint(self) -> np.ndarray:
        curve = BRepAdaptor_Curve(self.edge)
        return np.array(curve.Value(0.5 * (curve.FirstParameter() + curve.LastParameter())).Coord())

    def between(self, a: int, b: int) -> "SharedEdge":
        """The same edge with its faces in the order (a, b)."""
        if self.faces == (a, b):
            return self
        return SharedEdge((self.faces[1], self.faces[0]), (self.uses[1], self.uses[0]))


@dataclass(frozen=True)
class EdgeStations:
    """Both faces' exact geometry at stations along an edge, travelling across it from face A to B.

    Arrays over stations: ``s`` arc length along the edge, ``position`` (n, 3) the edge's point,
    ``points`` (2, n, 3) each face's point, ``normals`` (2, n, 3) unit outward normals, ``across`` (2, n, 3)
    the unit direction of travel (out of face A, into face B; tangent to each face, normal to the edge),
    ``curvature`` and ``rate`` (2, n) of each face's normal section in that direction."""

    s: np.ndarray
    position: np.ndarray
    points: np.ndarray
    normals: np.ndarray
    across: np.ndarray
    curvature: np.ndarray
    rate: np.ndarray

    @property
    def gap(self) -> np.ndarray:
        """Distance between the two faces' points, length."""
        return np.linalg.norm(self.points[1] - self.points[0], axis=-1)

    @property
    def angle(self) -> np.ndarray:
        """Angle between the two faces' unit normals, radians (atan2 of sine and cosine: exact near 0)."""
        a, b = self.normals
        return np.arctan2(np.linalg.norm(np.cross(a, b), axis=-1), np.einsum("ij,ij->i", a, b))


def shared_edges(brep: Brep) -> list[SharedEdge]:
    """Every non-degenerate edge used by exactly two different faces, in exploration order."""
    uses: dict[int, list[list[tuple[int, TopoDS_Edge]]]] = {}  # shape hash -> the uses of each edge
    for number, face in enumerate(brep.faces):
        explorer = TopExp_Explorer(face, TopAbs_EDGE)
        while explorer.More():
            edge = TopoDS.Edge(explorer.Current())
            if not BRep_Tool.Degenerated_s(edge):
                same_hash = uses.setdefault(hash(edge), [])
                match = next((group for group in same_hash if group[0][1].IsSame(edge)), None)
                if match is None:
                    same_hash.append(match := [])
                match.append((number, edge))
            explorer.Next()
    found = []
    for pair in (group for groups in uses.values() for group in groups):
        if len(pair) == 2 and pair[0][0] != pair[1][0]:
            found.append(SharedEdge((pair[0][0], pair[1][0]), (pair[0][1], pair[1][1])))
    return found


def evaluate_edge(brep: Brep, shared: SharedEdge, s: np.ndarray) -> EdgeStations:
    """Both faces' points, normals and normal-section curvature and rate at arc lengths ``s`` along
    the edge, from face A (``shared.faces[0]``) into face B.

    Parameters
    ----------
    brep : Brep
        The shape the edge belongs to.
    shared : SharedEdge
        The edge, with faces in the order (A, B).
    s : ndarray
        Arc lengths along the edge's 3D curve from its first parameter.

    Returns
    -------
    EdgeStations
        The exact geometry at every station (module docstring; geometry.normalsection for the section).
    """
    curve = BRepAdaptor_Curve(shared.edge)
    first = curve.FirstParameter()
    parameters = [GCPnts_AbscissaPoint(curve, float(x), first).Parameter() for x in s]
    position, tangent = [], []
    for t in parameters:
        p, v = gp_Pnt(), gp_Vec()
        curve.D1(t, p, v)
        position.append(p.Coord())
        tangent.append(v.Coord())
    position = np.array(position)
    tangent = np.array(tangent)
    tangent /= np.linalg.norm(tangent, axis=1, keepdims=True)
    sides = []
    for k, (face_index, use) in enumerate(zip(shared.faces, shared.uses)):
        face = brep.faces[face_index]
        points, derivatives = _face_jets(face, use, parameters, position)
        normal = np.cross(derivatives["u"], derivatives["v"])
        normal /= np.linalg.norm(normal, axis=1, keepdims=True)
        if face.Orientation() == TopAbs_REVERSED:
            normal = -normal
        # the face lies to the left of its wire's edges about the outward normal
        along = -tangent if use.Orientation() == TopAbs_REVERSED else tangent
        inward = np.cross(normal, along)
        inward /= np.linalg.norm(inward, axis=1, keepdims=True)
        travel = -inward if k == 0 else inward  # out of face A, into face B
        curvature, rate = normal_section(derivatives, normal, travel)
        sides.append((points, normal, travel, curvature, rate))
    return EdgeStations(np.asarray(s, dtype=float), position, *(np.stack(column) for column in zip(*sides)))


def _face_jets(face, use: TopoDS_Edge, parameters: list[float], position: np.ndarray):
    """Each station's surface point and partial derivatives (up to third order) on ``face``."""
    surface = BRepAdaptor_Surface(face)
    same = BRep_Tool.SameParameter_s(use)
    pcurve = BRepAdaptor_Curve2d(use, face) if same else None
    projector = None if same else GeomAPI_ProjectPointOnSurf()
    points, columns = [], {key: [] for key in _DERIVATIVES}
    for t, xyz in zip(parameters, position):
        if same:
            u, v = pcurve.Value(t).Coord()
        else:
            location = BRep_Tool.Surface_s(face)
            projector.Init(gp_Pnt(*xyz), location)
            u, v = projector.LowerDistanceParameters()
        p = gp_Pnt()
        vectors = [gp_Vec() for _ in _DERIVATIVES]
        surface.D3(u, v, p, *vectors)
        points.append(p.Coord())
        for key, vector in zip(_DERIVATIVES, vectors):
            columns[key].append(vector.Coord())
    return np.array(points), {key: np.array(value) for key, value in columns.items()}
