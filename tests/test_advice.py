"""Advice on the order that limits a seam, on synthetic fillets of known class (tests/synthetic.py).

Sources: the class of each join follows from its construction (a 60 degree corner is G0 only, an arc
after a line jumps in curvature by 1/r, a clothoid's curvature rate jumps by 1/(r L) where it meets a
line, a cubic smooth-step ramp is G3); the split of "not resolved" into "cannot be decided" (the
expanded uncertainty U = k u alone exceeds the tolerance, so ISO 14253-1's guard band leaves no
conformance zone) and "borderline" (the value lies within U of the tolerance) is the guard-band rule
of ISO 14253-1 with U from JCGM 100:2008 (GUM).
"""

from __future__ import annotations

import pytest

from surfcheck.demo import shapes as S
from surfcheck.grading.advice import advise
from surfcheck.grading.run import grade_seam
from surfcheck.grading.tolerances import GENERAL, ToleranceProfile
from tests.fixtures.synthetic import RADIUS, build, part_and_seams


def advice_for(kind: str, profile=GENERAL, noise: float = 0.0):
    mesh = build(kind, "extrude")
    V = S.add_normal_noise(mesh.vertices, mesh.faces, noise, seed=3) if noise else None
    part, seams = part_and_seams(mesh, V)
    grades = [grade_seam(part, seam, profile, stations=3) for seam in seams]
    return grades, [advise(g, profile.coverage) for g in grades]


@pytest.mark.parametrize("kind, order, words", [
    ("sharp", "G1", ("kink", "--order 1")),  # the 60 degree corner
    ("arc", "G2", ("curvature jump", "--order 2")),  # 1/r = 0.2 /mm against 0.005 /mm
    ("clothoid", "G3", ("rate", "--order 3")),  # 1/(r L) = 0.025 /mm^2 against 0.01 /mm^2
])
def test_a_failing_order_names_its_defect_and_the_blend_that_removes_it(kind, order, words):
    _, advice = advice_for(kind)
    first = advice[0]
    assert (first.order, first.status) == (order, "fail")
    assert all(w in first.text for w in words), first.text


def test_the_kink_advice_states_the_measured_angle_and_where():
    grades, advice = advice_for("sharp")
    assert "60 deg exceeds 0.5 deg" in advice[0].text  # the corner's 60 degrees, to 3 digits
    position = grades[0].orders[1].worst_position
    assert f"({round(position[0], 4) + 0.0:.6g}, " in advice[0].text


def test_a_g3_seam_needs_no_advice():
    _, advice = advice_for("smoothstep")
    assert advice == [None] * len(advice)


def test_noise_beyond_the_tolerance_cannot_be_decided():
    # 0.01 mm of noise on a G1 arc against a G1 tolerance of 0.1 deg: the one-sided tangents carry u of
    # 0.1 to 0.2 deg (docs/continuity.md, section 7), so U alone exceeds the tolerance
    tight_g1 = ToleranceProfile("tight-g1", g0_gap=0.05, g1_angle=0.1, g2_abs=0.05, g2_rel=0.25,
                                g3_abs=0.05, g3_rel=0.5)
    grades, advice = advice_for("arc", tight_g1, noise=0.01)
    undecided = [(g, a) for g, a in zip(grades, advice) if a is not None and a.status == "not resolved"]
    assert undecided
    for g, a in undecided:
        summary = g.orders[int(a.order[1])]
        assert ("cannot be decided" in a.text) == (tight_g1.coverage * summary.uncertainty >= summary.tolerance)
    assert any("cannot be decided" in a.text for _, a in undecided)


def test_a_value_on_the_tolerance_is_borderline():
    # the arc's curvature jump is 1/r = 0.2 /mm to about 1e-11; a G2 tolerance of exactly 0.2 /mm puts the
    # value inside the guard band on both sides of the limit
    on_the_limit = ToleranceProfile("on-the-limit", g0_gap=0.01, g1_angle=0.5, g2_abs=1.0 / RADIUS, g2_rel=0.0,
                                    g3_abs=0.01, g3_rel=0.25)
    _, advice = advice_for("arc", on_the_limit)
    assert (advice[0].order, advice[0].status) == ("G2", "not resolved")
    assert "borderline" in advice[0].text and "0.2 1/mm is within U" in advice[0].text


def test_a_scan_graded_with_the_scan_profile_is_not_sent_to_it_again():
    scan_like = ToleranceProfile("scan", g0_gap=0.05, g1_angle=0.1, g2_abs=0.05, g2_rel=0.25, g3_abs=0.05, g3_rel=0.5)
    _, advice = advice_for("arc", scan_like, noise=0.01)
    undecided = [a for a in advice if a is not None and "cannot be decided" in a.text]
    assert undecided and not any("--tolerance scan" in a.text for a in undecided)
