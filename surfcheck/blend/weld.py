"""Welding a blend patch to its parts: one vertex list, the patch's chain rows replaced by the chains'
own vertices, face groups kept (the original names, then the patch's group)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.seams import Curve


@dataclass(frozen=True)
class Welded:
    """Arrays of the welded mesh; ``patch_faces`` indexes its patch faces, ``seam_a`` / ``seam_b`` are
    the welded vertex ids of chain A / chain B in chain order, ``b_offset`` the shift of part B's ids."""

    vertices: np.ndarray
    faces: np.ndarray
    face_group: np.ndarray
    group_names: tuple[str, ...]
    patch_faces: np.ndarray
    patch_group: int
    seam_a: np.ndarray
    seam_b: np.ndarray
    b_offset: int


def boundary_direction(part: Part, chain: Curve) -> int:
    """+1 when the part's triangles run along the chain's edges in the chain's vertex order, -1 against."""
    v = chain.vertices
    edges = np.stack([v, np.roll(v, -1)], axis=1) if chain.closed else np.stack([v[:-1], v[1:]], axis=1)
    n = part.n_vertices
    half = part.half_edges[:, 0] * n + part.half_edges[:, 1]
    forward = np.isin(edges[:, 0] * n + edges[:, 1], half).sum()
    backward = np.isin(edges[:, 1] * n + edges[:, 0], half).sum()
    if forward == backward == 0:
        raise InputError(f"{chain.id} does not run along the part's edges; pass a chain of this part")
    return 1 if forward > backward else -1


def weld(part_a: Part, chain_a: Curve, patch_vertices: np.ndarray, patch_faces: np.ndarray,
         row_a: np.ndarray, row_b: np.ndarray, part_b: Part, chain_b: Curve, patch_name: str = "blend") -> Welded:
    """Part A, the patch and part B (unless it is part A) as one mesh, welded along both chains."""
    same = part_b is part_a
    n_a = part_a.n_vertices
    interior = np.setdiff1d(np.arange(len(patch_vertices)), np.concatenate([row_a, row_b]))
    b_offset = 0 if same else n_a + len(interior)
    to_welded = np.empty(len(patch_vertices), dtype=np.int64)
    to_welded[interior] = n_a + np.arange(len(interior))
    to_welded[row_a] = chain_a.vertices
    to_welded[row_b] = chain_b.vertices + b_offset
    names = list(part_a.group_names)
    name = patch_name
    while name in names or (not same and name in part_b.group_names):
        name += "_1"
    names.append(name)
    patch_group = len(names) - 1
    pieces_v = [part_a.vertices, patch_vertices[interior]]
    pieces_f = [part_a.faces, to_welded[patch_faces]]
    pieces_g = [part_a.face_group, np.full(len(patch_faces), patch_group)]
    if not same:
        renamed = [g if g not in names else f"{g}_b" for g in part_b.group_names]
        pieces_v.append(part_b.vertices)
        pieces_f.append(part_b.faces + b_offset)
        pieces_g.append(part_b.face_group + len(names))
        names += renamed
    patch_ids = part_a.n_faces + np.arange(len(patch_faces))
    return Welded(np.vstack(pieces_v), np.vstack(pieces_f), np.concatenate(pieces_g), tuple(names), patch_ids,
                  patch_group, chain_a.vertices.copy(), chain_b.vertices + b_offset, b_offset)
