"""STEP input and exact grading on B-rep edges, against parts built by the CAD kernel (OpenCASCADE
through OCP), written to STEP and read back: their truth follows from the construction.

- A 20 mm box: 6 faces, 12 edges, every edge a 90 degree kink between planes (G0, not G1).
- The box with one edge rounded by a rolling-ball fillet of radius 4 (BRepFilletAPI_MakeFillet): the
  fillet is a quarter cylinder of radius 4 tangent to both planes, so each fillet | plane seam is G1 with
  curvature jump 1/4 = 0.25 1/mm (circle against line) and curvature-rate jump 0 (both constant).
- The box with one edge chamfered at distance 3 on both faces (BRepFilletAPI_MakeChamfer): the chamfer
  plane meets each face at 45 degrees (G0, not G1).
- A prism over a profile where a line runs tangentially into the arc of the ellipse x = a cos t,
  y = b sin t (a = 10, b = 5) at t0 = pi/4: the cross-section of the prism is the profile, so the
  line | ellipse seam is G1 with curvature jump k(t0) = a b / D^(3/2) and rate jump
  |dk/ds| = 3 a b (a^2 - b^2) sin t0 cos t0 / D^3, D = a^2 sin^2 t0 + b^2 cos^2 t0 (curvature of a
  parametrised plane curve, do Carmo 1-5), the curvature falling as t grows.
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
from OCP.BRepBuilderAPI import BRepBuilderAPI_MakeEdge, BRepBuilderAPI_MakeFace, BRepBuilderAPI_MakeWire
from OCP.BRepFilletAPI import BRepFilletAPI_MakeChamfer, BRepFilletAPI_MakeFillet
from OCP.BRepPrimAPI import BRepPrimAPI_MakeBox, BRepPrimAPI_MakePrism
from OCP.GC import GC_MakeArcOfEllipse, GC_MakeSegment
from OCP.GeomAbs import GeomAbs_Plane
from OCP.gp import gp_Ax2, gp_Dir, gp_Elips, gp_Pnt, gp_Vec
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
from surfcheck.review.agreement import DIFFERS, compare_grades
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
    for name, shape in (("box", box), ("fillet", fillet.Shape()), ("chamfer", chamfer.Shape()),
                        ("ellipse", _line_into_ellipse_prism())):
        paths[name] = folder / f"{name}.step"
        _write_step(shape, paths[name])
    return paths


A, B, T0 = 10.0, 5.0, np.pi / 4


def _line_into_ellipse_prism():
    """A prism 8 mm high over: a 4 mm line tangent to the ellipse at T0, the arc to t = pi/2, and lines
    back through the origin."""
    p0 = np.array([A * np.cos(T0), B * np.sin(T0), 0.0])
    tangent = np.array([-A * np.sin(T0), B * np.cos(T0), 0.0])
    start = p0 - 4.0 * tangent / np.linalg.norm(tangent)
    corners = [gp_Pnt(*map(float, p)) for p in (start, p0, (0, B, 0), (0, 0, 0), (start[0], 0, 0))]
    ellipse = gp_Elips(gp_Ax2(gp_Pnt(0, 0, 0), gp_Dir(0, 0, 1), gp_Dir(1, 0, 0)), A, B)
    curves = [GC_MakeSegment(corners[0], corners[1]).Value(), GC_MakeArcOfEllipse(ellipse, T0, np.pi / 2, True).Value()]
    curves += [GC_MakeSegment(corners[i], corners[(i + 1) % 5]).Value() for i in (2, 3, 4)]
    wire = BRepBuilderAPI_MakeWire()
    for curve in curves:
        wire.Add(BRepBuilderAPI_MakeEdge(curve).Edge())
    return BRepPrimAPI_MakePrism(BRepBuilderAPI_MakeFace(wire.Wire()).Face(), gp_Vec(0, 0, 8.0)).Shape()


def _special_face(loaded) -> str:
    """The group of the one face that is not a plane (the fillet, the ellipse) or, failing that, of the
    plane whose normal is not along an axis (the chamfer)."""
    surfaces = [(BRepAdaptor_Surface(face), name) for face, name in zip(loaded.brep.faces, loaded.brep.names)]
    curved = [name for surface, name in surfaces if surface.GetType() != GeomAbs_Plane]
    oblique = [name for surface, name in surfaces if surface.GetType() == GeomAbs_Plane
               and np.count_nonzero(np.abs(surface.Plane().Axis().Direction().Coord()) > 1e-9) > 1]
    assert len(curved) == 1 or (not curved and len(oblique) == 1)
    return (curved or oblique)[0]


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


def test_line_into_ellipse_reads_the_construction_curvature_and_rate(kernel_parts):
    loaded = read_part(kernel_parts["ellipse"])
    ellipse = _special_face(loaded)
    D = A**2 * np.sin(T0) ** 2 + B**2 * np.cos(T0) ** 2
    curvature = A * B / D**1.5
    rate = -3 * A * B * (A**2 - B**2) * np.sin(T0) * np.cos(T0) / D**3  # d k / d s as t grows
    tangent = [g for groups, g in _graded(loaded).items() if ellipse in groups and g.orders[1].max < 1.0]
    assert len(tangent) == 1
    grade = tangent[0]
    assert grade.achieved == 1  # G1; the curvature jumps
    side = grade.groups.index(ellipse)
    travel = 1 if side == 1 else -1  # from A into B: into the ellipse as t grows, or out of it
    for station in grade.stations:
        assert station.curvature[side] == pytest.approx(curvature, abs=1e-9)
        assert station.curvature[1 - side] == pytest.approx(0, abs=1e-12)
        assert station.rate[side] == pytest.approx(travel * rate, abs=1e-9)
        assert station.orders[2].value == pytest.approx(curvature, abs=1e-9)
        assert station.orders[3].value == pytest.approx(abs(rate), abs=1e-9)


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


@pytest.mark.parametrize("name", ["box", "chamfer", "fillet", "ellipse"])
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


def test_the_review_of_a_step_part_sets_the_exact_grades_beside_the_mesh(kernel_parts, tmp_path):
    # the rolling-ball fillet's two seams (face-3 the fillet): G1 with a curvature jump of 1/r by
    # construction. The page draws the tessellation and sets the exact grades beside it; the mesh may
    # leave an order not resolved, but never decides it against the exact grade.
    runner = CliRunner()
    seams = ["--seam", "face-1:face-3", "--seam", "face-3:face-6"]
    done = runner.invoke(app, ["grade", str(kernel_parts["fillet"]), *seams, "--deflection", "0.01", "--report",
                               str(tmp_path / "review"), "--json"])
    assert done.exit_code == 0, done.output
    printed = json.loads(done.stdout)
    exact = json.loads((tmp_path / "review" / "exact.json").read_text())
    assert {s["method"] for s in printed["seams"]} == {"exact B-rep"} and exact["seams"] == printed["seams"]
    drawn = json.loads((tmp_path / "review" / "result.json").read_text())
    assert {s["method"] for s in drawn["seams"]} == {"mesh"}
    rows = compare_grades(exact, drawn)
    assert len(rows) == 2 * 4 and {r.seam for r in rows} == {s["id"] for s in exact["seams"]}
    for row in rows:
        if row.order == "G2":
            assert row.exact == pytest.approx(1.0 / RADIUS, rel=1e-9)
        assert row.reading in ("agrees", "mesh not resolved"), row  # at 0.01 mm the values agree within U
    page = (tmp_path / "review" / "index.html").read_text()
    beside = page[page.index('id="agreement"'):page.index('id="part"')]
    assert beside.count("<td>face-1 | face-3</td>") == 4 and "exact.json" in beside


def test_an_order_agrees_within_the_expanded_uncertainty_of_the_difference():
    # JCGM 100:2008, 5.1: u(a - b)^2 = u(a)^2 + u(b)^2 for independent estimates; k = 2
    def document(value, u, status):
        order = {"value": value, "uncertainty": u, "status": status, "unit": "deg"}
        return {"tolerance": {"coverage": 2.0}, "seams": [{"id": "s", "groups": ["a", "b"], "orders": {"G1": order}}]}

    exact = document(0.0, 0.03, "ok")
    assert compare_grades(exact, document(0.099, 0.04, "ok"))[0].reading == "agrees"  # 2 * 0.05 = 0.1
    assert compare_grades(exact, document(0.101, 0.04, "ok"))[0].reading == DIFFERS
    assert compare_grades(exact, document(0.05, 0.04, "fail"))[0].reading == DIFFERS  # decided against it
    assert compare_grades(exact, document(0.4, None, "not resolved"))[0].reading == "mesh not resolved"


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
