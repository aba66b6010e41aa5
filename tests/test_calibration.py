"""The calibration benchmark (benchmarks/calibration.py) in small: its truth by construction, its mesh
generator, its measures, and the calibration of the grader on a few clean seams.

The acceptance thresholds marked "issue 13" are that issue's "Done when": coverage of |value - truth|
<= 2u at least 95 % for every order, and no false fails on clean meshes. The 95 % is the coverage
probability of k = 2 for a normal distribution (JCGM 100:2008, GUM, section 6.3.3 and G.1).
"""

from __future__ import annotations

import numpy as np
import pytest

from benchmarks import calibration as C
from surfcheck.demo import shapes as S
from surfcheck.grading.tolerances import GENERAL

# ---------------------------------------------------------------- truth by construction


def test_truth_of_an_arc_after_a_line_is_a_curvature_jump_of_one_over_r():
    # a circle of radius r has curvature 1/r (do Carmo, Differential Geometry of Curves and Surfaces, 1-5)
    truth = C.seam_truth(S.Profile((S.line(5, "a"), S.arc(4.0, "b", angle_deg=60))), 0, GENERAL)
    assert truth.jumps == pytest.approx((0.0, 0.0, 0.25, 0.0), rel=1e-15, abs=1e-15)
    assert truth.designed == 1


def test_truth_of_a_clothoid_is_a_rate_jump_of_one_over_r_l():
    # an Euler spiral's curvature is linear in arc length, so its rate is (k1 - k0) / L (its definition;
    # Levien 2008, The Euler spiral: a mathematical history, UCB/EECS-2008-111)
    truth = C.seam_truth(S.Profile((S.line(5, "a"), S.clothoid(3.0, 0.0, 0.5, "b"))), 0, GENERAL)
    assert truth.jumps[2] == 0.0
    assert truth.jumps[3] == pytest.approx(0.5 / 3.0, rel=1e-15)
    assert truth.designed == 2


@pytest.mark.parametrize("order", [1, 2])
def test_truth_of_a_smooth_step_ramp_has_no_rate_jump(order):
    # the Hermite smoothstep of order k >= 1 has phi'(0) = phi'(1) = 0: its first k derivatives vanish at
    # both ends (the Hermite interpolation conditions that define it; from memory, no single source)
    truth = C.seam_truth(S.Profile((S.ramp(3.0, 0.0, 0.5, "a", order=order), S.arc(2.0, "b", angle_deg=30))), 0,
                         GENERAL)
    assert truth.jumps[2] == pytest.approx(0.0, abs=1e-15)
    assert truth.jumps[3] == pytest.approx(0.0, abs=1e-12)
    assert truth.designed == 3


def test_truth_of_a_corner_is_its_heading_jump():
    profile = S.Profile((S.line(5, "a"), S.corner(-12.0), S.line(5, "b"), S.arc(3.0, "c", angle_deg=30)))
    assert C.seam_truth(profile, 0, GENERAL).jumps == pytest.approx((0.0, 12.0, 0.0, 0.0), abs=1e-12)
    assert C.seam_truth(profile, 0, GENERAL).designed == 0  # 12 degrees > 0.5
    assert C.seam_truth(profile, 1, GENERAL).jumps == pytest.approx((0.0, 0.0, 1 / 3.0, 0.0), abs=1e-12)


# ---------------------------------------------------------------- the meshes


def _case(**changes) -> dict:
    """A drawn placement with a concave arc of r = 4 between two lines, revolved 6 radii from the axis."""
    case = C.draw_case(23, noise=0.0)
    case.update(family="arc", radius=4.0, edge=0.3, edge_over_r=0.075, sweep="revolve", axis_radii=6.0,
                heading_deg=-90.0, pieces=[["line", "a", 10.0], ["arc", "b", -4.0, 60.0], ["line", "c", 10.0]])
    case.update(changes)
    return case


@pytest.mark.parametrize("sweep", ["extrude", "revolve"])
def test_unjittered_grid_is_the_builders_grid(sweep):
    """With no jitter and rows one edge apart the benchmark's grid has the builder's vertices and
    faces facing the same way (shapes.extrude, shapes.revolve)."""
    case = _case(mesh="jittered", jitter=0.0, sweep=sweep)
    profile = C.build_profile(case)
    mine, _ = C.build_mesh(case, profile)
    theirs, _ = C.build_mesh({**case, "mesh": "regular", "skew": 0.0}, profile)
    assert mine.vertices.shape == theirs.vertices.shape
    assert np.abs(np.sort(mine.vertices, axis=0) - np.sort(theirs.vertices, axis=0)).max() < 1e-12
    assert len(mine.faces) == len(theirs.faces)
    for group in range(len(profile.body)):  # the same faces' side outward
        n_mine, n_theirs = (_area_normal(m.vertices, m.faces[m.face_group == group]) for m in (mine, theirs))
        assert np.dot(n_mine, n_theirs) > 0.999 * np.linalg.norm(n_mine) * np.linalg.norm(n_theirs)


def _area_normal(V, F):
    return np.cross(V[F[:, 1]] - V[F[:, 0]], V[F[:, 2]] - V[F[:, 0]]).sum(axis=0)


@pytest.mark.parametrize("mesh", ["jittered", "cad"])
@pytest.mark.parametrize("welded", [True, False])
def test_grid_vertices_lie_on_the_exact_surface(mesh, welded):
    """Every vertex of a jittered or CAD-like revolved arc lies on the torus of the arc: its distance
    from the arc's centre circle is r (the surface of revolution of a circle)."""
    case = _case(mesh=mesh, jitter=0.3 if mesh == "jittered" else 0.0, aspect=8.0 if mesh == "cad" else 1.0,
                 plane_cells=2, welded=welded)
    profile = C.build_profile(case)
    mesh_, V = C.build_mesh(case, profile)
    local = (V - np.asarray(case["offset"])) @ mesh_.rotation  # back to the built frame
    arc = profile.body[1]
    s0 = profile.boundaries[1]
    heading = profile.heading([s0])[0]
    left = np.array([-np.sin(heading), np.cos(heading)])
    centre_xy = profile.points([s0])[0] + left / arc.k_start  # the centre lies 1/k to the left
    on_arc = np.isin(np.arange(len(V)), np.unique(mesh_.faces[mesh_.face_group == 1]))
    rho = np.hypot(local[on_arc, 0], local[on_arc, 1])
    distance = np.hypot(rho - centre_xy[0], local[on_arc, 2] - centre_xy[1])
    assert np.abs(distance - abs(1 / arc.k_start)).max() < 1e-9
    for seam in mesh_.seams:
        assert np.abs(V[seam.vertices_a] - V[seam.vertices_b]).max() < 1e-12  # truth: no gap
        assert (seam.vertices_a == seam.vertices_b).all() == welded


def test_cad_like_rows_are_long_and_thin():
    case = _case(mesh="cad", aspect=10.0, plane_cells=1, jitter=0.0)
    mesh, V = C.build_mesh(case, C.build_profile(case))
    a, b, c = (V[mesh.faces[mesh.face_group == 1][:, i]] for i in range(3))
    lengths = np.sort(np.stack([np.linalg.norm(b - a, axis=1), np.linalg.norm(c - b, axis=1),
                                np.linalg.norm(a - c, axis=1)], axis=1), axis=1)
    assert np.median(lengths[:, 1] / lengths[:, 0]) > 5  # rows far apart along the seam, close across it


# ---------------------------------------------------------------- the measures


def _row(value, u, truth=0.0):
    return {"truth": [truth] * 4, "stations": [{"value": [value] * 4, "u": [u] * 4}]}


def test_a_station_without_an_uncertainty_is_not_covered():
    assert not (C.station_errors(_row(0.0, None), 2) <= 1).any()
    assert np.isinf(C.station_errors(_row(0.1, 0.0), 2)).all()  # a confident wrong value
    assert (C.station_errors(_row(0.0, 0.0), 0) == 0).all()  # exact G0 of a welded seam
    assert C.station_errors(_row(0.3, 0.1, truth=0.1), 1)[0] == pytest.approx(1.0)  # |0.3 - 0.1| = 2u: covered


# ---------------------------------------------------------------- the grader, calibrated

# The first case of each family the issue names (arc, clothoid, smooth-step) in seed order, made clean:
# 10 seams, 58 stations, about 3 s.
SMALL_SET = (21, 12, 3)


@pytest.fixture(scope="module")
def clean_rows():
    return [row for seed in SMALL_SET for row in C.run_case(C.draw_case(seed, noise=0.0))]


def test_coverage_on_clean_seams(clean_rows):
    coverage = [order["coverage"] for order in C.summary(clean_rows)["orders"]]
    assert min(coverage) >= 0.95, coverage  # issue 13 acceptance: at least 95 % for every order


def test_no_false_fails_on_clean_seams(clean_rows):
    # on main 788e862 2 of the 10 failed G3 (the CAD-like smooth-step's seams with its arc); none since 8bb7bae
    failing = [(r["case"]["seed"], r["seam"]) for r in clean_rows
               if "error" not in r and any(C.seam_outcomes(r, k)["false_fail"] for k in range(4))]
    assert failing == []  # issue 13 acceptance: no false fails on clean meshes
