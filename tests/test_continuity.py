"""Continuity grading against synthetic fillets of known class (tests/synthetic.py).

Sources: the class of each join follows from the prescribed curvature (a corner is G0 only; an arc
after a line has a curvature jump of 1/r, the curvature of a circle of radius r, a handbook fact;
a clothoid's curvature is linear in arc length, so its rate jumps by (k1 - k0) / L where it meets a
line or an arc; a cubic Hermite smooth step 3x^2 - 2x^3 has zero slope at both ends, so the
curvature rate is continuous there). The decision rule is the guard-band rule of ISO 14253-1 with
the expanded uncertainty U = k u of JCGM 100:2008 (GUM).
"""

from __future__ import annotations

import json

import jsonschema
import numpy as np
import pytest

from surfcheck.demo import shapes as S
from surfcheck.grading.continuity import decide
from surfcheck.grading.run import grade_seam
from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.seams import SeamIndex
from surfcheck.grading.tolerances import GENERAL, SCAN
from tests.fixtures.blend_parts import blend_part
from tests.fixtures.grade_schema import seam_grade_schema
from tests.fixtures.synthetic import RADIUS, RAMP, build, knee_beside_line, part_and_seams

EXPECTED = {"sharp": 0, "arc": 1, "clothoid": 2, "smoothstep": 3}  # designed class of every seam
NOISE = 0.01  # mm, a scanner's order on millimetre-scale fillets (issue 4)


def grades(mesh, profile=GENERAL, vertices=None, **kw):
    part, seams = part_and_seams(mesh, vertices)
    return [grade_seam(part, seam, profile, **kw) for seam in seams]


@pytest.mark.parametrize("sweep", ["extrude", "revolve"])
@pytest.mark.parametrize("kind", list(EXPECTED))
def test_clean_meshes_grade_exactly(kind, sweep):
    # class by construction from the prescribed curvature (see module docstring), randomly rotated
    for g in grades(build(kind, sweep, rotation=7)):
        assert g.achieved == EXPECTED[kind], (g.id, g.achieved, g.limited_by)


def _within(value, truth, uncertainty, k=2.0):
    # |measured - truth| <= k u, plus a rounding floor of 1e-9 relative
    return abs(value - truth) <= k * uncertainty + 1e-9 * max(1.0, abs(truth))


def test_arc_curvature_jump_equals_one_over_r():
    # circle of radius r: curvature 1/r (handbook); the line's is 0, so the G2 jump is 1/r
    for g in grades(build("arc", "extrude")):
        for st in g.stations:
            jump = st.orders[2]
            assert _within(jump.value, 1.0 / RADIUS, jump.uncertainty)
            assert _within(st.orders[1].value, 0.0, st.orders[1].uncertainty)  # tangent continuous


def test_sharp_edge_angle_equals_corner():
    # the corner turns the heading by 60 degrees (by construction)
    (g,) = grades(build("sharp", "revolve"))
    for st in g.stations:
        assert _within(st.orders[1].value, 60.0, st.orders[1].uncertainty)


def test_clothoid_rate_jump_equals_slope_of_curvature():
    # Euler spiral: d kappa / ds = (k1 - k0) / L = 1 / (r L), jumping to 0 on the line and on the arc
    for g in grades(build("clothoid", "revolve")):
        for st in g.stations:
            assert _within(st.orders[3].value, 1.0 / (RADIUS * RAMP), st.orders[3].uncertainty)
            assert _within(st.orders[2].value, 0.0, st.orders[2].uncertainty)


def test_smoothstep_rate_is_continuous():
    # cubic Hermite step: phi'(0) = phi'(1) = 0, so the curvature rate is 0 on both sides of each seam
    for g in grades(build("smoothstep", "extrude")):
        for st in g.stations:
            assert _within(st.orders[3].value, 0.0, st.orders[3].uncertainty)
            assert st.orders[3].value < 0.1 * GENERAL.g3_abs


@pytest.mark.parametrize("sweep", ["extrude", "revolve"])
def test_noisy_scan_grades(sweep):
    # issue 4: with normal noise 0.01 mm and the scan profile, the sharp edge and the arc still grade
    # 0 and 1, the curvature-continuous blends at least 2
    for kind, lowest in (("sharp", 0), ("arc", 1), ("clothoid", 2), ("smoothstep", 2)):
        mesh = build(kind, sweep, rotation=3)
        noisy = S.add_normal_noise(mesh.vertices, mesh.faces, NOISE, seed=3)
        for g in grades(mesh, SCAN, noisy):
            if lowest < 2:
                assert g.achieved == lowest, (kind, g.id, g.achieved, g.limited_by)
            else:
                assert g.achieved >= lowest, (kind, g.id, g.achieved, g.limited_by)


@pytest.mark.parametrize("kind", ["arc", "clothoid"])
def test_coarse_and_fine_meshes_give_the_same_grade(kind):
    # the same surface sampled at 0.1 and 0.4 mm (a quarter of the transition length over 5 edges)
    fine = [g.achieved for g in grades(build(kind, "extrude", edge=0.1))]
    coarse = [g.achieved for g in grades(build(kind, "extrude", edge=0.4))]
    assert fine == coarse == [EXPECTED[kind]] * len(fine)


def test_a_finely_meshed_side_is_fitted_on_its_own_edges():
    # kappa = k s^2 / (s^2 + knee^2) has kappa(0) = kappa'(0) = 0 (direct differentiation): G3 with the
    # line by construction. Meshed at 0.05 mm beside a 0.4 mm line, its curvature reaches k / 2 within
    # 0.8 mm, under three of the line's edges: windows in the line's edges read a false jump there.
    part, seam = knee_beside_line(0.8)
    assert grade_seam(part, seam, GENERAL).achieved == 3
    part, seam = knee_beside_line(0.5)  # steeper still: at least no false G2 failure
    g = grade_seam(part, seam, GENERAL)
    assert g.achieved >= 2 and g.orders[3].status != "fail", (g.achieved, g.limited_by)


def test_separate_shells_grade_like_welded_ones():
    # the same geometry with duplicate (unshared) vertices on the seams
    welded = [g.achieved for g in grades(build("clothoid", "revolve"))]
    shells = grades(build("clothoid", "revolve", separate_shells=True))
    assert [g.achieved for g in shells] == welded
    assert not shells[0].welded


def test_naming_the_sides_the_other_way_round_keeps_the_seam_separate():
    # Separate shells (duplicate vertices on the seam) are not welded whichever group is named first;
    # B:A must report the same "welded" and the same orders as A:B (truth by construction).
    mesh = build("clothoid", "revolve", separate_shells=True)
    part, _ = part_and_seams(mesh)
    a, b = mesh.seams[0].group_a, mesh.seams[0].group_b
    index = SeamIndex(part)
    forward, backward = (grade_seam(part, index.find(spec)[0], GENERAL) for spec in (f"{a}:{b}", f"{b}:{a}"))
    assert forward.welded is False and backward.welded is False
    assert backward.achieved == forward.achieved


def test_shell_moved_by_a_known_offset_gives_that_gap():
    # moving a shell by d perpendicular to the seam (here along the extrusion's cross direction at the
    # seam, which for the first seam of a profile heading +y at x = 30 is the x axis) opens a gap |d|
    offset = np.array([0.03, 0.0, 0.0])
    mesh = build("arc", "extrude", rotation=None, separate_shells=True, offsets={"b": tuple(offset)})
    g = grades(mesh)[0]
    for st in g.stations:
        gap = st.orders[0]
        assert _within(gap.value, 0.03, gap.uncertainty)
    assert g.orders[0].status == "fail" and g.achieved == -1  # 0.03 mm > G0 tolerance 0.01 mm


def test_decision_rule_guard_bands():
    # ISO 14253-1 guard bands with U = k u: conformance proven inside tol - U, non-conformance beyond tol + U
    assert decide(0.5, 0.1, 1.0, 2.0) == "ok"
    assert decide(0.9, 0.1, 1.0, 2.0) == "not resolved"
    assert decide(1.1, 0.1, 1.0, 2.0) == "not resolved"
    assert decide(1.3, 0.1, 1.0, 2.0) == "fail"
    assert decide(0.0, np.inf, 1.0, 2.0) == "not resolved"


def test_grade_json_shape():
    (g,) = grades(build("sharp", "extrude"), stations=3)
    doc = json.loads(json.dumps(g.to_dict()))
    assert doc["achieved"] == 0 and doc["stations"] == 3 and doc["groups"] == ["a", "b"]
    assert set(doc["orders"]) == {"G0", "G1", "G2", "G3"}
    for key in ("value", "uncertainty", "tolerance", "status", "unit", "max", "p95", "worst_station"):
        assert key in doc["orders"]["G1"]
    assert doc["orders"]["G1"]["status"] == "fail" and doc["limited_by"] == {"order": "G1", "status": "fail"}
    assert len(doc["station_values"]) == 3 and doc["station_values"][0]["G1"]["status"] == "fail"
    # the documented schema (docs/grade.schema.json, JSON Schema draft 2020-12) accepts the seam, checked
    # by the jsonschema reference validator; its required keys and additionalProperties: false make
    # the key sets exact, so a key added to or dropped from to_dict() without the schema fails here
    seam_schema = seam_grade_schema()
    jsonschema.validate(doc, seam_schema)
    for broken in ({**doc, "extra": 1}, {k: v for k, v in doc.items() if k != "achieved"}):
        with pytest.raises(jsonschema.ValidationError):
            jsonschema.validate(broken, seam_schema)


def test_a_loop_is_not_a_seam():
    part, (seam,) = part_and_seams(build("sharp", "extrude"))
    from dataclasses import replace

    with pytest.raises(InputError):
        grade_seam(part, replace(seam, kind="loop"), GENERAL)


def test_small_closed_loop_reads_only_its_own_side():
    # a kink of 11 degrees (by construction) on a closed seam of radius 7 at 0.5 mm edges: the far
    # side of the loop, 14 mm away in the same section plane, must not enter the fits
    profile = S.Profile((S.line(10, "a"), S.corner(11), S.line(10, "b")), start=(7.0, 0.0), heading_deg=90)
    (g,) = grades(S.revolve(profile, 0.5))
    assert g.achieved == 0 and g.orders[1].status == "fail"
    for st in g.stations:
        assert _within(st.orders[1].value, 11.0, st.orders[1].uncertainty)


def _labels_moved_into_b(mesh, rings: int):
    """The part with the first seam's labels moved ``rings`` rings of triangles into its side B, and
    that seam as found on the relabelled part."""
    part, (seam, *_) = part_and_seams(mesh)
    a, b = (part.group_index(g) for g in seam.groups)
    groups = part.face_group.copy()
    for _ in range(rings):
        touching = np.isin(part.faces, np.unique(part.faces[groups == a])).any(axis=1)
        groups[touching & (groups == b)] = a
    moved = Part(part.vertices, part.faces, groups, part.group_names)
    return moved, next(c for c in SeamIndex(moved).seams if set(c.groups) == set(seam.groups))


def test_transition_search_finds_a_sharp_corner_the_labels_missed():
    # a 60 degree corner (construction) whose labels sit two rings of triangles (about 0.2 mm) into side
    # B: without the search side A's data runs over the corner and its angle is lost; with it each
    # section is split at the corner and the angle is 60 degrees again (Hudson 1966 segmented regression)
    part, seam = _labels_moved_into_b(build("sharp", "extrude"), rings=2)
    blind = grade_seam(part, seam, GENERAL, stations=4)
    found = grade_seam(part, seam, GENERAL, stations=4, search=True)
    assert all(abs(st.orders[1].value - 60.0) > 10.0 for st in blind.stations)
    for st in found.stations:
        assert st.shift < 0.0  # back towards side A, where the corner is
        assert abs(st.orders[1].value - 60.0) <= max(2.0 * st.orders[1].uncertainty, 0.05)


def test_transition_search_leaves_right_labels_alone():
    # on correctly labelled clean joins of tests/synthetic.py no shift is significant, so the grades are
    # those without search (but see the next test)
    for kind in EXPECTED:
        mesh = build(kind, "extrude")
        found = grades(mesh, stations=3, search=True)
        assert all(st.shift == 0.0 for g in found for st in g.stations), kind
        assert [g.achieved for g in found] == [EXPECTED[kind]] * len(found)


def test_transition_search_leaves_a_right_circular_fillet_alone():
    part = blend_part("fillet")
    seam = next(c for c in SeamIndex(part).seams if set(c.groups) == {"a", "blend"})
    found = grade_seam(part, seam, GENERAL, stations=3, search=True)
    assert all(st.shift == 0.0 for st in found.stations)
    assert found.achieved == 1  # a circular fillet after a line is G1 (curvature jumps to 1/r)
