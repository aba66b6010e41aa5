"""The one-sided fit of a section side, checked against plane curves whose curvature is known in closed form.

Sources: a circle of radius R has curvature 1/R and a constant one (do Carmo, Differential Geometry of
Curves and Surfaces, 1976, sec. 1-5); the clothoid x + iy = a sqrt(pi) (C(t) + i S(t)) with the Fresnel
integrals C, S (Abramowitz and Stegun 7.3.1-7.3.2) has curvature linear in arc length, kappa = s / a^2 at
arc length s = a sqrt(pi) t from its inflection.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import fresnel

from surfcheck.grading.sidefit import fit_side

EDGE = 0.1  # point spacing along the curve, mm


def circle_side(radius: float, bend: int, length: float = 3.0) -> np.ndarray:
    """Points of side A (before the seam point (0, 0), heading +x there) on a circle of ``radius``
    whose centre is at (0, bend * radius)."""
    s = np.arange(0.0, length, EDGE)[::-1]
    theta = s / radius
    return np.c_[-radius * np.sin(theta), bend * radius * (1.0 - np.cos(theta))]


def clothoid_side(a: float, s_end: float, length: float = 3.0) -> tuple[np.ndarray, float, float]:
    """Points of side B (after its seam point) on a clothoid of parameter ``a``, starting at arc length
    ``s_end``; moved so the seam point is (0, 0) and turned so the heading there is +x. Returns the
    points, the curvature at the seam point and the curvature rate (1/a^2)."""
    s = s_end + np.arange(0.0, length, EDGE)
    c, sn = fresnel(s / (a * np.sqrt(np.pi)))
    P = a * np.sqrt(np.pi) * np.c_[c, sn]
    P -= P[0]
    heading = s_end**2 / (2.0 * a**2)
    turn = np.array([[np.cos(heading), np.sin(heading)], [-np.sin(heading), np.cos(heading)]])
    return P @ turn.T, s_end / a**2, 1.0 / a**2


@pytest.mark.parametrize("radius", [2.0, 5.0, 20.0])
def test_a_circle_gives_its_curvature_and_no_rate(radius):
    for bend in (1, -1):
        est = fit_side(circle_side(radius, bend), np.zeros(2), -1.0, EDGE)
        assert abs(est.curvature) == pytest.approx(1.0 / radius, rel=1e-6)
        assert abs(est.rate) < 1e-6 / radius**2
        assert abs(est.heading) < 1e-9
    # the two bends give opposite signs: the sign follows the side of the tangent the curve turns to
    up = fit_side(circle_side(radius, 1), np.zeros(2), -1.0, EDGE).curvature
    down = fit_side(circle_side(radius, -1), np.zeros(2), -1.0, EDGE).curvature
    assert up == pytest.approx(-down)


def test_side_b_of_a_mirrored_circle_gives_the_same_curvature():
    P = circle_side(5.0, 1)
    a = fit_side(P, np.zeros(2), -1.0, EDGE)
    b = fit_side(P * [-1.0, 1.0], np.zeros(2), 1.0, EDGE)
    assert b.curvature == pytest.approx(a.curvature, rel=1e-6)


@pytest.mark.parametrize("a, s_end", [(3.0, 0.0), (3.0, 2.0), (5.0, 4.0)])
def test_a_clothoid_gives_its_curvature_and_its_rate(a, s_end):
    P, kappa, rate = clothoid_side(a, s_end)
    est = fit_side(P, np.zeros(2), 1.0, EDGE)
    assert abs(est.curvature) == pytest.approx(kappa, abs=1e-4 / a)
    assert abs(est.rate) == pytest.approx(rate, rel=0.02)


def test_too_few_points_resolve_nothing():
    est = fit_side(circle_side(5.0, 1, length=0.3), np.zeros(2), -1.0, EDGE)
    assert not np.isfinite(est.uncertainty(2))


def test_the_stated_uncertainty_covers_the_truth_under_noise():
    """Coverage of U = 2u for the curvature over noisy circles: k = 2 promises about 95 % for a normal
    error (JCGM 100:2008, 6.2-6.3); at least 88 % of 200 draws is asked, leaving room for the
    binomial spread of 200 draws (sd 1.5 %)."""
    radius, noise = 5.0, 0.002
    clean = circle_side(radius, 1)
    rng = np.random.default_rng(7)
    covered = []
    for _ in range(200):
        P = clean + rng.normal(0.0, noise, clean.shape)
        est = fit_side(P, np.zeros(2), -1.0, EDGE)
        u = est.uncertainty(2)
        assert np.isfinite(u)
        covered.append(abs(abs(est.curvature) - 1.0 / radius) <= 2.0 * u)
    assert np.mean(covered) >= 0.88
