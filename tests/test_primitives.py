"""Primitive fits against surfaces sampled from their defining equations, with noise and a random
rigid motion. The true parameters are those the samples were generated from (analytic references);
the fitted RMS must come back as the noise added (a correct model leaves only the noise)."""

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from surfcheck.errors import InputError
from surfcheck.geometry.primitives import (
    fit_circle_2d,
    fit_cone,
    fit_cylinder,
    fit_plane,
    fit_simplest,
    fit_sphere,
    fit_torus,
)

NOISE = 0.02
RNG = np.random.default_rng(7)
R = Rotation.random(random_state=11).as_matrix()
T = np.array([12.0, -7.0, 30.0])


def moved(points, normals):
    """Samples with Gaussian noise along their normals, then rotated by R and shifted by T."""
    noisy = points + normals * RNG.normal(0.0, NOISE, (len(points), 1))
    return noisy @ R.T + T, normals @ R.T


def parallel(a, b):
    return abs(float(np.dot(a, b))) > np.cos(np.radians(0.2))


def cylinder_samples(radius=7.0, arc=2.1, n=3000):
    t, z = RNG.uniform(0, arc, n), RNG.uniform(-10, 10, n)
    N = np.column_stack([np.cos(t), np.sin(t), np.zeros(n)])
    return moved(radius * N + np.column_stack([0 * t, 0 * t, z]), N)


def test_plane_normal_offset_and_rms():
    P = np.column_stack([RNG.uniform(-20, 20, (2000, 2)), np.zeros(2000)])
    P, N = moved(P, np.tile([0.0, 0.0, 1.0], (2000, 1)))
    fit = fit_plane(P)
    assert parallel(fit.axis, R[:, 2])  # analytic: the plane z = 0 moved by R
    assert abs(fit.axis @ fit.point - fit.axis @ T) < 0.005  # its offset along the normal is T . n
    assert fit.rms == pytest.approx(NOISE, rel=0.1)  # only the noise is left


def test_sphere_centre_and_radius():
    u = RNG.normal(size=(3000, 3))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    u = u[u[:, 2] > 0.2]  # a cap, as a scan sees it
    P, _ = moved(12.0 * u, u)
    fit = fit_sphere(P)
    assert fit.radius == pytest.approx(12.0, rel=2e-3)  # analytic radius
    assert np.linalg.norm(fit.point - T) < 0.02  # analytic centre (origin moved to T)
    assert fit.rms == pytest.approx(NOISE, rel=0.1)


@pytest.mark.parametrize("with_normals", [True, False])
def test_cylinder_axis_and_radius_on_a_partial_arc(with_normals):
    P, N = cylinder_samples()
    fit = fit_cylinder(P, N if with_normals else None)
    assert fit.radius == pytest.approx(7.0, rel=2e-3)  # analytic radius
    assert parallel(fit.axis, R[:, 2])  # analytic axis: z moved by R
    offset = fit.point - T
    assert np.linalg.norm(offset - (offset @ fit.axis) * fit.axis) < 0.02  # the axis passes through T
    assert fit.rms == pytest.approx(NOISE, rel=0.1)


def test_cone_apex_axis_and_half_angle():
    alpha = np.radians(25.0)
    h, phi = RNG.uniform(2, 20, 4000), RNG.uniform(0, 2 * np.pi, 4000)
    P = np.column_stack([h * np.tan(alpha) * np.cos(phi), h * np.tan(alpha) * np.sin(phi), h])
    N = np.column_stack([np.cos(alpha) * np.cos(phi), np.cos(alpha) * np.sin(phi), -np.sin(alpha) * np.ones_like(h)])
    P, N = moved(P, N)
    fit = fit_cone(P, N)
    assert np.degrees(fit.half_angle) == pytest.approx(25.0, abs=0.05)  # analytic half-angle
    assert np.linalg.norm(fit.point - T) < 0.05  # analytic apex (origin moved to T)
    assert parallel(fit.axis, R[:, 2])
    assert fit.rms == pytest.approx(NOISE, rel=0.1)


def test_torus_radii_on_a_quarter_tube():
    u, v = RNG.uniform(0, 2 * np.pi, 5000), RNG.uniform(0, np.pi / 2, 5000)
    N = np.column_stack([np.cos(v) * np.cos(u), np.cos(v) * np.sin(u), np.sin(v)])
    P = np.column_stack([15 * np.cos(u), 15 * np.sin(u), 0 * u]) + 3.0 * N
    P, N = moved(P, N)
    fit = fit_torus(P, N)
    # analytic: major radius 15, tube radius 3 (the fillet's radius), axis z moved by R
    assert fit.major == pytest.approx(15.0, rel=2e-3)
    assert fit.radius == pytest.approx(3.0, rel=5e-3)
    assert parallel(fit.axis, R[:, 2])
    assert fit.rms == pytest.approx(NOISE, rel=0.1)


def test_distances_and_normals_of_a_fitted_cylinder_agree_with_the_definition():
    P, N = cylinder_samples()
    fit = fit_cylinder(P, N)
    probe = np.array([[0.0, 9.0, 1.0], [3.0, 0.0, -2.0]]) @ R.T + T
    # definition: distance from the axis minus the radius; the normal points radially outwards
    assert np.allclose(fit.signed_distance(probe), [9.0 - 7.0, 3.0 - 7.0], atol=0.02)
    assert np.allclose(fit.normals(probe), np.array([[0, 1, 0], [1, 0, 0]]) @ R.T, atol=2e-3)


def test_circle_fit_recovers_an_arc():
    t = RNG.uniform(0, np.pi / 2, 200)
    Q = np.column_stack([3 + 5 * np.cos(t), -1 + 5 * np.sin(t)]) + RNG.normal(0, NOISE, (200, 2))
    centre, radius, rms = fit_circle_2d(Q)
    assert radius == pytest.approx(5.0, rel=5e-3)  # analytic radius
    assert np.allclose(centre, [3, -1], atol=0.03)
    assert rms == pytest.approx(NOISE, rel=0.2)


def test_simplest_kind_is_chosen():
    plane = np.column_stack([RNG.uniform(0, 10, (500, 2)), RNG.normal(0, NOISE, 500)])
    P, N = cylinder_samples()
    assert fit_simplest(plane, None, 0.25 * NOISE).kind == "plane"  # a noisy plane is not a huge cylinder
    assert fit_simplest(P, N, 0.25 * NOISE).kind == "cylinder"


def test_too_few_points_is_a_clear_error():
    with pytest.raises(InputError, match="at least"):
        fit_cylinder(np.zeros((3, 3)))
