"""Boundary loops, chains and group seams on meshes whose answer is known by construction."""

from __future__ import annotations

import numpy as np
import pytest
import trimesh

from surfcheck import InputError, Part
from surfcheck.seams import SeamIndex


def grid(nx: int, ny: int, width: float, height: float) -> tuple[np.ndarray, np.ndarray]:
    """A flat rectangle [0, width] x [0, height] in z = 0, triangulated, facing +z."""
    x, y = np.meshgrid(np.linspace(0, width, nx + 1), np.linspace(0, height, ny + 1))
    V = np.c_[x.ravel(), y.ravel(), np.zeros(x.size)]
    i, j = np.meshgrid(np.arange(nx), np.arange(ny))
    a = (j * (nx + 1) + i).ravel()
    F = np.vstack([np.c_[a, a + 1, a + nx + 2], np.c_[a, a + nx + 2, a + nx + 1]])
    return V, F


def two_group_strip():
    V, F = grid(8, 2, 4.0, 1.0)
    G = (V[F].mean(axis=1)[:, 0] > 2.0).astype(int)
    return Part(V, F, G, ("left", "right"))


def test_open_box_has_one_loop_split_into_four_chains():
    box = trimesh.creation.box(extents=(2, 2, 2))
    box = box.subdivide().subdivide()
    keep = box.face_normals[:, 2] < 0.5  # remove the top
    part = Part(box.vertices, box.faces[keep], np.zeros(keep.sum()), ("box",))
    index = SeamIndex(part)
    assert len(index.loops) == 1 and index.loops[0].closed
    assert index.loops[0].length == pytest.approx(8.0)  # perimeter of a 2 x 2 square
    assert len(index.chains) == 4  # one chain per side of the square opening
    assert [c.length for c in index.chains] == pytest.approx([2.0] * 4)
    assert index.seams == []


def test_strip_of_two_groups_has_one_straight_seam():
    index = SeamIndex(two_group_strip())
    assert len(index.seams) == 1
    seam = index.seams[0]
    assert seam.groups == ("left", "right") and not seam.closed
    assert seam.length == pytest.approx(1.0)
    np.testing.assert_allclose(seam.points[:, 0], 2.0)
    assert index.find("left:right")[0] is seam
    assert index.find("right:left")[0].groups == ("right", "left")
    assert index.find(seam.id)[0] is seam
    # The outer loop is split at its four corners and where the group beside it changes.
    assert len(index.loops) == 1 and len(index.chains) == 6


def test_separate_shells_touching_within_tolerance_give_a_seam():
    V, F = grid(8, 2, 4.0, 1.0)
    left = F[V[F].mean(axis=1)[:, 0] < 2.0]
    right = F[V[F].mean(axis=1)[:, 0] > 2.0]
    gap = 0.01  # shells not sharing vertices, 0.01 apart across the seam
    V2 = np.vstack([V, V + [gap, 0, 0]])
    F2 = np.vstack([left, right + len(V)])
    G2 = np.r_[np.zeros(len(left)), np.ones(len(right))]
    part = Part(V2, F2, G2, ("left", "right"))
    seams = SeamIndex(part, touch_tolerance=0.05).seams
    assert len(seams) == 1 and seams[0].length == pytest.approx(1.0)
    assert SeamIndex(part, touch_tolerance=0.005).seams == []  # farther apart than the tolerance


def test_bad_specs_name_what_exists():
    index = SeamIndex(two_group_strip())
    with pytest.raises(InputError, match="no group named 'top'"):
        index.find("left:top")
    with pytest.raises(InputError, match="no seam, chain or loop 'seam-9'"):
        index.find("seam-9")


def test_ids_are_stable_under_face_reordering():
    part = two_group_strip()
    order = np.random.default_rng(0).permutation(part.n_faces)
    shuffled = Part(part.vertices, part.faces[order], part.face_group[order], part.group_names)
    first = [(c.id, c.length, tuple(c.points[0])) for c in SeamIndex(part).all()]
    second = [(c.id, c.length, tuple(c.points[0])) for c in SeamIndex(shuffled).all()]
    assert first == second


@pytest.mark.parametrize("gap", [0.3, 1.5])
def test_a_named_pair_across_a_gap_is_a_seam_graded_as_a_g0_fail(gap):
    # a flat strip whose second half is moved `gap` mm along its normal (separate shells): by
    # construction the two borders face each other across exactly that gap. Beyond the touch
    # tolerance, `all` does not pair them, but naming them does, and G0 fails with the gap as its value.
    from surfcheck.demo import shapes as S
    from surfcheck.grading.run import grade_seam
    from surfcheck.grading.tolerances import load_profile
    from tests.fixtures.synthetic import part_and_seams

    profile = S.Profile([S.line(6.0, "left"), S.line(6.0, "right")])
    mesh = S.extrude(profile, 8.0, 0.4, separate_shells=True, offsets={"right": (0.0, gap, 0.0)})
    part, _ = part_and_seams(mesh)
    index = SeamIndex(part)
    assert not index.seams  # the gap is beyond the touch tolerance: no seam of its own
    (seam,) = index.find("left:right")
    assert seam.groups == ("left", "right")
    g0 = grade_seam(part, seam, load_profile("general")).orders[0]
    assert g0.status == "fail"
    assert g0.value == pytest.approx(gap, rel=0.02)  # read to 2 % (common practice, no published source)
