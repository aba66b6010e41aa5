"""Welding: merge the vertices of a mesh closer than a tolerance."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.spatial import cKDTree

WELD_RELATIVE_TOLERANCE = 1e-7  # of the bounding-box diagonal; common practice, no published source


def weld_vertices(V: np.ndarray, F: np.ndarray, tolerance: float | None = None):
    """Merge vertices closer than ``tolerance`` (default: 1e-7 of the bounding-box diagonal).

    Returns the used vertices, re-indexed faces and how many vertices were merged away.
    """
    if tolerance is None:
        tolerance = WELD_RELATIVE_TOLERANCE * float(np.linalg.norm(np.ptp(V, axis=0)) or 1.0)
    pairs = cKDTree(V).query_pairs(tolerance, output_type="ndarray")
    representative = np.arange(len(V))
    if len(pairs):
        graph = sp.coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(len(V), len(V)))
        _, labels = sp.csgraph.connected_components(graph, directed=False)
        first = np.full(labels.max() + 1, len(V))
        np.minimum.at(first, labels, np.arange(len(V)))
        representative = first[labels]
    merged = len(V) - len(np.unique(representative))
    used, new_index = np.unique(representative[F.reshape(-1)], return_inverse=True)
    return V[used], new_index.reshape(-1, 3).astype(np.int64), merged
