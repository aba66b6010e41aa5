"""Ordered polylines: lengths of a unit square by elementary geometry (its perimeter is 4, from memory
of nothing but the definition)."""

import numpy as np

from surfcheck.polyline import cumulative_arc_length, polyline_length, ring, segment_lengths

SQUARE = np.array([[0.0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]])


def test_closed_square_has_perimeter_four():
    assert polyline_length(SQUARE, closed=True) == 4.0
    assert np.allclose(cumulative_arc_length(SQUARE, closed=True), [0, 1, 2, 3, 4])
    assert len(ring(SQUARE, True)) == 5 and np.array_equal(ring(SQUARE, True)[-1], SQUARE[0])


def test_open_square_path_has_three_sides():
    assert polyline_length(SQUARE, closed=False) == 3.0
    assert np.allclose(segment_lengths(SQUARE, closed=False), [1, 1, 1])
