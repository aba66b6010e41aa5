"""The sample housing as a B-rep built with the CAD kernel, written as STEP (ISO 10303-21).

The same shell as the mesh housing (scenario.py), with each joint of its profile made to a known class
by construction (scenario.DESIGNED), and the profile extruded along the shell's length:

- flange -> side-wall: a sharp corner of 90 degrees (G0 only);
- side-wall -> edge-fillet -> top: a circular arc of radius FILLET_RADIUS (G1: curvature jumps to 1/r);
- top -> front-blend -> front-wall: a quintic Bezier curve whose first three and last three control
  points lie on the lines it joins (G2: zero end curvature; the fourth point off the line gives a
  curvature-rate jump, so not G3);
- front-wall -> lip-blend -> underside: a degree-7 Bezier curve with four control points on each line
  (G3: end curvature and its rate are zero).

By the Bernstein form of a Bezier curve's derivatives (Farin, Curves and Surfaces for CAGD, 5th ed.,
2002, section 5.3), the derivatives of order r at an end depend only on the first r + 1 control points,
so collinear end points give zero curvature (r = 2) and zero curvature rate (r = 3) there. Each face is
named after its profile piece in the STEP file (the name of its ADVANCED_FACE entity).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from OCP.BRepAdaptor import BRepAdaptor_Surface
from OCP.BRepBuilderAPI import BRepBuilderAPI_MakeEdge, BRepBuilderAPI_MakeWire
from OCP.BRepPrimAPI import BRepPrimAPI_MakePrism
from OCP.BRepTools import BRepTools
from OCP.GC import GC_MakeArcOfCircle, GC_MakeSegment
from OCP.Geom import Geom_BezierCurve
from OCP.gp import gp_Pnt, gp_Vec
from OCP.IFSelect import IFSelect_RetDone
from OCP.OCP.collections import Array1_gp_Pnt
from OCP.STEPConstruct import STEPConstruct
from OCP.STEPControl import STEPControl_AsIs, STEPControl_Writer
from OCP.TCollection import TCollection_HAsciiString
from OCP.TopoDS import TopoDS_Shape

from surfcheck.cad.kernel import silenced
from surfcheck.cad.step import faces_of

FILLET_RADIUS = 6.0  # mm, as the mesh housing's edge fillet
DEPTH = 16.0  # mm of extrusion
BLEND_LEG = 9.0  # mm from each blend's end to the corner of the lines it joins

def _point(xy) -> gp_Pnt:
    return gp_Pnt(float(xy[0]), float(xy[1]), 0.0)


def _bezier(points: np.ndarray):
    poles = Array1_gp_Pnt(1, len(points))
    for i, p in enumerate(points, start=1):
        poles.SetValue(i, _point(p))
    return Geom_BezierCurve(poles)


def corner_bezier(corner, into, out_of, leg: float, on_each_line: int) -> np.ndarray:
    """Control points of a Bezier blend round the corner of two lines: ``on_each_line`` points on the
    incoming line (direction ``into``) ending ``leg`` before the corner, as many on the outgoing line
    (direction ``out_of``) starting ``leg`` after it, evenly spaced over the outer two thirds of each leg."""
    corner, into, out_of = (np.asarray(v, float) for v in (corner, into, out_of))
    steps = np.linspace(leg, leg / 3.0, on_each_line)
    return np.vstack([corner - s * into for s in steps] + [corner + s * out_of for s in steps[::-1]])


def _curve_middle(curve) -> np.ndarray:
    """The point at the middle of a curve's parameter range, in the profile plane."""
    p = curve.Value(0.5 * (curve.FirstParameter() + curve.LastParameter()))
    return np.array([p.X(), p.Y()])


def _face_middle(face) -> np.ndarray:
    """The point of a face's surface at the middle of its parameter bounds."""
    u0, u1, v0, v1 = BRepTools.UVBounds_s(face)
    p = BRepAdaptor_Surface(face).Value(0.5 * (u0 + u1), 0.5 * (v0 + v1))
    return np.array([p.X(), p.Y(), p.Z()])


def housing_profile_curves() -> list[tuple[str, object]]:
    """The profile's pieces in order as (face name, kernel curve), in the z = 0 plane."""
    r = FILLET_RADIUS
    wall_top = np.array([12.0, 14.0])
    top_corner, lip_corner = np.array([-30.0, 20.0]), np.array([-30.0, -10.0])
    west, south, east = (-1.0, 0.0), (0.0, -1.0), (1.0, 0.0)
    front = corner_bezier(top_corner, west, south, BLEND_LEG, 3)
    lip = corner_bezier(lip_corner, south, east, BLEND_LEG, 4)
    arc_mid = wall_top + r * np.array([-1 + np.cos(np.pi / 4), np.sin(np.pi / 4)])
    return [
        ("flange", GC_MakeSegment(_point((24.0, 0.0)), _point((12.0, 0.0))).Value()),
        ("side-wall", GC_MakeSegment(_point((12.0, 0.0)), _point(wall_top)).Value()),
        ("edge-fillet", GC_MakeArcOfCircle(_point(wall_top), _point(arc_mid), _point((6.0, 20.0))).Value()),
        ("top", GC_MakeSegment(_point((6.0, 20.0)), _point(front[0])).Value()),
        ("front-blend", _bezier(front)),
        ("front-wall", GC_MakeSegment(_point(front[-1]), _point(lip[0])).Value()),
        ("lip-blend", _bezier(lip)),
        ("underside", GC_MakeSegment(_point(lip[-1]), _point(lip[-1] + (10.0, 0.0))).Value()),
    ]


def housing_shape() -> tuple[TopoDS_Shape, list[str]]:
    """The shell: the profile's wire extruded DEPTH along z; its faces' names in the kernel's face order."""
    pieces = housing_profile_curves()
    wire = BRepBuilderAPI_MakeWire()
    for _, curve in pieces:
        wire.Add(BRepBuilderAPI_MakeEdge(curve).Edge())
    shape = BRepPrimAPI_MakePrism(wire.Wire(), gp_Vec(0.0, 0.0, DEPTH)).Shape()
    middles = np.array([_curve_middle(curve) for _, curve in pieces])
    names = [pieces[int(np.argmin(np.linalg.norm(middles - _face_middle(face)[:2], axis=1)))][0]
             for face in faces_of(shape)]
    return shape, names


def write_housing_step(path: str | Path) -> Path:
    """Write the housing to ``path`` as STEP with each face named after its profile piece; returns the path."""
    shape, names = housing_shape()
    writer = STEPControl_Writer()
    path = Path(path)
    with silenced():
        writer.Transfer(shape, STEPControl_AsIs)
        found = writer.WS().TransferWriter().FinderProcess()
        for face, name in zip(faces_of(shape), names):
            STEPConstruct.FindEntity_s(found, face).SetName(TCollection_HAsciiString(name))
        if writer.Write(str(path)) != IFSelect_RetDone:
            raise OSError(f"{path}: the kernel could not write the STEP file")
    return path
