"""The closed loop: blend patches graded by the continuity estimator (run.grade_seam) with the
default profile, on the merged part, seam by seam.

Each case is first checked against the exact section jets of its surfaces (blend_fixtures.achieved_order),
so a failure below is the mesh grader's reading of a patch whose contact is known.
"""

from __future__ import annotations

import pytest

from tests.fixtures.blend_fixtures import GRADED_CASES, achieved_order, irregular_pair, pair
from surfcheck.blend.patch import build_blend, merge_with_patch
from surfcheck.grading.run import grade_seam
from surfcheck.grading.tolerances import load_profile

PROFILE = load_profile("general")


def graded(case: str, order: int, step: str):
    sheet_a, sheet_b, gap, closed = GRADED_CASES[case]
    a, b = pair(sheet_a, sheet_b, gap, n_a=61, n_b=73, closed=closed, seed=3)
    blend = build_blend(a.part, a.chain, b.part, b.chain, order, step=step)
    merged = merge_with_patch(a.part, blend, b.part)
    grades = tuple(grade_seam(merged.part, seam, PROFILE).achieved for seam in (merged.seam_a, merged.seam_b))
    return blend, a, b, grades


@pytest.mark.parametrize("case,order", [(c, k) for c in sorted(GRADED_CASES) for k in (1, 2, 3)])
def test_grader_confirms_the_order_on_both_seams(case, order):
    # Reference: exact section jets (blend_fixtures) for the patch; then the estimator on the mesh with
    # the general profile (common practice, from memory). Both must reach the order asked for.
    blend, a, b, grades = graded(case, order, "hermite")
    assert blend.problems == ()
    assert min(achieved_order(blend, a, b)) >= order
    assert min(grades) >= order, grades


def test_grader_finds_the_kinks_of_a_linear_blend():
    # A linear step between the cylinders of radius 5 and 7 kinks by atan(2 / 30) = 3.8 degrees at both
    # seams (the exact construction: test_blend.test_linear_step_kinks_...), over the 0.5 degree G1
    # tolerance: achieved 0 on both.
    blend, a, b, grades = graded("cylinders of radius 5 and 7", 2, "linear")
    assert achieved_order(blend, a, b) == (0, 0)
    assert grades == (0, 0)


@pytest.mark.parametrize("kind,order,leg,seed", [("planes", 2, 5.0, 11), ("cylinder", 3, 8.0, 1)])
def test_blends_between_irregular_coarse_sides_grade_their_order(kind, order, leg, seed):
    # Issue 13's family (benchmarks/blend_family.py): jittered sides of 0.4 to 0.6 mm edges, a plane and a
    # plane tilted 60 degrees or a cylinder of radius 12 mm, short legs. Reference: the exact section
    # jets hold the order on both seams (blend_fixtures.achieved_order); the estimator must read it with
    # the general profile (common practice, from memory). At rows a quarter of the chain edges apart
    # the first read K = 1 (G2 'not resolved', 0.013 +- 0.01 per mm) and the second failed G3 at seam A
    # (0.021 +- 0.003 per mm^2 against 0.01): the curvature's build-up spanned 3 to 5 rows.
    a, b = irregular_pair(seed, kind, leg)
    blend = build_blend(a.part, a.chain, b.part, b.chain, order)
    assert blend.problems == ()
    assert min(achieved_order(blend, a, b)) >= order
    merged = merge_with_patch(a.part, blend, b.part)
    grades = [grade_seam(merged.part, seam, PROFILE).achieved for seam in (merged.seam_a, merged.seam_b)]
    assert min(grades) >= order, grades
