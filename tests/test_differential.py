"""Accuracy of normals and curvature estimators against analytic surfaces and reference libraries.

Analytic values: do Carmo, Differential Geometry of Curves and Surfaces (1976): sphere k1 = k2 = 1/R,
cylinder 1/R and 0, torus 1/r and cos v / (R + r cos v). Gauss-Bonnet: the total Gaussian curvature of a
closed surface is 2 pi times its Euler characteristic (4 pi for a sphere, 0 for a torus). Reference
libraries: libigl's principal_curvature (quadric fit) and VTK's vtkCurvatures through pyvista.
"""

from __future__ import annotations

import igl
import numpy as np
import pytest
import pyvista as pv

from surfcheck.geometry.differential import (
    angle_defect,
    boundary_vertices,
    default_radius,
    gaussian_curvature,
    mean_curvature,
    mean_edge_length,
    mixed_areas,
    noise_level,
    principal_curvatures,
    vertex_normals,
)
from surfcheck.errors import InputError
from surfcheck.geometry.jetkernel import quadric_power_sums
from tests.fixtures.surfaces import cylinder, sphere, torus

R_TORUS, r_TORUS = 3.0, 1.0


@pytest.fixture(scope="module")
def regular_torus():
    return torus(R_TORUS, r_TORUS, 300, 100)


@pytest.fixture(scope="module")
def irregular_torus():
    # jittered by a quarter of the spacing and warped: triangle sizes vary threefold around the ring
    return torus(R_TORUS, r_TORUS, 300, 100, jitter=0.25, warp=0.5)


@pytest.fixture(scope="module")
def noisy_torus(irregular_torus):
    return irregular_torus.with_noise(0.001 * r_TORUS)  # 0.1 % of the tube radius, along the normal


def errors(estimate: np.ndarray, exact: np.ndarray) -> tuple[float, float]:
    e = np.abs(estimate - exact)
    return float(np.median(e)), float(np.percentile(e, 95))


def igl_curvatures(surface):
    _, _, pv1, pv2, _ = igl.principal_curvature(surface.V, surface.F)  # default: 5-ring quadric fit
    return pv1, pv2


def vtk_curvatures(surface):
    mesh = pv.PolyData(surface.V, np.hstack([np.full((len(surface.F), 1), 3), surface.F]).ravel())
    return mesh.curvature("maximum"), mesh.curvature("minimum")


# --- normals ----------------------------------------------------------------------------------------


def test_vertex_normals_match_the_sphere_and_point_outward():
    s = sphere(2.0, 5, jitter=0.3)
    n = vertex_normals(s.V, s.F)
    angle = np.degrees(np.arccos(np.clip(np.sum(n * s.normals, axis=1), -1, 1)))
    # exact normal of a sphere is the radial direction (do Carmo 2-5); angle weighting keeps the
    # error small even on a jittered mesh (Thurmer and Wuthrich 1998; bound common practice)
    assert np.percentile(angle, 95) < 0.5
    assert np.allclose(np.linalg.norm(n, axis=1), 1.0)


def test_unused_vertex_has_zero_normal_and_nan_curvature():
    s = sphere(1.0, 3)
    V = np.vstack([s.V, [[5.0, 5.0, 5.0]]])
    assert np.all(vertex_normals(V, s.F)[-1] == 0.0)
    c = principal_curvatures(V, s.F)
    assert np.isnan(c.k1[-1]) and c.quality[-1] == 0.0 and c.neighbours[-1] == 0
    assert np.isfinite(c.k1[:-1]).all()


# --- jet-fit principal curvatures --------------------------------------------------------------------


@pytest.mark.parametrize("jitter", [0.0, 0.3])
def test_sphere_principal_curvatures(jitter):
    R = 2.0
    s = sphere(R, 5, jitter=jitter)
    c = principal_curvatures(s.V, s.F)
    for k in (c.k1, c.k2):
        med, p95 = errors(k, 1.0 / R)  # do Carmo: k1 = k2 = 1/R, positive for an outward sphere
        assert med < 0.005 / R and p95 < 0.015 / R
    assert np.all(c.k1 >= c.k2)
    assert np.allclose(c.mean, 1.0 / R, rtol=0.02) and np.allclose(c.gaussian, 1.0 / R**2, rtol=0.04)


def test_inward_wound_sphere_has_negative_curvature():
    s = sphere(1.0, 4)
    c = principal_curvatures(s.V, s.F[:, ::-1])
    assert np.all(c.k1 < -0.95) and np.all(c.k1 >= c.k2)  # sign convention of DESIGN.md


def test_cylinder_values_directions_and_open_boundary():
    R = 1.0
    s = cylinder(R, 3.0, 200, 100, jitter=0.2)
    c = principal_curvatures(s.V, s.F)
    on_edge = boundary_vertices(s.F, len(s.V))
    # do Carmo: k1 = 1/R across the axis, k2 = 0 along it; boundary vertices included
    assert errors(c.k1, 1.0 / R)[1] < 0.01 / R and np.abs(c.k1 - 1.0 / R).max() < 0.03 / R
    assert errors(c.k2, 0.0)[1] < 0.01 / R and np.abs(c.k2).max() < 0.03 / R
    axis = np.array([0.0, 0.0, 1.0])
    assert np.percentile(np.abs(c.d1 @ axis), 95) < 0.05  # max-curvature direction runs around
    assert np.percentile(np.abs(c.d2 @ axis), 5) > 0.99  # min-curvature direction runs along the axis
    for d in (c.d1, c.d2):
        assert np.abs(np.sum(d * c.normals, axis=1)).max() < 1e-9
    # one-sided neighbourhoods are flagged (quality 0 for a half disc, see Curvature)
    far = np.abs(s.V[:, 2] - 1.5) < 1.0
    assert np.median(c.quality[on_edge]) < 0.1 and c.quality[on_edge].max() < 0.5
    assert c.quality[far].min() > 0.8
    assert c.neighbours[on_edge].mean() < 0.7 * c.neighbours[far].mean()


def test_regular_torus_values_and_directions(regular_torus):
    s = regular_torus
    c = principal_curvatures(s.V, s.F)
    # do Carmo: k1 = 1/r, k2 = cos v / (R + r cos v); tolerances common practice for ~20 edges per r
    assert errors(c.k1, s.k1) < (0.01, 0.015) and errors(c.k2, s.k2) < (0.005, 0.01)
    meridian = np.cross(s.normals, np.cross([0.0, 0.0, 1.0], s.normals))  # d1 runs around the tube
    meridian /= np.linalg.norm(meridian, axis=1, keepdims=True)
    assert np.percentile(np.abs(np.sum(c.d1 * meridian, axis=1)), 5) > 0.99


@pytest.mark.parametrize("name", ["irregular_torus", "noisy_torus"])
def test_torus_no_worse_than_libigl_and_vtk(name, request):
    s = request.getfixturevalue(name)
    c = principal_curvatures(s.V, s.F)
    ours = errors(c.k1, s.k1), errors(c.k2, s.k2)
    igl_k1, igl_k2 = igl_curvatures(s)
    vtk_k1, vtk_k2 = vtk_curvatures(s)
    for mine, theirs in zip(ours, (errors(igl_k1, s.k1), errors(igl_k2, s.k2))):
        assert mine[0] <= theirs[0]  # issue 3: median abs error no larger than libigl's
    for mine, theirs in zip(ours, (errors(vtk_k1, s.k1), errors(vtk_k2, s.k2))):
        assert mine[0] <= theirs[0]
    # our own bounds, measured (docs/curvature.md): 1 % clean, 2 % with 0.1 % noise (of 1/r)
    bound = 0.01 if name == "irregular_torus" else 0.02
    assert ours[0][0] < bound and ours[1][0] < bound


def test_higher_degree_jets_reduce_the_bias():
    s = torus(R_TORUS, r_TORUS, 210, 70)
    radius = 4.5 * mean_edge_length(s.V, s.F)
    err = {d: np.median(np.abs(principal_curvatures(s.V, s.F, radius, d).k1 - s.k1)) for d in (2, 4)}
    # Cazals and Pouget 2003: a degree-n jet's curvature error is O(h^(n-1)); at this wide radius the
    # quadric's bias dominates and the quartic jet removes most of it (measured 0.045 -> 0.003). A
    # cubic gains little here: on a symmetric neighbourhood the quadric's error is already even-order.
    assert err[4] < 0.25 * err[2]


def test_default_radius_follows_the_noise(irregular_torus, noisy_torus):
    clean, noisy = irregular_torus, noisy_torus
    e = mean_edge_length(clean.V, clean.F)
    assert 2.4 * e < default_radius(clean.V, clean.F) < 3.5 * e
    assert default_radius(noisy.V, noisy.F) > 1.3 * default_radius(clean.V, clean.F)
    # the pilot residual recovers the injected noise (standard deviation 0.001) within 15 %
    assert noise_level(noisy.V, noisy.F) == pytest.approx(0.001 * r_TORUS, rel=0.15)
    assert noise_level(clean.V, clean.F) < 0.2 * 0.001


def test_far_wall_of_a_thin_part_stays_out_of_the_fit():
    outer = sphere(1.0, 5)
    gap = 0.7 * mean_edge_length(outer.V, outer.F)  # wall thinner than the neighbourhood radius
    inner = sphere(1.0 - gap, 5)
    V = np.vstack([outer.V, inner.V])
    F = np.vstack([outer.F, inner.F[:, ::-1] + len(outer.V)])  # inner wall faces the cavity
    c = principal_curvatures(V, F)
    n = len(outer.V)
    assert errors(c.k1[:n], 1.0)[1] < 0.02 and errors(c.k2[:n], 1.0)[1] < 0.02
    assert errors(c.k1[n:], -1.0 / (1.0 - gap))[1] < 0.02  # cavity wall bends towards its normal


def test_bad_arguments_are_input_errors():
    s = sphere(1.0, 2)
    with pytest.raises(InputError):
        principal_curvatures(s.V, s.F, radius=-1.0)
    with pytest.raises(InputError):
        principal_curvatures(s.V, s.F, degree=5)
    with pytest.raises(InputError):
        principal_curvatures(s.V, s.F + len(s.V))
    with pytest.raises(InputError):
        vertex_normals(s.V[:, :2], s.F)


# --- discrete operators (Meyer, Desbrun, Schroder, Barr 2003) ----------------------------------------


def test_gauss_bonnet_sphere_and_torus(irregular_torus):
    s = sphere(1.5, 4, jitter=0.3)
    assert angle_defect(s.V, s.F).sum() == pytest.approx(4.0 * np.pi, abs=1e-9)  # Gauss-Bonnet, chi = 2
    t = irregular_torus
    assert angle_defect(t.V, t.F).sum() == pytest.approx(0.0, abs=1e-9)  # Gauss-Bonnet, chi = 0
    K = gaussian_curvature(s.V, s.F)
    assert np.sum(K * mixed_areas(s.V, s.F)) == pytest.approx(4.0 * np.pi, abs=1e-9)


def test_mixed_areas_sum_to_the_surface_area():
    s = sphere(1.0, 4, jitter=0.4)
    P = s.V[s.F]
    area = 0.5 * np.linalg.norm(np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0]), axis=1).sum()
    assert mixed_areas(s.V, s.F).sum() == pytest.approx(area, rel=1e-12)  # Meyer et al. 2003, sec. 3.3


def test_cotangent_mean_and_angle_defect_gaussian_on_sphere_and_cylinder():
    R = 2.0
    s = sphere(R, 5)
    assert np.allclose(mean_curvature(s.V, s.F), 1.0 / R, rtol=1e-3)  # H = 1/R
    assert np.allclose(gaussian_curvature(s.V, s.F), 1.0 / R**2, rtol=0.03)  # K = 1/R^2
    c = cylinder(1.0, 3.0, 200, 100)
    H, K = mean_curvature(c.V, c.F), gaussian_curvature(c.V, c.F)
    on_edge = boundary_vertices(c.F, len(c.V))
    assert np.isnan(H[on_edge]).all() and np.isnan(K[on_edge]).all()
    assert np.allclose(H[~on_edge], 0.5, rtol=1e-3) and np.allclose(K[~on_edge], 0.0, atol=1e-9)


def test_cotangent_mean_curvature_agrees_with_vtk_and_libigl_on_a_clean_torus(regular_torus):
    s = regular_torus
    H = mean_curvature(s.V, s.F)
    mesh = pv.PolyData(s.V, np.hstack([np.full((len(s.F), 1), 3), s.F]).ravel())
    assert np.median(np.abs(H - mesh.curvature("mean"))) < 2e-3  # VTK vtkCurvatures, mean
    K_igl = igl.gaussian_curvature(s.V, s.F) / mixed_areas(s.V, s.F)  # libigl angle defect
    assert np.allclose(gaussian_curvature(s.V, s.F), K_igl, atol=1e-9)


def test_degenerate_triangles_do_not_spoil_their_neighbours():
    s = sphere(1.0, 4)
    V = s.V
    F = np.vstack([s.F, [[0, 0, 1]], [[2, 2, 2]]])  # zero-area triangles, as CAD exports contain
    with np.errstate(all="raise"):
        H, K = mean_curvature(V, F), gaussian_curvature(V, F)
        c = principal_curvatures(V, F)
    assert np.isfinite(H).all() and np.isfinite(K).all() and np.isfinite(c.k1).all()
    assert np.allclose(c.k1, 1.0, rtol=0.03)  # sphere: k1 = 1/R


def test_unrolled_quadric_power_sums_equal_the_general_ones():
    # jetkernel.quadric_power_sums is add_monomials with top 4 and 2, unrolled; both must give the same
    # sums on any points (reference: the definitions S[a, b] = sum x^a y^b, Z[a, b] = sum z x^a y^b,
    # evaluated here with numpy's power and sum)
    rng = np.random.default_rng(11)
    local = rng.uniform(-1.0, 1.0, (40, 3))
    count = 33  # only the first count rows count
    S, Z = np.full((5, 5), np.nan), np.full((3, 3), np.nan)
    zz = quadric_power_sums(local, count, S, Z)
    x, y, z = local[:count].T
    for a in range(5):
        for b in range(5):
            expected = np.sum(x**a * y**b) if a + b <= 4 else 0.0
            assert S[a, b] == pytest.approx(expected, rel=1e-12, abs=1e-12)
    for a in range(3):
        for b in range(3):
            expected = np.sum(z * x**a * y**b) if a + b <= 2 else 0.0
            assert Z[a, b] == pytest.approx(expected, rel=1e-12, abs=1e-12)
    assert zz == pytest.approx(np.sum(z * z), rel=1e-12)
