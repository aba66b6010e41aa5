"""Jump fields: where the curvature (G2) or the normal direction (G1) breaks, over the whole part.

At each vertex the neighbourhood of the jet fit (surfcheck.differential) is cut by a few lines through
the vertex in its tangent plane, the first along the direction of maximum curvature. Each half is
fitted on its own (only that side's data), with a height polynomial that is quadratic and, in the
direction across the cut, cubic, so a curvature that merely ramps is extrapolated to the vertex instead
of being averaged over the half. The curvature jump is the largest difference of the two halves' normal
curvatures across the cut; the tangent jump is the largest angle between the two halves' normals. This
is the one-sided comparison of DESIGN.md applied at every vertex instead of along a seam.

On a circular fillet the curvature-jump field peaks along the two tangent lines at about 1/r and is
near zero on the arc and on the faces; on a blend whose curvature rises smoothly (G2 and better) it
stays small everywhere. The tangent-jump field peaks on sharp edges at the edge's angle.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.differential import (
    MAX_RADIUS,
    Neighbourhoods,
    _as_mesh,
    _default_radius,
    _grid_of,
    _in_parallel,
    _jet_at,
    fit_height,
    jet_exponents,
    jet_shape,
)
from surfcheck.errors import InputError

JUMP_RADIUS = 1.5  # jump fits use this many times the curvature radius: each half holds half the points
ON_CUT = 1e-9  # points this close to the cut line (in radius units) belong to both halves
BALANCE = 0.9  # a cut is used only if the two sides' mean distances from it agree within this ratio
# where one side is a narrow strip (next to an open boundary) its cross-cut terms are not resolved
MAX_ALONG_OFFSET = 0.3  # ... and only if each side is balanced along the cut: centroid offset along
# the cut over the RMS distance along it (0 for a half disc, about 0.8 for a quarter disc, as where
# the cut meets an open boundary)


@dataclass(frozen=True, eq=False)
class JumpFields:
    """Per-vertex jumps: curvature (1/unit), tangent (degrees), the unit tangent direction across the
    cut that gave the largest curvature jump (n, 3), and the neighbourhood radius used."""

    curvature: np.ndarray
    tangent: np.ndarray
    across: np.ndarray
    radius: float


def half_fit_exponents(degree: int) -> list[tuple[int, int]]:
    """Monomials s^a t^b of a half fit: full quadratic, plus s^3 .. s^degree across the cut."""
    if not 2 <= degree <= 4:
        raise InputError(f"the one-sided fits take degree 2 to 4 across the cut, not {degree}")
    return jet_exponents(2) + [(a, 0) for a in range(3, degree + 1)]


def _cut_fits(s, t, z, w, exponents):
    """Fit both sides of the cut s = 0; return normal curvatures across the cut (c, 2), unit normals
    (c, 2, 3) and whether the pair of sides is fit to compare (c,): see BALANCE, MAX_ALONG_OFFSET."""
    sides = np.stack([w * (s >= -ON_CUT), w * (s <= ON_CUT)])  # (2, c, k)
    coef, _ = fit_height(s, t, z, sides, exponents)
    fs, ft, fss = coef[..., 1], coef[..., 2], 2.0 * coef[..., 3]  # exponents start 1, s, t, s^2
    W = np.sqrt(1.0 + fs * fs + ft * ft)
    normal = np.stack([-fs, -ft, np.ones_like(fs)], axis=-1) / W[..., None]
    count = np.stack([side.sum(axis=1) for side in sides], axis=1)
    safe = np.maximum(count, 1.0)
    spread = np.stack([np.einsum("ck,ck->c", np.abs(s), side) for side in sides], axis=1) / safe
    t_sum = np.stack([np.einsum("ck,ck->c", t, side) for side in sides], axis=1)
    t_square = np.stack([np.einsum("ck,ck->c", t * t, side) for side in sides], axis=1)
    along = np.abs(t_sum) / np.sqrt(t_square * safe + 1e-300)
    balanced = spread.min(axis=1) >= BALANCE * spread.max(axis=1)
    usable = (count.min(axis=1) >= 2 * len(exponents)) & balanced & (along.max(axis=1) <= MAX_ALONG_OFFSET)
    return -fss / (W * (1.0 + fs * fs)), normal, usable  # II(e, e) / I(e, e), e = d/ds, outward sign


def jump_fields(
    V: np.ndarray, F: np.ndarray, radius: float | None = None, directions: int = 4, degree: int = 3
) -> JumpFields:
    """Curvature-jump and tangent-jump fields at every vertex (see the module docstring).

    ``radius`` is the neighbourhood radius in part units (None: JUMP_RADIUS times the default jet
    radius of surfcheck.differential.default_radius, at most MAX_RADIUS mean edge lengths); ``directions`` the number of cut lines, evenly
    spaced over 180 degrees from the direction of maximum curvature; ``degree`` the half fits' degree
    across the cut.
    """
    V, F = _as_mesh(V, F)
    if directions < 1:
        raise InputError(f"the jump fields need at least one cut direction, not {directions}")
    exponents = half_fit_exponents(degree)
    normals, edge, grid = _grid_of(V, F)
    hood = Neighbourhoods.of_mesh(V, F, normals)
    if radius is None:
        radius = min(JUMP_RADIUS * _default_radius(grid, normals, edge), MAX_RADIUS * edge)
    hood = hood.at_radius(radius)

    def chunk(rows: np.ndarray):
        coef, (t1, t2, n), _, (x, y, z, w) = _jet_at(hood, rows, 2)
        *_, v1 = jet_shape(coef)
        start = np.arctan2(v1[:, 1], v1[:, 0])
        best_curvature = np.full(len(rows), np.nan)
        best_angle = np.full(len(rows), np.nan)
        best_theta = start.copy()
        for j in range(directions):
            theta = start + j * np.pi / directions
            c, sn = np.cos(theta)[:, None], np.sin(theta)[:, None]
            s, t = c * x + sn * y, c * y - sn * x
            bend, normal, both = _cut_fits(s, t, z, w, exponents)
            jump = np.where(both, np.abs(bend[:, 0] - bend[:, 1]), np.nan)
            dot = np.sum(normal[:, 0] * normal[:, 1], axis=1)
            sine = np.linalg.norm(np.cross(normal[:, 0], normal[:, 1]), axis=1)
            angle = np.where(both, np.arctan2(sine, dot), np.nan)
            larger = jump > np.nan_to_num(best_curvature, nan=-1.0)
            best_curvature = np.where(larger, jump, best_curvature)
            best_theta = np.where(larger, theta, best_theta)
            best_angle = np.fmax(best_angle, angle)
        across = np.cos(best_theta)[:, None] * t1 + np.sin(best_theta)[:, None] * t2
        return best_curvature / hood.radius, np.degrees(best_angle), across

    parts = list(zip(*_in_parallel(chunk, len(V), hood.count)))
    curvature, tangent, across = (np.concatenate(p) for p in parts)
    unused = np.linalg.norm(normals, axis=1) == 0
    curvature[unused], tangent[unused], across[unused] = np.nan, np.nan, np.nan
    return JumpFields(curvature, tangent, across, float(radius))


def curvature_jump_field(
    V: np.ndarray, F: np.ndarray, radius: float | None = None, directions: int = 4
) -> np.ndarray:
    """(n,) largest jump of normal curvature across a cut through each vertex, 1/unit (jump_fields)."""
    return jump_fields(V, F, radius, directions).curvature


def tangent_jump_field(
    V: np.ndarray, F: np.ndarray, radius: float | None = None, directions: int = 4
) -> np.ndarray:
    """(n,) largest angle between one-sided normals across a cut through each vertex, degrees."""
    return jump_fields(V, F, radius, directions).tangent
