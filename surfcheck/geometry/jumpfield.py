"""Jump fields: where the curvature (G2) or the normal direction (G1) breaks, over the whole part.

At each vertex the neighbourhood of the jet fit (surfcheck.geometry.differential) is cut by a few lines through
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

import numba
import numpy as np

from surfcheck.geometry.differential import MAX_RADIUS, fitted_radius, jet_grid
from surfcheck.errors import InputError
from surfcheck.geometry.jetkernel import (
    add_monomials,
    exponent_arrays,
    fit_local_jet,
    graph_shape,
    jet_exponents,
    solve_normal_equations,
    tangent_frame,
)
from surfcheck.geometry.neighbours import check_radius, local_neighbours, neighbour_work

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


@numba.njit(cache=True, parallel=True, fastmath=False)
def _jump_kernel(grid, rows, radius, slots, directions, jet_ex, jet_ey, half_ex, half_ey):
    """Per vertex of ``rows`` (sorted positions): local_neighbours; a jet with the monomials
    x^jet_ex y^jet_ey, whose direction of maximum curvature is the first cut line; per cut line the
    two half fits with the monomials s^half_ex t^half_ey (s across the cut; weight 1 on the side, points
    within ON_CUT on both), kept where usable (BALANCE, MAX_ALONG_OFFSET, 2 p points a side). Returns
    the largest normal-curvature jump over the kept cuts (radius units), the largest angle between
    the sides' normals (radians) and the unit direction across the cut of the largest jump."""
    N = grid[1]
    n_rows, p = len(rows), len(half_ex)
    degree = int(np.max(half_ex + half_ey))  # the jet's degree must be no higher
    jet_degree = int(np.max(jet_ex + jet_ey))
    top = 2 * degree
    jump_out, angle_out = np.full(n_rows, np.nan), np.full(n_rows, np.nan)
    across = np.full((n_rows, 3), np.nan)
    block = 256
    for chunk in numba.prange((n_rows + block - 1) // block):
        M, rhs, coef = np.empty((p, p)), np.empty(p), np.empty(p)
        S, Z = np.empty((2, top + 1, top + 1)), np.empty((2, degree + 1, degree + 1))
        spread, bend, normal = np.empty(2), np.empty(2), np.empty((2, 3))
        frame = np.empty((3, 3))
        found, gap, local = neighbour_work(slots)
        for r in range(chunk * block, min((chunk + 1) * block, n_rows)):
            i = rows[r]
            if N[i, 0] == 0.0 and N[i, 1] == 0.0 and N[i, 2] == 0.0:
                continue
            tangent_frame(N[i, 0], N[i, 1], N[i, 2], frame)
            count, found, gap, local = local_neighbours(grid, i, radius, slots, frame, found, gap, local)
            fit_local_jet(local, count, jet_ex, jet_ey, jet_degree, S[0], Z[0], M, rhs, coef)
            _, _, w0, w1 = graph_shape(coef[1], coef[2], 2.0 * coef[3], coef[4], 2.0 * coef[5])
            start = np.arctan2(w1, w0)
            best_jump, best_angle, best_theta = np.nan, np.nan, start
            for cut in range(directions):
                theta = start + cut * np.pi / directions
                c, sn = np.cos(theta), np.sin(theta)
                S[:, :, :] = 0.0
                Z[:, :, :] = 0.0
                spread[:] = 0.0
                for k in range(count):
                    x, y, z = local[k, 0], local[k, 1], local[k, 2]
                    s, t = c * x + sn * y, c * y - sn * x
                    if s >= -ON_CUT:
                        add_monomials(S[0], 1.0, s, t, top)
                        add_monomials(Z[0], z, s, t, degree)
                        spread[0] += abs(s)
                    if s <= ON_CUT:
                        add_monomials(S[1], 1.0, s, t, top)
                        add_monomials(Z[1], z, s, t, degree)
                        spread[1] += abs(s)
                usable = True
                for side in range(2):
                    points = S[side, 0, 0]
                    safe = max(points, 1.0)
                    spread[side] /= safe
                    along = abs(S[side, 0, 1]) / np.sqrt(S[side, 0, 2] * safe + 1e-300)
                    usable = usable and points >= 2 * p and along <= MAX_ALONG_OFFSET
                if not usable or min(spread[0], spread[1]) < BALANCE * max(spread[0], spread[1]):
                    continue
                for side in range(2):
                    solve_normal_equations(S[side], Z[side], half_ex, half_ey, M, rhs, coef)
                    fs, ft, fss = coef[1], coef[2], 2.0 * coef[3]  # exponents start 1, s, t, s^2
                    W = np.sqrt(1.0 + fs * fs + ft * ft)
                    bend[side] = -fss / (W * (1.0 + fs * fs))  # II(e, e) / I(e, e), e = d/ds, outward
                    normal[side, 0], normal[side, 1], normal[side, 2] = -fs / W, -ft / W, 1.0 / W
                jump = abs(bend[0] - bend[1])
                dot = normal[0, 0] * normal[1, 0] + normal[0, 1] * normal[1, 1] + normal[0, 2] * normal[1, 2]
                c0 = normal[0, 1] * normal[1, 2] - normal[0, 2] * normal[1, 1]
                c1 = normal[0, 2] * normal[1, 0] - normal[0, 0] * normal[1, 2]
                c2 = normal[0, 0] * normal[1, 1] - normal[0, 1] * normal[1, 0]
                angle = np.arctan2(np.sqrt(c0 * c0 + c1 * c1 + c2 * c2), dot)
                if jump > (-1.0 if np.isnan(best_jump) else best_jump):
                    best_jump, best_theta = jump, theta
                if np.isnan(best_angle) or angle > best_angle:
                    best_angle = angle
            jump_out[r], angle_out[r] = best_jump, best_angle
            c, sn = np.cos(best_theta), np.sin(best_theta)
            for axis in range(3):
                across[r, axis] = c * frame[0, axis] + sn * frame[1, axis]
    return jump_out, angle_out, across


def jump_fields(
    V: np.ndarray, F: np.ndarray, radius: float | None = None, directions: int = 4, degree: int = 3
) -> JumpFields:
    """Curvature-jump and tangent-jump fields at every vertex (see the module docstring).

    ``radius`` is the neighbourhood radius in part units (None: JUMP_RADIUS times the default jet
    radius of surfcheck.geometry.differential.default_radius, at most MAX_RADIUS mean edge lengths);
    ``directions`` the number of cut lines, evenly spaced over 180 degrees from the direction of
    maximum curvature; ``degree`` the half fits' degree across the cut. One compiled pass over the
    vertices (_jump_kernel) on the column grid of the jet fits.
    """
    if directions < 1:
        raise InputError(f"the jump fields need at least one cut direction, not {directions}")
    exponents = half_fit_exponents(degree)
    if radius is not None:
        check_radius(radius)
    normals, edge, grid = jet_grid(V, F, radius)
    if radius is None:
        radius = min(JUMP_RADIUS * fitted_radius(grid, normals, edge), MAX_RADIUS * edge)
    slots = grid.slot_count(radius)
    jump, angle, across = grid.run(_jump_kernel, np.arange(len(normals)), float(radius), slots,
                                   int(directions), *exponent_arrays(jet_exponents(2)),
                                   *exponent_arrays(exponents))
    return JumpFields(jump / radius, np.degrees(angle), across, float(radius))


def curvature_jump_field(
    V: np.ndarray, F: np.ndarray, radius: float | None = None, directions: int = 4
) -> np.ndarray:
    """(n,) largest jump of normal curvature across a cut through each vertex, 1/unit (jump_fields).

    Parameters
    ----------
    V : (n, 3) float
        Vertex coordinates, part units.
    F : (m, 3) int
        Triangles, indices into V.
    radius : float, optional
        One-sided fit radius, part units; None chooses the default radius.
    directions : int
        Cut directions tried through each vertex.

    Returns
    -------
    (n,) float
        Largest jump of normal curvature, 1/unit; NaN where a side has too few points.
    """
    return jump_fields(V, F, radius, directions).curvature


def tangent_jump_field(
    V: np.ndarray, F: np.ndarray, radius: float | None = None, directions: int = 4
) -> np.ndarray:
    """(n,) largest angle between one-sided normals across a cut through each vertex, degrees.

    Parameters
    ----------
    V : (n, 3) float
        Vertex coordinates, part units.
    F : (m, 3) int
        Triangles, indices into V.
    radius : float, optional
        One-sided fit radius, part units; None chooses the default radius.
    directions : int
        Cut directions tried through each vertex.

    Returns
    -------
    (n,) float
        Largest angle between the one-sided normals, degrees; NaN where a side has too few points.
    """
    return jump_fields(V, F, radius, directions).tangent
