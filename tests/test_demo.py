"""The demo scenario: the committed sample files are what the generator makes, and stay small."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from surfcheck.demo.scenario import DESIGNED, write_samples
from surfcheck.io import load_part
from surfcheck.seams import SeamIndex

SAMPLES = Path(__file__).resolve().parents[1] / "sample_meshes"


def test_committed_samples_match_the_generator(tmp_path):
    fresh = write_samples(tmp_path)
    for name, path in fresh.items():
        committed = SAMPLES / name
        assert committed.stat().st_size < 2 * 1024 * 1024, name  # each file under 2 MB
        a, b = load_part(committed), load_part(path)
        assert a.group_names == b.group_names and np.array_equal(a.faces, b.faces), name
        np.testing.assert_allclose(a.vertices, b.vertices, atol=1e-6)


def test_grouped_samples_have_every_designed_seam():
    for name in ("housing.obj", "housing.ply"):
        part = load_part(SAMPLES / name)
        pairs = {c.groups for c in SeamIndex(part).seams}
        assert pairs == set(DESIGNED), name
    scan = load_part(SAMPLES / "housing-scan.stl")
    assert scan.group_names == ("part",)  # the scan carries no groups


def test_nominal_sample_grades_as_built():
    # Reference: the class each seam was built to (surfcheck.demo.scenario.DESIGNED): a heading jump is G0, a
    # line into a circular arc G1 (curvature 0 -> 1/r, a handbook fact), a clothoid G2 (curvature
    # linear in arc length, the Euler spiral), a cubic smooth-step curvature ramp G3 (its derivative
    # vanishes at both ends: Hermite smoothstep, Ebert et al., Texturing and Modeling).
    from surfcheck.grading.run import grade_seam
    from surfcheck.grading.tolerances import load_profile

    part = load_part(SAMPLES / "housing.obj")
    profile = load_profile("general")
    achieved = {seam.groups: grade_seam(part, seam, profile).achieved for seam in SeamIndex(part).seams}
    assert achieved == DESIGNED


def test_gap_blends_grade_their_order_on_the_merged_part():
    # Reference: the demo's design and the requirement of its issue (a patch of order K bridges the
    # gap, and grading the merged part confirms the order). A patch of order K meets both sides with
    # G^K contact by construction (smooth step flat to order K, K-jet extensions: docs/blend.md);
    # graded with the general profile (common practice, from memory) at the default resolution.
    from surfcheck.blend.patch import build_blend, merge_with_patch, prove_blend
    from surfcheck.demo.scenario import gap_chains
    from surfcheck.grading.tolerances import load_profile

    part = load_part(SAMPLES / "housing-gap.obj")
    chain_a, chain_b = gap_chains(part)
    assert {chain_a.id, chain_b.id} == {"chain-2.3", "chain-1.12"}  # the ids the demo's commands use
    for order in (1, 2, 3):
        blend = build_blend(part, chain_a, part, chain_b, order)
        assert blend.problems == ()
        grades = prove_blend(merge_with_patch(part, blend), load_profile("general"))
        assert min(g.achieved for g in grades) >= order, (order, [(g.achieved, g.limited_by) for g in grades])
