"""STEP input and exact grading on B-rep edges, against parts built by the CAD kernel (OpenCASCADE
through OCP), written to STEP and read back: their truth follows from the construction.

- A 20 mm box: 6 faces, 12 edges, every edge a 90 degree kink between planes (G0, not G1).
- The box with one edge rounded by a rolling-ball fillet of radius 4 (BRepFilletAPI_MakeFillet): the
  fillet is a quarter cylinder of radius 4 tangent to both planes, so each fillet | plane seam is G1 with
  curvature jump 1/4 = 0.25 1/mm (circle against line) and curvature-rate jump 0 (both constant).
- The box with one edge chamfered at distance 3 on both faces (BRepFilletAPI_MakeChamfer): the chamfer
  plane meets each face at 45 degrees (G0, not G1).
Face and edge counts follow Euler's polyhedron formula V - E + F = 2 (box: 8 - 12 + 6; rounding or
chamfering one edge adds a face, three edges and two vertices: 10 - 15 + 7).
"""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys

import jsonschema
import numpy as np
import pytest
import sympy
from OCP.BRepAdaptor import BRepAdaptor_Surface
from OCP.BRepFilletAPI import BRepFilletAPI_MakeChamfer, BRepFilletAPI_MakeFillet
from OCP.BRepPrimAPI import BRepPrimAPI_MakeBox
from OCP.GeomAbs import GeomAbs_Plane
from OCP.STEPControl import STEPControl_AsIs, STEPControl_Writer
from OCP.TopAbs import TopAbs_EDGE
from OCP.TopExp import TopExp_Explorer
from OCP.TopoDS import TopoDS
from typer.testing import CliRunner

from surfcheck.cad.kernel import silenced
from surfcheck.cad.edges import evaluate_edge, shared_edges
from surfcheck.cli import app
from surfcheck.geometry.normalsection import normal_section
from surfcheck.grading.exact import grade_brep
from surfcheck.grading.tolerances import load_profile
from surfcheck.errors import InputError
from surfcheck.io import read_part
from surfcheck.seams import SeamIndex
from tests.fixtures.grade_schema import grade_document_schema

SIDE = 20.0
RADIUS = 4.0
CHAMFER = 3.0


def _write_step(shape, path) -> None:
    writer = STEPControl_Writer()
    with silenced():
        writer.Transfer(shape, STEPControl_AsIs)
        writer.Write(str(path))


@pytest.fixture(scope="module")
def kernel_parts(tmp_path_factory):
    """box.step, fillet.step (one edge rounded, r = 4) and chamfer.step (one edge, 3 x 3)."""
    folder = tmp_path_factory.mktemp("kernel")
    box = BRepPrimAPI_MakeBox(SIDE, SIDE, SIDE).Shape()
    edge = TopoDS.Edge(TopExp_Explorer(box, TopAbs_EDGE).Current())
    fillet = BRepFilletAPI_MakeFillet(box)
    fillet.Add(RADIUS, edge)
    chamfer = BRepFilletAPI_MakeChamfer(box)
    chamfer.Add(CHAMFER, edge)
    paths = {}
    for name, shape in (("box", box), ("fillet", fillet.Shape()), ("chamfer", chamfer.Shape())):
        paths[name] = folder / f"{name}.step"
        _write_step(shape, paths[name])
    return paths


def _special_face(loaded) -> str:
    """The group of the one face that is not a plane (the fillet) or, failing that, the one plane whose
    normal is not along an axis (the chamfer)."""
    for face, name in zip(loaded.brep.faces, loaded.brep.names):
        surface = BRepAdaptor_Surface(face)
        if surface.GetType() != GeomAbs_Plane:
            return name
        normal = np.array(surface.Plane().Axis().Direction().Coord())
        if np.count_nonzero(np.abs(normal) > 1e-9) > 1:
            return name
    raise AssertionError("no fillet or chamfer face")


def _graded(loaded):
    seams = SeamIndex(loaded.part).find("all")
    return {tuple(g.groups): g for g in grade_brep(loaded.part, loaded.brep, seams, load_profile("general")).grades}


@pytest.mark.parametrize("name, faces, edges", [("box", 6, 12), ("fillet", 7, 15), ("chamfer", 7, 15)])
def test_groups_are_faces_and_seams_are_welded_edges(kernel_parts, name, faces, edges):
    # Euler V - E + F = 2 gives the counts; every B-rep edge is shared by two faces of the closed solid
    loaded = read_part(kernel_parts[name])
    assert loaded.part.group_names == tuple(f"face-{i}" for i in range(1, faces + 1))
    assert len(shared_edges(loaded.brep)) == edges
    index = SeamIndex(loaded.part)
    assert index.loops == []  # welded: a closed surface has no boundary
    assert len(index.seams) == edges
    assert all(len(seam.groups) == 2 for seam in index.seams)
    assert loaded.merged_vertices > 0


def test_faces_take_their_step_entity_names(kernel_parts, tmp_path):
    # ISO 10303-42: ADVANCED_FACE's first attribute is its name; named faces become groups of that name,
    # unnamed ones stay face-N (N in the kernel's face order)
    text = kernel_parts["fillet"].read_text()
    named = text.replace("ADVANCED_FACE('',", "ADVANCED_FACE('lid',", 1)
    assert named != text
    path = tmp_path / "named.stp"
    path.write_text(named)
    names = read_part(path).part.group_names
    assert names.count("lid") == 1 and len(names) == 7
    assert all(name == f"face-{i}" for i, name in enumerate(names, start=1) if name != "lid")


def test_step_coordinates_are_millimetres(kernel_parts):
    with pytest.raises(InputError, match="mm"):
        read_part(kernel_parts["box"], units="in")


def test_deflection_refines_the_tessellation(kernel_parts):
    coarse = read_part(kernel_parts["fillet"], deflection=0.05).part
    fine = read_part(kernel_parts["fillet"], deflection=0.002).part
    assert fine.n_vertices > coarse.n_vertices
    # the chordal deflection bounds the distance of the fillet's vertices from the cylinder r = 4 about
    # the filleted edge (every triangle vertex lies on the surface; construction)
    axis_point = np.array([RADIUS, RADIUS])
    group = fine.group_index(_special_face(read_part(kernel_parts["fillet"])))
    on_fillet = np.unique(fine.faces[fine.face_group == group])
    distance = np.linalg.norm(fine.vertices[on_fillet][:, :2] - axis_point, axis=1)
    assert np.allclose(distance, RADIUS, atol=1e-9)


def test_fillet_is_g1_with_the_construction_curvature_jump(kernel_parts):
    loaded = read_part(kernel_parts["fillet"])
    fillet = _special_face(loaded)
    tangent = {groups: g for groups, g in _graded(loaded).items() if fillet in groups and g.orders[1].max < 1.0}
    assert len(tangent) == 2  # the fillet meets its two planes tangentially (rolling ball)
    for grade in tangent.values():
        assert grade.method == "exact B-rep"
        assert grade.achieved == 1  # G1, the curvature jumps
        assert grade.orders[0].max < 1e-9
        assert grade.orders[1].max < 1e-6  # degrees
        jumps = np.array([s.orders[2].value for s in grade.stations])
        assert np.allclose(jumps, 1 / RADIUS, atol=1e-6)  # circle r = 4 against a line
        fillet_side = grade.groups.index(fillet)
        assert np.allclose([s.curvature[fillet_side] for s in grade.stations], 1 / RADIUS, atol=1e-6)  # convex: +
        assert np.allclose([s.orders[3].value for s in grade.stations], 0, atol=1e-6)  # constant curvatures


@pytest.mark.parametrize("name, angle", [("chamfer", 45.0), ("box", 90.0)])
def test_kinks_read_the_construction_angle(kernel_parts, name, angle):
    loaded = read_part(kernel_parts[name])
    grades = _graded(loaded)
    if name == "chamfer":
        special = _special_face(loaded)
        chosen = [g for groups, g in grades.items() if special in groups and g.length == pytest.approx(SIDE)]
        assert len(chosen) == 2  # the chamfer plane against the two faces of the cut edge
    else:
        chosen = list(grades.values())
        assert len(chosen) == 12
    for grade in chosen:
        assert grade.achieved == 0  # G0, not G1
        values = np.array([s.orders[1].value for s in grade.stations])
        assert np.allclose(values, angle, atol=1e-6)
        assert grade.orders[0].max < 1e-9


@pytest.mark.parametrize("name", ["box", "chamfer", "fillet"])
def test_directions_across_edges_run_from_a_into_b(kernel_parts, name):
    # Construction: each part is a convex solid. Both directions are normal to the edge and tangent to
    # their face, so they lie in the plane normal to the edge with the two normals, turned from each other
    # by the angle between the faces: continuing face A past the edge leaves through face B's outward
    # side (out . n_B = sin angle) and enters B turned by that angle (out . in = cos angle).
    loaded = read_part(kernel_parts[name])
    for edge in shared_edges(loaded.brep):
        at = evaluate_edge(loaded.brep, edge, np.array([0.3 * edge.length]))
        out_of_a, into_b = at.across[:, 0]
        normal_a, normal_b = at.normals[:, 0]
        angle = float(at.angle[0])
        assert abs(out_of_a @ normal_a) < 1e-9 and abs(into_b @ normal_b) < 1e-9
        assert out_of_a @ normal_b == pytest.approx(np.sin(angle), abs=1e-9)
        assert -(into_b @ normal_a) == pytest.approx(np.sin(angle), abs=1e-9)
        assert out_of_a @ into_b == pytest.approx(np.cos(angle), abs=1e-9)


def test_cli_grades_step_exactly_by_default_and_the_mesh_on_request(kernel_parts):
    runner = CliRunner()
    exact = runner.invoke(app, ["grade", str(kernel_parts["fillet"]), "--seam", "all", "--json"])
    assert exact.exit_code == 0, exact.output
    document = json.loads(exact.stdout)
    jsonschema.validate(document, grade_document_schema())  # docs/grade.schema.json, draft 2020-12
    assert {s["method"] for s in document["seams"]} == {"exact B-rep"}
    assert document["parameters"]["method"] == "exact B-rep"
    assert sorted(s["achieved"] for s in document["seams"]) == [0] * 13 + [1, 1]
    mesh = runner.invoke(app, ["grade", str(kernel_parts["fillet"]), "--seam", "all", "--method", "mesh",
                               "--deflection", "0.01", "--json"])
    assert mesh.exit_code == 0, mesh.output
    meshed = json.loads(mesh.stdout)
    jsonschema.validate(meshed, grade_document_schema())
    assert {s["method"] for s in meshed["seams"]} == {"mesh"}
    assert meshed["parameters"]["deflection"] == 0.01


@pytest.mark.parametrize("content", [b"garbage, not a STEP file\n", b"ISO-10303-21;\nHEADER;\n", None])
def test_bad_step_exits_2_with_one_line(kernel_parts, tmp_path, content):
    path = tmp_path / "bad.step"
    if content is None:  # a real STEP file cut in half
        data = kernel_parts["fillet"].read_bytes()
        content = data[: len(data) // 2]
    path.write_bytes(content)
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    done = subprocess.run([sys.executable, "-m", "surfcheck", "grade", str(path), "--seam", "all"],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and "Traceback" not in done.stderr
    assert done.stdout == ""
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before


def test_normal_section_matches_a_plane_curve():
    # Reference: the curvature of the plane curve z = g(x), k = -g'' / (1 + g'^2)^(3/2) (sign: positive
    # where it bends away from the normal (-g', 1)), and dk/ds = (dk/dx) / sqrt(1 + g'^2) (calculus of
    # plane curves, do Carmo 1-5). The surface z = f(x, y), f even in y, has its normal in the plane
    # y = 0 along the curve y = 0, which is therefore its normal section there; a non-linear
    # parametrisation (x, y) = (u + 0.2 u^2 + 0.1 v^2, v (1 + 0.3 u)) keeps v = 0 on it and exercises
    # every term of the derivation.
    u, v, x = sympy.symbols("u v x")
    f = 0.4 * x**2 + 0.3 * x**3 + 0.5 * sympy.Symbol("y") ** 2 - 0.2 * x * sympy.Symbol("y") ** 2
    X = u + 0.2 * u**2 + 0.1 * v**2
    Y = v * (1 + 0.3 * u)
    S = sympy.Matrix([X, Y, f.subs({x: X, sympy.Symbol("y"): Y})])
    u0 = 0.35
    point = {u: u0, v: 0}
    keys = {"u": (u,), "v": (v,), "uu": (u, u), "uv": (u, v), "vv": (v, v), "uuu": (u, u, u),
            "uuv": (u, u, v), "uvv": (u, v, v), "vvv": (v, v, v)}
    derivatives = {k: np.array(sympy.diff(S, *d).subs(point), dtype=float).reshape(3) for k, d in keys.items()}
    normal = np.cross(derivatives["u"], derivatives["v"])
    normal /= np.linalg.norm(normal)
    direction = derivatives["u"] / np.linalg.norm(derivatives["u"])
    curvature, rate = normal_section(derivatives, normal, direction)
    g = f.subs(sympy.Symbol("y"), 0)
    k = -sympy.diff(g, x, 2) / (1 + sympy.diff(g, x) ** 2) ** sympy.Rational(3, 2)
    dk = sympy.diff(k, x) / sympy.sqrt(1 + sympy.diff(g, x) ** 2)
    x0 = float(X.subs(point))
    assert normal[2] > 0
    assert curvature == pytest.approx(float(k.subs(x, x0)), rel=1e-12)
    assert rate == pytest.approx(float(dk.subs(x, x0)), rel=1e-10)
    backwards = normal_section(derivatives, normal, -direction)
    assert backwards[0] == pytest.approx(curvature, rel=1e-12) and backwards[1] == pytest.approx(-rate, rel=1e-10)
