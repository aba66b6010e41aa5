"""Sections across a seam, checked against the construction of an extruded fillet.

The part is a line, a circular arc of radius 5 mm and a line, extruded (tests/fixtures/synthetic.py).
Its exact cross-section is known from the construction: in any plane normal to the straight seam the
arc side is a circle of radius 5 mm through the seam point and the line sides are straight lines
through it (elementary geometry of a cylinder cut normal to its axis)."""

from __future__ import annotations

import numpy as np
import pytest

from surfcheck.grading.sections import cut_sections
from tests.fixtures import synthetic


@pytest.fixture(scope="module")
def extruded_arc():
    part, seams = synthetic.part_and_seams(synthetic.build("arc", "extrude"))
    return part, {seam.id: (seam, cut_sections(part, seam)) for seam in seams}


def _circle(points: np.ndarray) -> tuple[np.ndarray, float]:
    """Algebraic least-squares circle (Kasa 1976, IEEE Trans. Instrum. Meas. 25:8): centre, radius."""
    A = np.c_[2.0 * points, np.ones(len(points))]
    c = np.linalg.lstsq(A, (points**2).sum(axis=1), rcond=None)[0]
    return c[:2], float(np.sqrt(c[2] + c[:2] @ c[:2]))


def test_frames_are_orthonormal_and_sit_on_the_seam(extruded_arc):
    part, by_id = extruded_arc
    for seam, sections in by_id.values():
        assert sections
        for s in sections:
            frame = np.stack([s.tangent, s.normal, s.cross])
            np.testing.assert_allclose(frame @ frame.T, np.eye(3), atol=1e-9)
            # the seam is a straight segment: its station lies on the line through its vertices
            p0, p1 = seam.points[0], seam.points[-1]
            u = (p1 - p0) / np.linalg.norm(p1 - p0)
            off = s.origin - p0
            assert np.linalg.norm(off - (off @ u) * u) < 1e-6
            assert abs(s.tangent @ u) == pytest.approx(1.0, abs=1e-9)


def test_sides_fall_on_their_own_half_of_the_plane(extruded_arc):
    _, by_id = extruded_arc
    for _, sections in by_id.values():
        for s in sections:
            assert s.welded
            np.testing.assert_array_equal(s.end_a, s.end_b)
            assert s.side_a[:, 0].max() <= 1e-9 and s.side_b[:, 0].min() >= -1e-9
            assert np.median(s.side_a[:, 0]) < 0 < np.median(s.side_b[:, 0])


def test_points_move_only_along_the_seam_into_the_plane(extruded_arc):
    part, by_id = extruded_arc
    for _, sections in by_id.values():
        for s in sections:
            for xy, ids in ((s.side_a, s.ids_a), (s.side_b, s.ids_b)):
                d = s.to_world(xy) - part.vertices[ids]
                across = d - (d @ s.tangent)[:, None] * s.tangent
                assert np.abs(across).max() < 1e-9


def test_arc_side_is_the_circle_and_line_side_the_line(extruded_arc):
    _, by_id = extruded_arc
    for seam_id, arc_side in (("a:b", "side_b"), ("b:c", "side_a")):
        line_side = "side_a" if arc_side == "side_b" else "side_b"
        for s in by_id[seam_id][1]:
            centre, radius = _circle(getattr(s, arc_side))
            assert radius == pytest.approx(synthetic.RADIUS, rel=1e-9)
            assert np.linalg.norm(centre) == pytest.approx(synthetic.RADIUS, rel=1e-9)  # through the seam
            line = getattr(s, line_side)
            assert np.linalg.svd(line, compute_uv=False)[1] < 1e-9 * len(line)  # one line through 0
