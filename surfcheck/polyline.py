"""Ordered polylines (seams, boundary chains, loops): the closing segment, segment lengths, arc length."""

import numpy as np


def ring(points: np.ndarray, closed: bool) -> np.ndarray:
    """The points in order, with the first repeated at the end when the polyline is closed.

    Parameters
    ----------
    points : (n, 3) float
        Polyline vertices in order.
    closed : bool
        Whether the last point joins the first.

    Returns
    -------
    (n + 1, 3) float if closed, else (n, 3) float
    """
    points = np.asarray(points, dtype=float)
    return np.vstack([points, points[:1]]) if closed else points


def segment_lengths(points: np.ndarray, closed: bool) -> np.ndarray:
    """Length of each segment, the closing one last on a closed polyline.

    Parameters
    ----------
    points : (n, 3) float
        Polyline vertices in order.
    closed : bool
        Whether the last point joins the first.

    Returns
    -------
    (n, ) float if closed, else (n - 1,) float
    """
    return np.linalg.norm(np.diff(ring(points, closed), axis=0), axis=1)


def cumulative_arc_length(points: np.ndarray, closed: bool) -> np.ndarray:
    """Arc length from the first point to each point of the ring (the return to the first point last
    on a closed polyline, so the final entry is the whole length).

    Parameters
    ----------
    points : (n, 3) float
        Polyline vertices in order.
    closed : bool
        Whether the last point joins the first.

    Returns
    -------
    (n + 1,) float if closed, else (n,) float, starting at 0.
    """
    return np.concatenate([[0.0], np.cumsum(segment_lengths(points, closed))])


def polyline_length(points: np.ndarray, closed: bool) -> float:
    """Total length of the polyline, the closing segment included when closed."""
    return float(segment_lengths(points, closed).sum())
