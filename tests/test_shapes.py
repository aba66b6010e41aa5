"""Synthetic profiles and meshes against closed forms and reference libraries."""

from __future__ import annotations

import numpy as np
import pytest
import trimesh
from scipy.integrate import quad
from scipy.special import fresnel

from surfcheck.demo import shapes as S
from surfcheck.errors import InputError


def test_clothoid_matches_fresnel_integrals():
    # Euler spiral from curvature 0: x = sqrt(pi/a) C(s sqrt(a/pi)), y = sqrt(pi/a) S(...), a = dk/ds
    # (scipy.special.fresnel as the reference)
    L, k1 = 8.0, 0.5
    p = S.Profile((S.clothoid(L, 0.0, k1, "c"),))
    s = np.linspace(0, L, 17)
    a = k1 / L
    Sf, Cf = fresnel(s * np.sqrt(a / np.pi))
    expected = np.sqrt(np.pi / a) * np.column_stack([Cf, Sf])
    assert np.abs(p.points(s) - expected).max() < 1e-12 * L


def test_arc_points_lie_on_the_circle():
    # a circle of radius r about (0, r) from the origin heading +x (handbook)
    r = 2.0
    p = S.Profile((S.arc(r, "a", angle_deg=270),))
    pts = p.points(np.linspace(0, p.length, 50))
    assert np.abs(np.hypot(pts[:, 0], pts[:, 1] - r) - r).max() < 1e-13
    assert p.length == pytest.approx(r * 1.5 * np.pi)


@pytest.mark.parametrize("order", [1, 2, None])
def test_ramp_matches_adaptive_quadrature(order):
    # position = integral of (cos, sin) of heading, heading = integral of curvature: compared with
    # scipy.integrate.quad applied to the defining integrals
    piece = S.ramp(4.0, 0.1, 0.6, "r", order=order)
    p = S.Profile((piece,))
    u = 3.3
    heading = lambda v: quad(lambda w: float(piece.curvature(np.array([w]))[0]), 0, v, epsabs=1e-14)[0]
    x = quad(lambda v: np.cos(heading(v)), 0, u, epsabs=1e-13)[0]
    y = quad(lambda v: np.sin(heading(v)), 0, u, epsabs=1e-13)[0]
    assert np.abs(p.points(np.array([u]))[0] - [x, y]).max() < 1e-10
    assert p.heading(np.array([u]))[0] == pytest.approx(heading(u), abs=1e-12)


def test_hermite_smoothsteps_are_the_known_polynomials():
    # smoothstep of order 1 and 2: 3x^2 - 2x^3 and 6x^5 - 15x^4 + 10x^3 (common knowledge, graphics texts)
    x = np.linspace(0, 1, 11)
    k1 = S.ramp(1.0, 0.0, 1.0, "r", order=1).curvature(x)
    k2 = S.ramp(1.0, 0.0, 1.0, "r", order=2).curvature(x)
    assert np.allclose(k1, 3 * x**2 - 2 * x**3, atol=1e-15)
    assert np.allclose(k2, 6 * x**5 - 15 * x**4 + 10 * x**3, atol=1e-15)


def test_c_infinity_step_is_symmetric_and_flat_at_the_ends():
    # phi(x) + phi(1 - x) = 1 and phi(x) < 1e-4 for x < 0.1 (exp(-1/x) based step, by construction)
    piece = S.ramp(1.0, 0.0, 1.0, "r")
    x = np.linspace(0, 1, 101)
    assert np.allclose(piece.curvature(x) + piece.curvature(1 - x), 1.0, atol=1e-15)
    assert piece.curvature(np.array([0.09]))[0] < 1e-4


def test_corner_turns_the_heading():
    p = S.Profile((S.line(1, "a"), S.corner(30), S.line(1, "b")))
    assert np.degrees(p.heading(np.array([1.5]))[0]) == pytest.approx(30.0)


def _face_normals(V, F):
    n = np.cross(V[F[:, 1]] - V[F[:, 0]], V[F[:, 2]] - V[F[:, 0]])
    return n / np.linalg.norm(n, axis=1)[:, None]


def test_extruded_mesh_faces_outward_with_one_group_per_piece():
    # a CCW circle of radius 3 extruded: outward normals point away from the axis
    p = S.Profile((S.arc(3.0, "half1", angle_deg=180), S.arc(3.0, "half2", angle_deg=180)), start=(3.0, 0.0),
                  heading_deg=90)
    m = S.extrude(p, 2.0, 0.2)
    centroids = m.vertices[m.faces].mean(axis=1)
    radial = centroids[:, :2] / np.linalg.norm(centroids[:, :2], axis=1)[:, None]
    assert (np.einsum("ij,ij->i", _face_normals(m.vertices, m.faces)[:, :2], radial) > 0.99).all()
    assert m.group_names == ("half1", "half2") and set(np.unique(m.face_group)) == {0, 1}
    assert trimesh.Trimesh(m.vertices, m.faces, process=False).is_winding_consistent


def test_revolved_sphere_faces_outward_and_closes_around():
    # a semicircle revolved is a sphere of radius R: area 4 pi R^2 (handbook), normals outward
    R = 2.0
    p = S.Profile((S.arc(R, "s", angle_deg=179.0),), start=(np.sin(np.radians(0.5)) * R, -np.cos(np.radians(0.5)) * R),
                  heading_deg=0.5)
    m = S.revolve(p, 0.05)
    tm = trimesh.Trimesh(m.vertices, m.faces, process=False)
    assert tm.area == pytest.approx(4 * np.pi * R**2 * np.cos(np.radians(0.5)), rel=2e-3)
    c = m.vertices[m.faces].mean(axis=1)
    assert (np.einsum("ij,ij->i", _face_normals(m.vertices, m.faces), c / np.linalg.norm(c, axis=1)[:, None]) > 0.99).all()


def test_separate_shells_duplicate_the_seam_and_offsets_move_one_shell():
    p = S.Profile((S.line(2, "a"), S.arc(1.0, "b", angle_deg=90)), start=(5.0, 0.0), heading_deg=90)
    welded = S.extrude(p, 1.0, 0.1)
    shells = S.extrude(p, 1.0, 0.1, separate_shells=True, offsets={"b": (0.0, 0.0, 0.5)})
    s_w, s_s = welded.seams[0], shells.seams[0]
    assert np.array_equal(s_w.vertices_a, s_w.vertices_b)
    assert not np.intersect1d(s_s.vertices_a, s_s.vertices_b).size
    moved = shells.vertices[s_s.vertices_b] - shells.vertices[s_s.vertices_a]
    assert np.allclose(moved, [0.0, 0.0, 0.5])
    with pytest.raises(InputError):
        S.extrude(p, 1.0, 0.1, offsets={"b": (0, 0, 1)})


def test_random_rotation_is_rigid():
    p = S.Profile((S.line(2, "a"), S.arc(1.0, "b", angle_deg=90)), start=(5.0, 0.0), heading_deg=90)
    a, b = S.extrude(p, 1.0, 0.1), S.extrude(p, 1.0, 0.1, rotation=11)
    assert np.allclose(b.vertices, a.vertices @ b.rotation.T)
    assert np.allclose(b.rotation @ b.rotation.T, np.eye(3)) and np.linalg.det(b.rotation) == pytest.approx(1.0)


def test_normal_noise_has_the_requested_spread():
    # displacements along the vertex normals, sample standard deviation within 5 % for 10^4 vertices
    p = S.Profile((S.line(10, "a"),))
    m = S.extrude(p, 10.0, 0.1)
    V = S.add_normal_noise(m.vertices, m.faces, 0.01, seed=1)
    d = V - m.vertices
    assert np.abs(d[:, 2]).max() < 1e-15  # a plane's normals are perpendicular to z
    assert np.std(d[:, 1]) == pytest.approx(0.01, rel=0.05)


def test_bad_pieces_are_input_errors():
    with pytest.raises(InputError):
        S.arc(0.0, "a", angle_deg=10)
    with pytest.raises(InputError):
        S.Profile((S.line(1, "a"), S.line(1, "a")))
    with pytest.raises(InputError):
        S.revolve(S.Profile((S.line(1, "a"),), start=(-1.0, 0.0)), 0.1)
