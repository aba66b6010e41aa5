"""Mesh checks: what makes a mesh unusable (fatal) and what is only worth a warning."""

from __future__ import annotations

import numpy as np

from surfcheck.part import Part, median_edge_length

ZERO_AREA_RELATIVE = 1e-8  # of the squared median edge length; common practice, no published source


def clean_faces(V: np.ndarray, F: np.ndarray, G: np.ndarray) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Drop triangles that repeat a corner (collapsed) and exact duplicates; warn about both and
    about zero-area triangles that are kept (three distinct but collinear corners)."""
    warnings = []
    collapsed = (F[:, 0] == F[:, 1]) | (F[:, 1] == F[:, 2]) | (F[:, 0] == F[:, 2])
    if collapsed.any():
        warnings.append(f"{int(collapsed.sum())} collapsed triangles (a repeated corner) were dropped")
    F, G = F[~collapsed], G[~collapsed]
    _, first = np.unique(np.sort(F, axis=1), axis=0, return_index=True)
    if len(first) < len(F):
        warnings.append(f"{len(F) - len(first)} duplicate triangles were dropped")
        keep = np.sort(first)
        F, G = F[keep], G[keep]
    if len(F):
        a, b, c = (V[F[:, i]] for i in range(3))
        area2 = np.linalg.norm(np.cross(b - a, c - a), axis=1)
        scale = median_edge_length(V, F) ** 2 or 1.0  # not the bounding box: a stray vertex would inflate it
        degenerate = int((area2 <= ZERO_AREA_RELATIVE * scale).sum())
        if degenerate:
            warnings.append(f"{degenerate} zero-area triangles (collinear corners)")
    return F, G, warnings


def non_manifold_edges(part: Part) -> np.ndarray:
    """Indices of edges shared by more than two triangles."""
    return np.flatnonzero(part.edge_face_count > 2)


def fatal_defects(part: Part) -> str | None:
    """A one-line description of what makes the part unusable, or None."""
    bad = non_manifold_edges(part)
    if len(bad):
        where = part.vertices[part.edges[bad[0]]].mean(axis=0)
        at = ", ".join(f"{x:.4g}" for x in where)
        return (f"{len(bad)} non-manifold edges (an edge shared by more than two triangles), first at"
                f" ({at}); repair the mesh before grading")
    return None


def misoriented_edges(part: Part) -> int:
    """Interior edges whose two triangles run along them in the same direction (inconsistent winding)."""
    half = part.half_edges
    interior = part.edge_face_count[part.half_edge_edge] == 2
    forward = half[:, 0] < half[:, 1]
    per_edge = np.bincount(part.half_edge_edge[interior], weights=forward[interior].astype(float),
                           minlength=len(part.edges))
    two = part.edge_face_count == 2
    return int(((per_edge != 1) & two).sum())


def defect_summary(part: Part) -> dict:
    """Counts of the warnings-level defects of a loaded part."""
    return {
        "boundary_edges": int((part.edge_face_count == 1).sum()),
        "non_manifold_edges": int(len(non_manifold_edges(part))),
        "misoriented_edges": misoriented_edges(part),
        "components": int(part.face_components.max() + 1),
    }
