"""Blend patches: correspondence, extensions, contact order at both seams, mesh, weld, checks, bad requests.

Contact is checked against the exact section jets of our test surfaces (blend_fixtures) with the
tolerances of the default ("general") profile: the patch's cross-boundary derivatives at t = 0 and
t = 1 (exact derivatives of the construction, themselves checked against finite differences) give its
tangent, normal-section curvature and curvature rate at each column.
"""

from __future__ import annotations

import igl
import numpy as np
import pytest
import trimesh

from tests.fixtures.blend_fixtures import CASES, Revolved, achieved_order, corner_b, offset_b, pair, plane_a
from surfcheck.blend.patch import build_blend, default_reaches, merge_with_patch
from surfcheck.blend.checks import crossing_pairs
from surfcheck.blend.correspondence import match_chains, point_at
from surfcheck.blend.extension import boundary_extension
from surfcheck.blend.mesh import zip_rows
from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.seams import Curve
from surfcheck.blend.steps import smooth_step

@pytest.mark.parametrize("case", sorted(CASES))
@pytest.mark.parametrize("order", [1, 2, 3])
@pytest.mark.parametrize("step", ["exp", "hermite", "rational"])
def test_blend_reaches_its_order_on_both_seams(case, order, step):
    # Reference: exact section jets of the test surfaces (line, circle, graph curvature formula; see
    # blend_fixtures); tolerances: the general profile (common practice, from memory).
    sheet_a, sheet_b, gap, closed = CASES[case]
    a, b = pair(sheet_a, sheet_b, gap, n_a=61, n_b=73, closed=closed, seed=order)
    blend = build_blend(a.part, a.chain, b.part, b.chain, order, step=step)
    assert blend.problems == ()
    grade_a, grade_b = achieved_order(blend, a, b)
    assert grade_a >= order and grade_b >= order


@pytest.mark.parametrize("order", [1, 2])
def test_hermite_step_of_order_k_gives_exactly_k_where_the_reach_points_are_off_the_other_side(order):
    # Reference: a C^k step's derivative k + 1 does not vanish at 0 (test_steps), so d^(k+1) P / dt^(k+1)
    # differs from the extension's by phi^(k+1)(0) (E_B - E_A)(0), which has a normal component when the
    # cylinders' radii differ: contact exactly G^k (exact jets: lines on both cylinders).
    a, b = pair(Revolved(5.0, 0.0), Revolved(7.0, 0.0), 10.0, closed=True, seed=11)
    blend = build_blend(a.part, a.chain, b.part, b.chain, order, step="hermite")
    assert achieved_order(blend, a, b) == (order, order)


@pytest.mark.parametrize("case,expected", [("cylinders of radius 5 and 7", (0, 0)), ("plane and cylinder", (0, 1))])
def test_linear_step_kinks_where_the_reach_point_is_off_the_tangent_plane(case, expected):
    # The linear step is only C^0: P_t(0) = S_A D_A + E_B(0) - E_A(0), off A's tangent plane whenever
    # B's reach point E_B(0) is, so G1 fails there (achieved 0). Between the cylinders both reach
    # points are off (radii 5 and 7); beside a plane, A's straight extension reaches the corner on B's
    # tangent line, so seam B keeps G1 (the de Casteljau case below) but not G2.
    sheet_a, sheet_b, gap, closed = CASES[case]
    a, b = pair(sheet_a, sheet_b, gap, closed=closed, seed=5)
    blend = build_blend(a.part, a.chain, b.part, b.chain, 2, step="linear")
    assert achieved_order(blend, a, b) == expected


def test_linear_step_between_planes_is_the_quadratic_bezier_of_the_corner():
    # Reference: de Casteljau's construction (Farin, Curves and Surfaces for CAGD, 5th ed., sec. 4.1):
    # (1 - t)[(1 - t) b0 + t b1] + t[(1 - t) b1 + t b2] is the quadratic Bezier curve of b0, b1, b2.
    # With reaches that reach the corner b1 of the two tangent lines, a linear-step blend of two planes
    # is that curve: tangent to both planes (G1, though the step is only C^0), not G2.
    sheet_a, sheet_b, gap, closed = CASES["planes at 40 degrees"]
    a, b = pair(sheet_a, sheet_b, gap)
    blend = build_blend(a.part, a.chain, b.part, b.chain, 1, step="linear")
    t = np.linspace(0.0, 1.0, 11)[:, None]
    s = blend.surface
    b0, b2 = s.side_a.p, s.side_b.p
    b1 = b0 + s.reach_a[:, None] * s.side_a.D
    np.testing.assert_allclose(b1, b2 + s.reach_b[:, None] * s.side_b.D, atol=1e-6)  # the corner
    corner = np.array([0.0, 5.0, 0.0])
    np.testing.assert_allclose(b1[:, 1:], np.broadcast_to(corner[1:], b1[:, 1:].shape), atol=1e-6)
    bezier = (1 - t)[..., None] * ((1 - t)[..., None] * b0 + t[..., None] * b1) + t[..., None] * (
        (1 - t)[..., None] * b1 + t[..., None] * b2)
    np.testing.assert_allclose(s.derivative(t), bezier, atol=1e-9)
    assert achieved_order(blend, a, b) == (1, 1)


@pytest.mark.parametrize("kind", ["exp", "hermite", "rational", "linear"])
def test_offset_step_is_the_graph_of_the_step(kind):
    # Reference: the one-dimensional blend of two functions, (1 - phi(y/g)) 0 + phi(y/g) h, i.e. the
    # step itself (steps.smooth_step, checked against sympy). Parallel planes z = 0 (y <= 0) and
    # z = h (y >= g): the default reach is g on both sides and every column is z = h phi(y / g).
    a, b = pair(plane_a(), offset_b(2.5, 6.0), 6.0, seed=None)
    blend = build_blend(a.part, a.chain, b.part, b.chain, 2, step=kind)
    s = blend.surface
    np.testing.assert_allclose(s.reach_a, 6.0, rtol=1e-6)
    np.testing.assert_allclose(s.reach_b, 6.0, rtol=1e-6)
    t = np.linspace(0.0, 1.0, 41)
    P = s.derivative(t[:, None])
    np.testing.assert_allclose(P[..., 1], 6.0 * t[:, None] * np.ones(P.shape[1]), atol=1e-6)
    np.testing.assert_allclose(P[..., 2], 2.5 * smooth_step(t, kind, 2)[:, None] * np.ones(P.shape[1]), atol=1e-6)


def test_default_reaches_reach_the_corner_open_a_u_turn_and_follow_a_step():
    # Geometry of the rule (docs/blend.md), exact by construction: symmetric 90-degree corner with legs
    # 3 -> reaches 3; U-turn between parallel plates 4 apart facing the same way -> reach = gap * sin^2(90)
    # = 4; offset step of run 5 -> reach 5.
    from surfcheck.blend.extension import Extension

    def ext(p, D):
        return Extension(np.array([p], float), np.array([D], float), np.array([[0.0, 0.0, 1.0]]), np.zeros((1, 0)))

    cases = [((0, 0, 0), (0, 1, 0), (0, 3, 3), (0, 0, -1), 3.0, 3.0),
             ((0, 0, 0), (0, 1, 0), (0, 0, 4), (0, 1, 0), 4.0, 4.0),
             ((0, 0, 0), (0, 1, 0), (0, 5, 2), (0, -1, 0), 5.0, 5.0)]
    for pa, da, pb, db, want_a, want_b in cases:
        reach_a, reach_b = default_reaches(ext(pa, da), ext(pb, db))
        assert reach_a[0] == pytest.approx(want_a) and reach_b[0] == pytest.approx(want_b)


def test_patch_derivatives_match_finite_differences():
    # Reference: central differences of the patch's own points (common practice; O(h^2) error).
    sheet_a, sheet_b, gap, closed = CASES["plane and parabolic sheet"]
    a, b = pair(sheet_a, sheet_b, gap, seed=2)
    s = build_blend(a.part, a.chain, b.part, b.chain, 3).surface
    h = 1e-4
    for t0 in (0.2, 0.5, 0.8):
        for n in (1, 2, 3):
            fd = (s.derivative(np.array(t0 + h), n - 1) - s.derivative(np.array(t0 - h), n - 1)) / (2 * h)
            exact = s.derivative(np.array(t0), n)
            np.testing.assert_allclose(exact, fd, rtol=1e-5, atol=1e-5 * np.abs(exact).max())


def test_extension_reproduces_the_cross_section_jet():
    # Reference: exact jets of the plane (0, 0), the circle of radius 12 (1/12, 0) and the parabola
    # (graph curvature formula, sympy); each side's cross direction points off the surface.
    for case in ("plane and cylinder", "plane and parabolic sheet"):
        sheet_a, sheet_b, gap, _ = CASES[case]
        a, b = pair(sheet_a, sheet_b, gap, seed=4)
        for side, sign in ((a, 1.0), (b, -1.0)):
            ext = boundary_extension(side.part, side.chain, 3)
            exact = side.section_at(side.chain.points[30])
            np.testing.assert_allclose(ext.D[30], sign * exact.d, atol=2e-3)
            np.testing.assert_allclose(ext.N[30], exact.n, atol=2e-3)
            kappa, rate = ext.coefficients[30]
            assert kappa == pytest.approx(exact.curvature, abs=2e-3)
            assert rate == pytest.approx(sign * exact.rate, abs=3e-3)  # d kappa / ds along D


def test_closed_chains_correspond_without_twist():
    # Reference: concentric circles: the least-twist map sends each angle to the same angle, whatever
    # start vertex and direction chain B has (exact geometry).
    angles = np.arange(40) * 2 * np.pi / 40
    circle = np.stack([np.cos(angles), np.sin(angles), np.zeros(40)], 1)
    other_angles = -(np.arange(57) + 0.3) * 2 * np.pi / 57 + 1.1  # reversed and started elsewhere
    other = np.stack([2 * np.cos(other_angles), 2 * np.sin(other_angles), np.ones(57)], 1)
    mapping = match_chains(circle, True, other, True)
    s = np.linspace(0.0, 0.99, 23)
    on_a, on_b = point_at(circle, True, s), point_at(other, True, mapping(s))
    np.testing.assert_allclose(np.arctan2(on_b[:, 1], on_b[:, 0]), np.arctan2(on_a[:, 1], on_a[:, 0]), atol=0.02)
    assert mapping.sign == -1


def test_open_chains_correspond_end_to_end():
    a = np.stack([np.linspace(0, 10, 11), np.zeros(11), np.zeros(11)], 1)
    b = np.stack([np.linspace(12, -1, 30), np.full(30, 3.0), np.zeros(30)], 1)  # reversed and longer
    mapping = match_chains(a, False, b, False)
    assert mapping.sign == -1 and mapping(np.array(0.0)) == pytest.approx(1.0)
    with pytest.raises(InputError):
        match_chains(a, False, b, True)


def test_patch_mesh_is_welded_and_consistently_oriented():
    # Reference: trimesh's winding-consistency and watertightness checks; exact chain points.
    sheet_a, sheet_b, gap, closed = CASES["cylinders of radius 5 and 7"]
    a, b = pair(sheet_a, sheet_b, gap, n_a=48, n_b=81, closed=closed, seed=9)
    blend = build_blend(a.part, a.chain, b.part, b.chain, 2)
    np.testing.assert_array_equal(blend.vertices[blend.row_a], a.chain.points)
    np.testing.assert_array_equal(blend.vertices[blend.row_b], b.chain.points)
    merged = merge_with_patch(a.part, blend, b.part)
    part = merged.part
    assert part.group_names == ("side_a", "blend", "side_b")
    assert part.n_vertices == a.part.n_vertices + b.part.n_vertices + len(blend.vertices) - 48 - 81
    mesh = trimesh.Trimesh(part.vertices, part.faces, process=False)
    assert mesh.is_winding_consistent
    assert len(trimesh.graph.connected_components(mesh.face_adjacency, nodes=np.arange(len(part.faces)))) == 1
    border = part.edges[part.edge_face_count == 1]
    assert not np.isin(border, np.concatenate([merged.seam_a.vertices, merged.seam_b.vertices])).all(axis=1).any()
    assert merged.seam_a.groups == ("side_a", "blend") and merged.seam_b.groups == ("blend", "side_b")
    # the patch faces beside chain A face the way side A's exact normal does (outward, radial)
    near_a = (part.face_group == 1) & np.isin(part.faces, merged.seam_a.vertices).any(axis=1)
    exact = np.array([a.section_at(p).n for p in part.vertices[part.faces[near_a, 0]]])
    assert np.all(np.sum(mesh.face_normals[near_a] * exact, axis=1) > 0.99)


def test_both_chains_on_one_part():
    # One part holding both sides as two groups: the merged part keeps its groups and adds the patch.
    sheet_a, sheet_b, gap, closed = CASES["plane and cylinder"]
    a, b = pair(sheet_a, sheet_b, gap, seed=3)
    n = a.part.n_vertices
    part = Part(np.vstack([a.part.vertices, b.part.vertices]), np.vstack([a.part.faces, b.part.faces + n]),
                np.r_[np.zeros(a.part.n_faces, int), np.ones(b.part.n_faces, int)], ("flange", "wall"))
    chain_a = Curve("chain-1", "chain", a.chain.vertices, a.chain.points, False, ("flange",))
    chain_b = Curve("chain-2", "chain", b.chain.vertices + n, b.chain.points, False, ("wall",))
    blend = build_blend(part, chain_a, part, chain_b, 2)
    merged = merge_with_patch(part, blend)
    assert merged.part.group_names == ("flange", "wall", "blend")
    assert merged.part.n_vertices == part.n_vertices + len(blend.vertices) - len(chain_a.vertices) - len(chain_b.vertices)
    assert merged.seam_b.groups == ("blend", "wall")
    assert achieved_order(blend, a, b) >= (2, 2)


def test_a_reach_too_long_for_the_gap_is_reported_with_its_reason():
    # A reach six times the run of an offset step overshoots: the section reaches back behind side A's
    # boundary (checked on the analytic patch as the independent reference).
    a, b = pair(plane_a(), offset_b(2.0, 5.0), 5.0)
    assert build_blend(a.part, a.chain, b.part, b.chain, 2).problems == ()
    a, b = pair(plane_a(), offset_b(4.0, 2.0), 2.0)
    blend = build_blend(a.part, a.chain, b.part, b.chain, 2, step="exp", reach=12.0)
    t = np.linspace(0.0, 1.0, 201)
    assert blend.surface.derivative(t[:, None])[..., 1].min() < -0.1  # y < 0: behind A's boundary
    assert any("leans back" in p and "reach is too long for the gap" in p for p in blend.problems)


def test_a_gap_too_short_for_its_turn_is_reported_with_its_reason():
    # A 150-degree turn across a 0.52 mm gap needs a bend of radius about 0.2 mm (the legs' inscribed
    # circle: leg * tan(15 deg) = 0.27 mm), under patch triangles as large as the sides' 0.28 mm.
    a, b = pair(plane_a(), corner_b(150, 1.0, 2.0), 2.0)
    blend = build_blend(a.part, a.chain, b.part, b.chain, 2, resolution=0.28)
    assert len(blend.problems) == 1 and "too short for the turn" in blend.problems[0]
    assert "bends too tightly" in blend.problems[0]
    assert "must turn 150 degrees" in blend.problems[0] and "\n" not in blend.problems[0]
    # by default the rows are a quarter of the chains' 0.33 mm edges apart (blend.MAX_ROW_REFINEMENT):
    # 0.4 rad per row, under the 0.5 rad per edge that a mesh can show
    assert build_blend(a.part, a.chain, b.part, b.chain, 2).problems == ()
    a, b = pair(plane_a(), corner_b(120, 2.0, 4.0), 4.0)
    assert build_blend(a.part, a.chain, b.part, b.chain, 2).problems == ()


def test_folded_faces_are_found():
    # Two triangles on an edge at a dihedral angle of 120 degrees between normals fold over; at 60
    # they do not (exact geometry).
    from surfcheck.blend.checks import folded_faces

    for angle, expected in ((120.0, 2), (60.0, 0)):
        c, s_ = np.cos(np.radians(angle)), np.sin(np.radians(angle))
        V = np.array([[0, 0, 0], [1, 0, 0], [0.5, 1, 0], [0.5, -c, -s_]], float)
        F = np.array([[0, 1, 2], [1, 0, 3]])
        assert len(folded_faces(V, F)) == expected


def test_crossing_pairs_match_libigl():
    # Reference: libigl's tri_tri_intersection_test_3d on random triangle pairs (coplanar cases aside).
    rng = np.random.default_rng(3)
    V = rng.uniform(0.0, 1.0, (600, 3))
    F = np.arange(600).reshape(-1, 3)
    found = {tuple(sorted(p)) for p in crossing_pairs(V, F, np.arange(len(F))).tolist()}
    expected = set()
    for i in range(len(F)):
        for j in range(i + 1, len(F)):
            hit, coplanar, *_ = igl.tri_tri_intersection_test_3d(*V[F[i]][:, None, :], *V[F[j]][:, None, :])
            if hit and not coplanar:
                expected.add((i, j))
    assert found == expected and len(expected) > 100


def test_zipped_rows_cover_both_rows_counter_clockwise():
    # Euler count for a strip: an open strip between rows of n and m vertices has n + m - 2 triangles,
    # a closed one n + m; every triangle is counter-clockwise in the (u, t) plane. A closed strip is
    # drawn as an annulus (angle 2 pi u, radius 1 + t), where counter-clockwise in (u, t) is clockwise.
    lower_u, upper_u = np.linspace(0, 1, 7), np.linspace(0, 1, 12)
    for closed in (False, True):
        lu, uu = (lower_u[:-1], upper_u[:-1]) if closed else (lower_u, upper_u)
        tri = zip_rows(np.arange(len(lu)), lu, len(lu) + np.arange(len(uu)), uu, closed)
        assert len(tri) == len(lu) + len(uu) - (0 if closed else 2)
        u, t = np.r_[lu, uu], np.r_[np.zeros(len(lu)), np.ones(len(uu))]
        xy = np.stack([(1 + t) * np.cos(2 * np.pi * u), (1 + t) * np.sin(2 * np.pi * u)], 1) if closed else np.stack([u, t], 1)
        e1, e2 = xy[tri[:, 1]] - xy[tri[:, 0]], xy[tri[:, 2]] - xy[tri[:, 0]]
        area = e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0]
        assert np.all(area < 0) if closed else np.all(area > 0)
        assert set(tri.ravel().tolist()) == set(range(len(u)))


@pytest.mark.parametrize(
    "request_",
    [
        dict(order=4), dict(order=0), dict(step="cubic"), dict(reach=-1.0), dict(same=True),
    ],
)
def test_bad_requests_are_one_line_input_errors(request_):
    sheet_a, sheet_b, gap, closed = CASES["plane and cylinder"]
    a, b = pair(sheet_a, sheet_b, gap)
    chain_b, part_b = (a.chain, a.part) if request_.pop("same", False) else (b.chain, b.part)
    with pytest.raises(InputError) as err:
        build_blend(a.part, a.chain, part_b, chain_b, **{"order": 2, **request_})
    assert "\n" not in str(err.value)


def test_an_unknown_chain_id_is_an_input_error():
    from surfcheck.seams import SeamIndex

    sheet_a, sheet_b, gap, closed = CASES["plane and cylinder"]
    a, _ = pair(sheet_a, sheet_b, gap)
    with pytest.raises(InputError, match="no seam, chain or loop"):
        SeamIndex(a.part).find("chain-99.1")


def test_chains_found_on_the_part_blend_like_hand_made_ones():
    # The part's own boundary chains (seams.boundary_chains) serve as well as the fixture's chain.
    from surfcheck.seams import boundary_chains

    sheet_a, sheet_b, gap, closed = CASES["plane and cylinder"]
    a, b = pair(sheet_a, sheet_b, gap, seed=8)

    def edge_chain(side):
        chains = boundary_chains(side.part)
        return max(chains, key=lambda c: np.isin(c.vertices, side.chain.vertices).sum())

    blend = build_blend(a.part, edge_chain(a), b.part, edge_chain(b), 2)
    assert blend.problems == () and achieved_order(blend, a, b) >= (2, 2)


def test_crossing_pairs_of_a_query_subset_among_mixed_sizes_match_libigl():
    # Reference: libigl's tri_tri_intersection_test_3d on every pair with a query face in it: small
    # "patch" triangles among large ones, so pairs are found from whichever triangle is the larger
    rng = np.random.default_rng(5)
    large = rng.uniform(0.0, 1.0, (90, 3, 3))
    small = rng.uniform(0.0, 1.0, (300, 1, 3)) + rng.uniform(-0.06, 0.06, (300, 3, 3))
    V = np.concatenate([large, small]).reshape(-1, 3)
    F = np.arange(len(V)).reshape(-1, 3)
    query = np.arange(90, len(F))[::2]  # half of the small triangles
    found = {tuple(sorted(p)) for p in crossing_pairs(V, F, query).tolist()}
    expected = set()
    for i in query:
        for j in range(len(F)):
            if j == i or (j in query and j < i):
                continue
            hit, coplanar, *_ = igl.tri_tri_intersection_test_3d(*V[F[i]][:, None, :], *V[F[j]][:, None, :])
            if hit and not coplanar:
                expected.add(tuple(sorted((int(i), j))))
    assert found == expected and len(expected) > 20
