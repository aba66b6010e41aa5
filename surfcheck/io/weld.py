"""Welding: merge the vertices of a mesh closer than a tolerance."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.spatial import cKDTree

from surfcheck.part import median_edge_length

WELD_RELATIVE_TOLERANCE = 1e-4  # of the median edge length; common practice, no published source


def weld_tolerance(V: np.ndarray, F: np.ndarray) -> float:
    """WELD_RELATIVE_TOLERANCE of the median edge length (part.median_edge_length), which a stray far
    vertex cannot widen the way it widens the bounding box."""
    return WELD_RELATIVE_TOLERANCE * median_edge_length(V, F)


def weld_vertices(V: np.ndarray, F: np.ndarray, tolerance: float | None = None):
    """Merge vertices closer than ``tolerance`` (default: weld_tolerance, from the median edge length).

    Returns the used vertices, re-indexed faces and how many vertices were merged away.
    """
    if tolerance is None:
        tolerance = weld_tolerance(V, F)
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
