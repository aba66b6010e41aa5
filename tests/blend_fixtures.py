"""Test surfaces of our own with a gap between them, as meshes with their boundary chains.

Each side is a parametric sheet X(a, w): a runs along the boundary, w across it; side A covers
w <= 0 and side B covers w >= gap, both triangulated with the same (a, w) orientation so their normals
agree across the gap. The boundary chains are the sheets' rows at w = 0 and w = gap.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.spatial.transform import Rotation

from surfcheck.part import Part
from surfcheck.seams import Curve

Sheet = Callable[[np.ndarray, np.ndarray], np.ndarray]  # (a, w) arrays -> (..., 3) points


@dataclass(frozen=True)
class Side:
    part: Part
    chain: Curve
    sheet: Sheet
    w_edge: float  # w of the boundary row
    a_values: np.ndarray  # a of each chain vertex, in chain order


def sheet_part(sheet: Sheet, a_values: np.ndarray, w_values: np.ndarray, closed: bool, name: str,
               edge_row: int, rotation: Rotation | None = None) -> Side:
    """Triangulate a sheet on the (a, w) grid; the chain is the row w = w_values[edge_row]."""
    A, W = np.meshgrid(a_values, w_values, indexing="ij")
    V = sheet(A, W).reshape(-1, 3)
    if rotation is not None:
        V = rotation.apply(V)
    na, nw = len(a_values), len(w_values)
    i, j = np.meshgrid(np.arange(na if closed else na - 1), np.arange(nw - 1), indexing="ij")
    i1 = (i + 1) % na
    a, b, c, d = i * nw + j, i1 * nw + j, i1 * nw + j + 1, i * nw + j + 1
    F = np.concatenate([np.stack([a, b, c], -1).reshape(-1, 3), np.stack([a, c, d], -1).reshape(-1, 3)])
    part = Part(V, F, np.zeros(len(F), dtype=np.int64), (name,), "mm", f"{name}.obj")
    ids = np.arange(na) * nw + edge_row
    chain = Curve(f"{name}-edge", "loop" if closed else "chain", ids, V[ids], closed, (name,))
    return Side(part, chain, sheet, float(w_values[edge_row]), a_values)


def plane(a, w):
    return np.stack([a, w, np.zeros_like(a)], axis=-1)


def tilted_plane(y0: float, z0: float, angle_deg: float, gap: float) -> Sheet:
    c, s = np.cos(np.radians(angle_deg)), np.sin(np.radians(angle_deg))
    return lambda a, w: np.stack([a, y0 + (w - gap) * c, z0 + (w - gap) * s], axis=-1)


def cylinder_along_rulings(yc: float, zc: float, radius: float, theta0: float, gap: float) -> Sheet:
    """Cylinder about the x axis through (yc, zc); w is arc length round it from angle theta0."""
    def sheet(a, w):
        theta = theta0 + (w - gap) / radius
        return np.stack([a, yc + radius * np.sin(theta), zc - radius * np.cos(theta)], axis=-1)
    return sheet


def parabolic_sheet(y0: float, z0: float, q: float, shift: float, gap: float) -> Sheet:
    """z = z0 + q ((y - y0 + shift)^2 - shift^2): its cross curvature changes along the cross direction."""
    def sheet(a, w):
        y = w - gap
        return np.stack([a, y0 + y, z0 + q * ((y + shift) ** 2 - shift**2)], axis=-1)
    return sheet


def coaxial_cylinder(radius: float, z0: float, gap: float) -> Sheet:
    """Cylinder about the z axis; a is the angle, w the height (shifted so that w = gap is z0)."""
    return lambda a, w: np.stack([radius * np.cos(a), radius * np.sin(a), z0 + (w - gap)], axis=-1)


def pair(sheet_a: Sheet, sheet_b: Sheet, gap: float, n_a: int, n_b: int, closed: bool = False,
         length: float = 20.0, width: float = 6.0, rows: int = 16, seed: int | None = None):
    """Side A on w in [-width, 0] and side B on w in [gap, gap + width], randomly rotated when seeded."""
    rotation = Rotation.random(random_state=seed) if seed is not None else None
    if closed:
        a_a = np.arange(n_a) * 2 * np.pi / n_a
        a_b = np.arange(n_b) * 2 * np.pi / n_b + 0.37 * 2 * np.pi / n_b  # chains start apart
    else:
        a_a, a_b = np.linspace(0.0, length, n_a), np.linspace(0.0, length, n_b)
    side_a = sheet_part(sheet_a, a_a, np.linspace(-width, 0.0, rows), closed, "side_a", rows - 1, rotation)
    side_b = sheet_part(sheet_b, a_b, np.linspace(gap, gap + width, rows), closed, "side_b", 0, rotation)
    return side_a, side_b, rotation
