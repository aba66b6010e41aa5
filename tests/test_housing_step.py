"""The demo housing built by the CAD kernel (surfcheck.demo.housing_brep) and written as STEP.

Truth by construction: a sharp corner (G0), a circular arc of r = 6 mm between lines (G1, curvature
jump 1/6 per mm), a quintic Bezier curve with three control points on each line (G2: by the Bernstein
form of its end derivatives, Farin 2002, Curves and Surfaces for CAGD, section 5.3, the curvature is
zero at its ends and its rate is not), and a degree-7 Bezier curve with four on each line (G3).
Exact grading reads these classes off the B-rep; grading the kernel's own tessellations, as a user
grades a CAD export, must never state a wrong class: it may stop short (not resolved), never fail an
order the seam meets or pass one it does not.
"""

from __future__ import annotations

import pytest

pytest.importorskip("OCP")

from surfcheck.demo.housing_brep import FILLET_RADIUS, write_housing_step  # noqa: E402
from surfcheck.demo.scenario import DESIGNED  # noqa: E402
from surfcheck.grading.exact import grade_brep  # noqa: E402
from surfcheck.grading.run import grade_part  # noqa: E402
from surfcheck.grading.tolerances import load_profile  # noqa: E402
from surfcheck.grading.status import Status  # noqa: E402
from surfcheck.io import read_part  # noqa: E402
from surfcheck.seams import SeamIndex  # noqa: E402


@pytest.fixture(scope="module")
def housing_step(tmp_path_factory):
    return write_housing_step(tmp_path_factory.mktemp("brep") / "housing.step")


def _designed(grade) -> int:
    pair = tuple(grade.groups)
    return DESIGNED.get(pair, DESIGNED.get(pair[::-1]))


def test_the_step_file_names_every_face_after_its_profile_piece(housing_step):
    loaded = read_part(housing_step)
    names = set(loaded.part.group_names)
    assert {g for pair in DESIGNED for g in pair} <= names
    assert len(SeamIndex(loaded.part).seams) == len(DESIGNED)


def test_exact_grades_are_the_classes_built(housing_step):
    loaded = read_part(housing_step)
    run = grade_brep(loaded.part, loaded.brep, SeamIndex(loaded.part).seams, load_profile("general"))
    assert len(run.grades) == len(DESIGNED)
    for grade in run.grades:
        assert grade.achieved == _designed(grade), grade.groups
        if _designed(grade) == 1:  # the arc's curvature jump 1/r, exactly (circle of radius r)
            assert grade.orders[2].value == pytest.approx(1.0 / FILLET_RADIUS, rel=1e-9)


@pytest.mark.parametrize("deflection", [0.01, 0.05, 0.1])
def test_the_kernel_tessellation_never_grades_a_wrong_class(housing_step, deflection):
    loaded = read_part(housing_step, deflection=deflection)
    run = grade_part(loaded.part, SeamIndex(loaded.part).seams, load_profile("general"))
    assert len(run.grades) == len(DESIGNED)
    for grade in run.grades:
        designed = _designed(grade)
        assert grade.achieved <= designed, (deflection, grade.groups)
        for order in range(designed + 1):  # an order the seam meets by construction never fails
            assert grade.orders[order].status != Status.FAIL, (deflection, grade.groups, order)
        if designed < 3:  # the order it misses is never passed
            assert grade.orders[designed + 1].status != Status.OK, (deflection, grade.groups)
    # and the seams a CAD export is most often checked for are decided: sharp edge and fillet
    short = [g.groups for g in run.grades if _designed(g) <= 1 and g.achieved != _designed(g)]
    assert not short, short


@pytest.mark.parametrize("deflection", [0.01, 0.05])
def test_the_g2_blend_reads_g2_on_fine_tessellations(housing_step, deflection):
    # the quintic blend's seams: G2 by construction, measured G2 at both deflections (docs/continuity.md,
    # section 8); at 0.01 mm this needs the first reference to follow the blend (section 2)
    loaded = read_part(housing_step, deflection=deflection)
    run = grade_part(loaded.part, SeamIndex(loaded.part).seams, load_profile("general"))
    blend = [g for g in run.grades if "front-blend" in g.groups]
    assert len(blend) == 2 and all(g.achieved == 2 for g in blend), [(g.groups, g.achieved) for g in blend]
