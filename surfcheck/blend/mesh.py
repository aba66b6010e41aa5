"""Triangulation of a blend patch: a grid of rows across the gap, with the two end rows zipped onto the
chains' own vertices so the patch welds to each part without T-junctions.

Rows are ordered by the cross parameter t and, within a row, by the along parameter u. Every triangle
is counter-clockwise in the (u, t) plane. Zipping two rows of different vertex counts advances along
whichever row has the next smaller parameter (the greedy rule for strips between contours; Christiansen
and Sederberg, "Conversion of complex contour line definitions into polygonal element mosaics",
SIGGRAPH 1978).
"""

from __future__ import annotations

import numpy as np


def zip_rows(lower: np.ndarray, lower_u: np.ndarray, upper: np.ndarray, upper_u: np.ndarray,
             closed: bool) -> np.ndarray:
    """Triangles joining two rows of vertex ids, each sorted by its parameter u in [0, 1].

    On a closed strip both rows wrap around: each row's first vertex is repeated at u + 1.
    """
    if closed:
        lower, lower_u = np.append(lower, lower[0]), np.append(lower_u, lower_u[0] + 1.0)
        upper, upper_u = np.append(upper, upper[0]), np.append(upper_u, upper_u[0] + 1.0)
    events_u = np.concatenate([lower_u[1:], upper_u[1:]])
    on_lower = np.concatenate([np.ones(len(lower) - 1, bool), np.zeros(len(upper) - 1, bool)])
    on_lower = on_lower[np.argsort(events_u, kind="stable")]
    i_after = np.cumsum(on_lower)
    j_after = np.cumsum(~on_lower)
    i_before = i_after - on_lower
    j_before = j_after - ~on_lower
    lower_step = np.stack([lower[i_before], lower[i_after], upper[j_before]], axis=1)
    upper_step = np.stack([lower[i_before], upper[j_after], upper[j_before]], axis=1)
    return np.where(on_lower[:, None], lower_step, upper_step)


def grid_triangles(first: int, rows: int, columns: int, closed: bool) -> np.ndarray:
    """Two triangles per grid cell for ``rows`` x ``columns`` vertices numbered row-major from ``first``."""
    if rows < 2:
        return np.zeros((0, 3), dtype=np.int64)
    r, c = np.meshgrid(np.arange(rows - 1), np.arange(columns if closed else columns - 1), indexing="ij")
    c_next = (c + 1) % columns
    a = first + r * columns + c
    b = first + r * columns + c_next
    d = first + (r + 1) * columns + c
    e = first + (r + 1) * columns + c_next
    quads = np.stack([a, b, e, d], axis=-1).reshape(-1, 4)
    return np.concatenate([quads[:, [0, 1, 2]], quads[:, [0, 2, 3]]]).astype(np.int64)
