"""Differential quantities of a triangle mesh: normals, local frames, jet fits, curvatures.

Principal curvatures come from a local polynomial ("jet") fit of the surface as a height function over
the tangent plane (Cazals and Pouget 2003, "Estimating differential quantities using polynomial fitting
of osculating jets"; Goldfeather and Interrante 2004), over a metric neighbourhood. The whole-mesh
fit runs in a compiled kernel (numba): neighbours from a column grid, the least-squares normal
equations assembled from power sums of the neighbours' local coordinates and solved by Cholesky per
vertex, the 2x2 shape operator diagonalised in closed form. The batched numpy fits over k-d tree
neighbourhoods (Neighbourhoods, fit_height) serve the one-sided fits of the jump fields. Mean and
Gaussian curvature are also offered from the cotangent Laplacian and the angle defect (Meyer, Desbrun,
Schroder and Barr 2003).

Sign convention: a curvature is positive where the surface bends away from its outward normal (an
outward-wound sphere has k1 = k2 = +1/R); k1 >= k2. Radians inside, curvature in 1/unit.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace
from functools import cached_property

import numba
import numpy as np
from scipy.spatial import cKDTree

from surfcheck.errors import InputError

CHUNK_POINTS = 1 << 15  # neighbour slots fitted together (vertices times neighbours per vertex)
PILOT_SAMPLE = 4000  # vertices of the pilot fits that choose the default radius
MIN_RADIUS = 2.5  # default radius limits, in mean edge lengths: enough points for a quadric ...
MAX_RADIUS = 6.0  # ... and a bounded cost (the count of neighbours grows as the radius squared)
SCALE_RADIUS = 4.0  # pilot radius for the curvature scale, in mean edge lengths
RADIUS_GAIN = 2.2  # constant of the error-balancing radius, fitted on noisy tori (docs/curvature.md)
HALF_DISC = 0.5  # centroid offset / RMS radius of the neighbours of a vertex on a straight open edge


def _as_mesh(V: np.ndarray, F: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    V = np.ascontiguousarray(V, dtype=np.float64)
    F = np.ascontiguousarray(F, dtype=np.int64)
    if V.ndim != 2 or V.shape[1] != 3 or F.ndim != 2 or F.shape[1] != 3:
        raise InputError("vertices must be an (n, 3) array and faces an (m, 3) array")
    if len(V) == 0 or len(F) == 0:
        raise InputError("the mesh is empty: curvature needs vertices and triangles")
    if F.min() < 0 or F.max() >= len(V):
        raise InputError("a triangle refers to a vertex that does not exist")
    return V, F


def _unit(x: np.ndarray) -> np.ndarray:
    """Rows of ``x`` scaled to unit length; zero rows stay zero."""
    norm = np.linalg.norm(x, axis=-1, keepdims=True)
    return np.divide(x, norm, out=np.zeros_like(x), where=norm > 0)


def _corner_angles(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(m, 3) interior angle of each triangle at each of its corners, radians.

    The three corner angles share one sine term, |cross| (twice the area), so each costs one dot
    product and one arctan2.
    """
    a, b, c = V[F[:, 0]], V[F[:, 1]], V[F[:, 2]]
    ab, bc, ca = b - a, c - b, a - c
    cross = np.cross(ab, -ca)
    double_area = np.sqrt(np.einsum("ij,ij->i", cross, cross))
    dots = [-np.einsum("ij,ij->i", ab, ca), -np.einsum("ij,ij->i", bc, ab), -np.einsum("ij,ij->i", ca, bc)]
    return np.arctan2(double_area[:, None], np.stack(dots, axis=1))


def _cotangents(angle: np.ndarray) -> np.ndarray:
    """cot of the corner angles; 0 for the corners of degenerate (zero-area) triangles."""
    sine = np.sin(angle)
    return np.divide(np.cos(angle), sine, out=np.zeros_like(angle), where=sine > 1e-12)


def _scatter(F: np.ndarray, values: np.ndarray, n: int) -> np.ndarray:
    """Sum per-corner values (m, 3) or vectors (m, 3, d) onto the n vertices."""
    idx = F.reshape(-1)
    if values.ndim == 2:
        return np.bincount(idx, weights=values.reshape(-1), minlength=n)
    flat = values.reshape(len(idx), -1)
    return np.stack([np.bincount(idx, weights=flat[:, j], minlength=n) for j in range(flat.shape[1])], 1)


@numba.njit(cache=True)
def _mesh_measures(V, F):
    """One pass over the triangles: angle-weighted vertex normals (Thurmer and Wuthrich 1998), the
    mean edge length, the total area and the number of vertices some triangle uses."""
    summed = np.zeros((len(V), 3))
    edges = area = 0.0
    side = np.empty((3, 3))  # side k runs from corner k to corner k + 1
    for f in range(len(F)):
        corner = (F[f, 0], F[f, 1], F[f, 2])
        for k in range(3):
            for j in range(3):
                side[k, j] = V[corner[(k + 1) % 3], j] - V[corner[k], j]
        c0 = side[0, 1] * side[2, 2] - side[0, 2] * side[2, 1]  # ab x ca = -(b - a) x (c - a)
        c1 = side[0, 2] * side[2, 0] - side[0, 0] * side[2, 2]
        c2 = side[0, 0] * side[2, 1] - side[0, 1] * side[2, 0]
        double_area = np.sqrt(c0 * c0 + c1 * c1 + c2 * c2)
        for k in range(3):
            edges += np.sqrt(side[k, 0] ** 2 + side[k, 1] ** 2 + side[k, 2] ** 2)
        area += 0.5 * double_area
        if double_area == 0.0:
            continue
        for k in range(3):  # the angle at corner k lies between side k and the reversed side k - 1
            previous = (k + 2) % 3
            dot = -(side[k, 0] * side[previous, 0] + side[k, 1] * side[previous, 1]
                    + side[k, 2] * side[previous, 2])
            weight = np.arctan2(double_area, dot) / double_area
            summed[corner[k], 0] -= weight * c0
            summed[corner[k], 1] -= weight * c1
            summed[corner[k], 2] -= weight * c2
    used = np.zeros(len(V), np.bool_)
    for f in range(len(F)):
        for k in range(3):
            used[F[f, k]] = True
    for i in range(len(V)):
        length = np.sqrt(np.sum(summed[i] * summed[i]))
        if length > 0.0:
            summed[i] /= length
    return summed, edges / (3 * len(F)), area, max(np.count_nonzero(used), 1)


def vertex_normals(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(n, 3) unit vertex normals, face normals weighted by the corner angle (Thurmer and Wuthrich 1998).

    Outward for outward-wound (counter-clockwise seen from outside) faces. A vertex that no triangle
    uses gets the zero vector.
    """
    V, F = _as_mesh(V, F)
    return _mesh_measures(V, F)[0]


def tangent_frames(normals: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two unit tangents (t1, t2) per normal with (t1, t2, n) right-handed and orthonormal."""
    axis = np.zeros_like(normals)
    axis[np.arange(len(normals)), np.argmin(np.abs(normals), axis=1)] = 1.0
    t1 = _unit(np.cross(normals, axis))
    return t1, np.cross(normals, t1)


def mean_edge_length(V: np.ndarray, F: np.ndarray) -> float:
    """Mean length of the triangles' edges (each interior edge counted from both sides)."""
    V, F = _as_mesh(V, F)
    return float(_mesh_measures(V, F)[1])


# ---------------------------------------------------------------------------------------------------
# Jet fits: least squares of a height polynomial over local tangent coordinates, batched.


def jet_exponents(degree: int) -> list[tuple[int, int]]:
    """Monomials x^a y^b of a bivariate polynomial of total degree <= degree, constant first."""
    if not 1 <= degree <= 4:
        raise InputError(f"jet degree must be 1 to 4, not {degree}")
    return [(a, d - a) for d in range(degree + 1) for a in range(d, -1, -1)]


def _cholesky_solve(M: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve M x = b for a stack of small symmetric positive definite M (c, p, p), b (c, p).

    Loops run over the p matrix indices, never over the stack. A relative ridge keeps rank-deficient
    systems (too few neighbours) finite; their quality says they are unreliable.
    """
    c, p, _ = M.shape
    ridge = 1e-10 * np.trace(M, axis1=1, axis2=2) / p + 1e-300
    L = np.zeros_like(M)
    for j in range(p):
        s = M[:, j, j] + ridge - np.einsum("ck,ck->c", L[:, j, :j], L[:, j, :j])
        L[:, j, j] = np.sqrt(np.maximum(s, ridge))
        for i in range(j + 1, p):
            L[:, i, j] = (M[:, i, j] - np.einsum("ck,ck->c", L[:, i, :j], L[:, j, :j])) / L[:, j, j]
    y = np.zeros_like(b)
    for i in range(p):
        y[:, i] = (b[:, i] - np.einsum("ck,ck->c", L[:, i, :i], y[:, :i])) / L[:, i, i]
    x = np.zeros_like(b)
    for i in range(p - 1, -1, -1):
        x[:, i] = (y[:, i] - np.einsum("ck,ck->c", L[:, i + 1 :, i], x[:, i + 1 :])) / L[:, i, i]
    return x


def fit_height(
    x: np.ndarray, y: np.ndarray, z: np.ndarray, w: np.ndarray, exponents: list[tuple[int, int]]
) -> tuple[np.ndarray, np.ndarray]:
    """Weighted least-squares fits z ~ sum c_ab x^a y^b for each row of the (c, k) point arrays.

    ``w`` is (c, k), or (h, c, k) for h weightings of the same points (such as the two sides of a
    cut). The normal equations are assembled from the power sums sum_k w x^a y^b, each computed once,
    and solved in batch. Returns the coefficients, (c, p) or (c, h, p), in the order of
    ``exponents``, and the weighted residual sums of squares, (c,) or (c, h). Coordinates should be
    scaled to about unit size for conditioning.
    """
    pairs = {(ai + aj, bi + bj) for ai, bi in exponents for aj, bj in exponents}
    xp = [None, x]  # x^0 is implicit
    for _ in range(2, max(a for a, _ in pairs) + 1):
        xp.append(xp[-1] * x)
    top_y = max(b for _, b in pairs)
    weights = [w] if w.ndim == 2 else list(w)
    p = len(exponents)
    results = []
    for weight in weights:
        yp = [weight]  # the weight rides on the y powers
        for _ in range(top_y):
            yp.append(yp[-1] * y)
        sums = {e: _power_sum(xp[e[0]], yp[e[1]]) for e in pairs}
        M = np.empty((len(x), p, p))
        for i, (ai, bi) in enumerate(exponents):
            for j, (aj, bj) in enumerate(exponents):
                M[:, i, j] = sums[(ai + aj, bi + bj)]
        zy = {b: yp[b] * z for b in {b for _, b in exponents}}
        rhs = np.stack([_power_sum(xp[a], zy[b]) for a, b in exponents], axis=1)
        coef = _cholesky_solve(M, rhs)
        residual = np.einsum("ck,ck->c", zy[0], z) - np.einsum("cp,cp->c", coef, rhs)
        results.append((coef, np.maximum(residual, 0.0)))
    if w.ndim == 2:
        return results[0]
    return np.stack([c for c, _ in results], axis=1), np.stack([r for _, r in results], axis=1)


def _power_sum(xa: np.ndarray | None, yb: np.ndarray) -> np.ndarray:
    """Row sums of xa * yb, with xa None meaning x^0."""
    return yb.sum(axis=1) if xa is None else np.einsum("ck,ck->c", xa, yb)


@numba.njit(cache=True)
def _graph_shape(fx, fy, fxx, fxy, fyy):
    """k1 >= k2 and the (x, y) parameter direction of k1 of the graph z = f(x, y) at the origin."""
    W = np.sqrt(1.0 + fx * fx + fy * fy)
    E, Fm, G = 1.0 + fx * fx, fx * fy, 1.0 + fy * fy
    L, M, N = -fxx / W, -fxy / W, -fyy / W
    det_I = E * G - Fm * Fm
    H = (E * N + G * L - 2.0 * Fm * M) / (2.0 * det_I)
    K = (L * N - M * M) / det_I
    root = np.sqrt(max(H * H - K, 0.0))
    k1, k2 = H + root, H - root
    # (II - k1 I) v = 0: take the better conditioned of the two rows' null vectors.
    a, b, d = L - k1 * E, M - k1 * Fm, N - k1 * G
    if a * a + b * b >= b * b + d * d:
        v0, v1 = b, -a
    else:
        v0, v1 = d, -b
    if np.sqrt(v0 * v0 + v1 * v1) <= 1e-12 * (abs(k1) + 1e-300):
        v0, v1 = 1.0, 0.0
    return k1, k2, v0, v1


@numba.njit(cache=True)
def _graph_shapes(fx, fy, fxx, fxy, fyy):
    k1, k2, v = np.empty(len(fx)), np.empty(len(fx)), np.empty((len(fx), 2))
    for i in range(len(fx)):
        k1[i], k2[i], v[i, 0], v[i, 1] = _graph_shape(fx[i], fy[i], fxx[i], fxy[i], fyy[i])
    return k1, k2, v


def graph_curvatures(fx, fy, fxx, fxy, fyy):
    """Principal curvatures and directions at the origin of the graph z = f(x, y).

    From the first and second fundamental forms of the graph (do Carmo 1976, section 3-3): the
    principal curvatures solve det(II - k I) = 0. The sign is flipped so that a graph bending down,
    away from +z, is positive. Returns k1 >= k2 and their directions as (c, 2) parameter vectors.
    """
    return _graph_shapes(*(np.ascontiguousarray(f, dtype=np.float64) for f in (fx, fy, fxx, fxy, fyy)))


def jet_shape(coef: np.ndarray):
    """graph_curvatures of jets whose coefficients follow jet_exponents (1, x, y, x^2, xy, y^2, ...)."""
    return graph_curvatures(coef[:, 1], coef[:, 2], 2.0 * coef[:, 3], coef[:, 4], 2.0 * coef[:, 5])


@dataclass(frozen=True, eq=False)
class Curvature:
    """Per-vertex principal curvatures from jet fits (see principal_curvatures).

    k1 >= k2 (1/unit), d1 and d2 their unit directions, normals the fitted unit normals, neighbours
    the number of points in each fit, quality in [0, 1] (1: a full, balanced neighbourhood with at
    least twice as many points as unknowns; 0: a half disc or worse, as on a straight open boundary,
    or no more points than unknowns; below 0.5, treat the value as extrapolated), radius the
    neighbourhood radius used (part units).
    """

    k1: np.ndarray
    k2: np.ndarray
    d1: np.ndarray
    d2: np.ndarray
    normals: np.ndarray
    neighbours: np.ndarray
    quality: np.ndarray
    radius: float

    @cached_property
    def mean(self) -> np.ndarray:
        """Mean curvature (k1 + k2) / 2."""
        return 0.5 * (self.k1 + self.k2)

    @cached_property
    def gaussian(self) -> np.ndarray:
        """Gaussian curvature k1 k2."""
        return self.k1 * self.k2


def _check_radius(radius: float) -> None:
    if not np.isfinite(radius) or radius <= 0:
        raise InputError(f"the neighbourhood radius must be a positive length, not {radius}")


def slot_count(radius: float, density: float, n: int, scale: float = 1.0) -> int:
    """Most neighbours a fit takes: ``scale`` times 1.6 times the points of a full disc of ``radius`` (at
    ``density`` vertices per unit area), plus one, 12 to 512 and at most n: where the mesh is much
    denser than average a vertex takes its nearest points within the radius."""
    _check_radius(radius)
    expected = np.pi * radius * radius * density
    return min(int(np.clip(np.ceil(scale * 1.6 * expected) + 1, 12, 512)), n)


@dataclass(frozen=True)
class Neighbourhoods:
    """A k-d tree over the vertices plus the rule for querying it: radius and neighbour count."""

    V: np.ndarray
    normals: np.ndarray
    tree: cKDTree
    density: float  # vertices per unit area
    radius: float = 0.0
    count: int = 0

    @classmethod
    def of_mesh(cls, V: np.ndarray, F: np.ndarray, normals: np.ndarray) -> "Neighbourhoods":
        """The k-d tree of a mesh's vertices and their density over its area (radius still unset)."""
        P = V[F]
        area = 0.5 * np.linalg.norm(np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0]), axis=1).sum()
        used = max(int(np.count_nonzero(np.bincount(F.reshape(-1), minlength=len(V)))), 1)
        tree = cKDTree(V, balanced_tree=False, compact_nodes=False)
        return cls(V, normals, tree, used / max(area, 1e-300))

    def at_radius(self, radius: float, scale: float = 1.0) -> "Neighbourhoods":
        """The same tree queried within ``radius``, allowing ``scale`` times the points of a full disc."""
        count = slot_count(radius, self.density, len(self.V), scale)
        return replace(self, radius=float(radius), count=count)

    def local(self, rows: np.ndarray, frames: tuple[np.ndarray, np.ndarray, np.ndarray]):
        """Neighbours of the vertices ``rows`` in their local frames, scaled by the radius.

        Returns x, y, z (c, k) coordinates (z along the frame normal) and a 0/1 weight that keeps only
        points within the radius whose normal faces the same side (this keeps the far wall of a thin
        part out of the fit). Padded slots have weight 0.
        """
        dist, idx = self.tree.query(self.V[rows], k=self.count, distance_upper_bound=self.radius, workers=1)
        if idx.ndim == 1:
            dist, idx = dist[:, None], idx[:, None]
        valid = np.isfinite(dist)
        used = max(int(valid.sum(axis=1).max()), 1)  # drop the slots no vertex of the chunk fills
        valid, idx = valid[:, :used], np.where(valid[:, :used], idx[:, :used], rows[:, None])
        t1, t2, n = frames
        x, y, z, facing = (np.zeros(idx.shape) for _ in range(4))
        for j in range(3):  # one coordinate at a time: contiguous gathers, no (c, k, 3) temporaries
            d = (self.coordinates[j][idx] - self.coordinates[j][rows][:, None]) / self.radius
            x += d * t1[:, j : j + 1]
            y += d * t2[:, j : j + 1]
            z += d * n[:, j : j + 1]
            facing += self.normal_coordinates[j][idx] * n[:, j : j + 1]
        return x, y, z, (valid & (facing > 0.0)).astype(np.float64)

    @cached_property
    def coordinates(self) -> tuple[np.ndarray, ...]:
        return tuple(np.ascontiguousarray(self.V[:, j]) for j in range(3))

    @cached_property
    def normal_coordinates(self) -> tuple[np.ndarray, ...]:
        return tuple(np.ascontiguousarray(self.normals[:, j]) for j in range(3))


def _chunks(n: int, size: int):
    return [np.arange(s, min(s + size, n)) for s in range(0, n, size)]


def _in_parallel(task, n: int, count: int) -> list:
    """Run ``task(rows)`` over vertex chunks on all cores (numpy and the k-d tree release the GIL).

    Chunks hold about CHUNK_POINTS neighbour slots (``count`` per vertex), so their work arrays stay
    within the CPU caches and the memory in flight is bounded whatever the mesh size.
    """
    size = max(CHUNK_POINTS // max(count, 1), 64)
    with ThreadPoolExecutor(max_workers=os.cpu_count() or 1) as pool:
        return list(pool.map(task, _chunks(n, size)))


def _jet_at(hood: Neighbourhoods, rows: np.ndarray, degree: int):
    """Jet fit of degree ``degree`` at the vertices ``rows``: coefficients, frames, residual, weights."""
    n = hood.normals[rows]
    t1, t2 = tangent_frames(n)
    x, y, z, w = hood.local(rows, (t1, t2, n))
    coef, residual = fit_height(x, y, z, w, jet_exponents(degree))
    return coef, (t1, t2, n), residual, (x, y, z, w)


# ---------------------------------------------------------------------------------------------------
# Compiled jet fits: a fixed-radius neighbour search on a column grid and, per vertex, the normal
# equations of the jet accumulated and solved in place (numba, parallel over vertices).


@dataclass(frozen=True)
class ColumnGrid:
    """Vertices sorted into square columns across the mesh's two widest axes, by height within each.

    The ball of radius r around a vertex lies in the (2m + 1)^2 columns around its own (m = ceil(r /
    side)) and, within each, in one run of heights found by bisection: a cell-based fixed-radius
    near-neighbour search (Bentley, Stanat and Williams 1977) that visits only the points of those
    runs. The column side is at least ``side`` and large enough that there are at most about eight
    columns per vertex, so memory stays linear in the mesh size.
    """

    points: np.ndarray  # (n, 3) vertices in sorted order
    normals: np.ndarray  # (n, 3) their normals
    order: np.ndarray  # sorted position -> vertex index
    rank: np.ndarray  # vertex index -> sorted position
    start: np.ndarray  # (columns + 1,) first sorted position of each column
    axes: np.ndarray  # the column axes and the height axis
    shape: tuple[int, int]
    low: tuple[float, float]
    side: float
    density: float  # vertices per unit area

    @classmethod
    def of_vertices(cls, V: np.ndarray, normals: np.ndarray, density: float, side: float) -> "ColumnGrid":
        """The grid of columns of at least ``side`` over V; ``density`` is vertices per unit area."""
        extent = V.max(axis=0) - V.min(axis=0)
        axes = np.argsort(-extent, kind="stable").astype(np.int64)
        wide, narrow, n = float(extent[axes[0]]), float(extent[axes[1]]), 4.0 * len(V)
        side = max(float(side), np.sqrt(wide * narrow / n), wide / n, 1e-300)  # at most ~8n columns
        low = V[:, axes[:2]].min(axis=0)
        shape = np.floor(extent[axes[:2]] / side).astype(np.int64) + 1
        order, start = _column_order(V, axes, low[0], low[1], side, shape[0], shape[1])
        rank = np.empty_like(order)
        rank[order] = np.arange(len(order))
        return cls(np.ascontiguousarray(V[order]), np.ascontiguousarray(normals[order]), order, rank, start,
                   axes, (int(shape[0]), int(shape[1])), (float(low[0]), float(low[1])), side, float(density))

    def slot_count(self, radius: float) -> int:
        return slot_count(radius, self.density, len(self.order))

    def jets(self, rows: np.ndarray, radius: float, degree: int):
        """Jet fits of total degree ``degree`` within ``radius`` at the vertices ``rows`` (_jet_kernel):
        k1, k2 (1/unit), d1, d2, fitted normal, neighbour count, quality and residual RMS (part units)."""
        position = self.rank[rows]
        walk = np.argsort(position, kind="stable")  # visit the rows in grid order: neighbours in cache
        fitted = _jet_kernel(self.points, self.normals, self.start, self.axes, self.shape[1], self.low[0],
                             self.low[1], self.side, position[walk], float(radius), self.slot_count(radius),
                             degree)
        results = []
        for field in fitted:
            out = np.empty_like(field)
            out[walk] = field
            results.append(out)
        return tuple(results)


@numba.njit(cache=True)
def _column_of(P, i, a0, a1, low0, low1, side, nx, ny):
    c0 = min(max(int(np.floor((P[i, a0] - low0) / side)), 0), nx - 1)
    c1 = min(max(int(np.floor((P[i, a1] - low1) / side)), 0), ny - 1)
    return c0, c1


@numba.njit(cache=True)
def _column_order(V, axes, low0, low1, side, nx, ny):
    """Counting sort of the vertices by column, then by height within each column."""
    a0, a1, a2 = axes[0], axes[1], axes[2]
    column = np.empty(len(V), np.int64)
    start = np.zeros(nx * ny + 1, np.int64)
    for i in range(len(V)):
        c0, c1 = _column_of(V, i, a0, a1, low0, low1, side, nx, ny)
        column[i] = c0 * ny + c1
        start[column[i] + 1] += 1
    for c in range(nx * ny):
        start[c + 1] += start[c]
    fill = start[:-1].copy()
    order = np.empty(len(V), np.int64)
    for i in range(len(V)):
        order[fill[column[i]]] = i
        fill[column[i]] += 1
    for c in range(nx * ny):
        run = order[start[c]:start[c + 1]]
        if len(run) > 1:
            order[start[c]:start[c + 1]] = run[np.argsort(V[run, a2], kind="mergesort")]
    return order, start


@numba.njit(cache=True, inline="always")
def _column_range(P, start, column, a2, lo, hi):
    """Sorted positions [first, last) of a column's points whose height lies in [lo, hi]."""
    a, b = start[column], start[column + 1]
    while a < b:
        mid = (a + b) >> 1
        if P[mid, a2] < lo:
            a = mid + 1
        else:
            b = mid
    first = a
    b = start[column + 1]
    while a < b:
        mid = (a + b) >> 1
        if P[mid, a2] <= hi:
            a = mid + 1
        else:
            b = mid
    return first, a


@numba.njit(cache=True)
def _gather_ball(P, start, a0, a1, a2, nx, ny, low0, low1, side, reach, i, radius, found, gap):
    """Sorted positions and squared distances of the points within ``radius`` of point i, written into
    ``found`` and ``gap`` as far as they hold; returns how many there are."""
    c0, c1 = _column_of(P, i, a0, a1, low0, low1, side, nx, ny)
    zlo, zhi = P[i, a2] - radius, P[i, a2] + radius
    r2 = radius * radius
    inside = 0
    for gx in range(max(c0 - reach, 0), min(c0 + reach + 1, nx)):
        for gy in range(max(c1 - reach, 0), min(c1 + reach + 1, ny)):
            first, last = _column_range(P, start, gx * ny + gy, a2, zlo, zhi)
            for j in range(first, last):
                d0, d1, d2 = P[j, 0] - P[i, 0], P[j, 1] - P[i, 1], P[j, 2] - P[i, 2]
                dd = d0 * d0 + d1 * d1 + d2 * d2
                if dd <= r2:
                    if inside < len(found):
                        found[inside], gap[inside] = j, dd
                    inside += 1
    return inside


@numba.njit(cache=True, inline="always")
def _add_monomials(T, value, x, y, top):
    """T[a, b] += value x^a y^b for every a + b <= top."""
    xa = value
    for a in range(top + 1):
        term = xa
        for b in range(top + 1 - a):
            T[a, b] += term
            term *= y
        xa *= x


@numba.njit(cache=True, parallel=True, fastmath=False)
def _jet_kernel(P, N, start, axes, ny, low0, low1, side, rows, radius, slots, degree):
    """Per vertex of ``rows`` (sorted positions): neighbours within ``radius`` whose normal faces the
    same side (at most the ``slots`` nearest), local frame, weighted normal equations of the jet
    (Cazals and Pouget 2003) from the monomials of each point, Cholesky solve with a tiny relative
    ridge, then graph_curvatures' closed form and the quality of the neighbourhood."""
    n_rows = len(rows)
    p = (degree + 1) * (degree + 2) // 2
    top = 2 * degree
    ex, ey = np.empty(p, np.int64), np.empty(p, np.int64)  # jet_exponents' order: 1, x, y, x^2, xy, y^2, ...
    k = 0
    for total in range(degree + 1):
        for a in range(total, -1, -1):
            ex[k], ey[k] = a, total - a
            k += 1
    a0, a1, a2 = axes[0], axes[1], axes[2]
    nx = (len(start) - 1) // ny
    reach = int(np.ceil(radius / side))
    r2 = radius * radius
    k1o, k2o = np.full(n_rows, np.nan), np.full(n_rows, np.nan)
    d1o, d2o, no = np.full((n_rows, 3), np.nan), np.full((n_rows, 3), np.nan), np.full((n_rows, 3), np.nan)
    counto, qualo, rmso = np.zeros(n_rows, np.int64), np.zeros(n_rows), np.zeros(n_rows)
    block = 256
    for chunk in numba.prange((n_rows + block - 1) // block):
        M = np.empty((p, p))
        rhs = np.empty(p)
        coef = np.empty(p)
        S = np.empty((top + 1, top + 1))
        Z = np.empty((degree + 1, degree + 1))
        found = np.empty(4 * slots + 64, np.int64)
        gap = np.empty(4 * slots + 64)
        for r in range(chunk * block, min((chunk + 1) * block, n_rows)):
            i = rows[r]
            n0, n1, n2 = N[i, 0], N[i, 1], N[i, 2]
            if n0 == 0.0 and n1 == 0.0 and n2 == 0.0:
                continue
            # tangent frame as tangent_frames: t1 = unit(n x e_k), k the smallest normal component
            e0 = e1 = e2 = 0.0
            if abs(n0) <= abs(n1) and abs(n0) <= abs(n2):
                e0 = 1.0
            elif abs(n1) <= abs(n2):
                e1 = 1.0
            else:
                e2 = 1.0
            u0, u1, u2 = n1 * e2 - n2 * e1, n2 * e0 - n0 * e2, n0 * e1 - n1 * e0
            un = np.sqrt(u0 * u0 + u1 * u1 + u2 * u2)
            u0, u1, u2 = u0 / un, u1 / un, u2 / un
            v0, v1, v2 = n1 * u2 - n2 * u1, n2 * u0 - n0 * u2, n0 * u1 - n1 * u0
            inside = _gather_ball(P, start, a0, a1, a2, nx, ny, low0, low1, side, reach, i, radius, found, gap)
            if inside > len(found):
                found, gap = np.empty(2 * inside, np.int64), np.empty(2 * inside)
                _gather_ball(P, start, a0, a1, a2, nx, ny, low0, low1, side, reach, i, radius, found, gap)
            bound, at_bound = r2, slots  # take all points closer than bound, and at most at_bound at it
            if inside > slots:
                ranked = np.sort(gap[:inside])
                bound = ranked[slots - 1]
                at_bound = slots - np.searchsorted(ranked, bound)  # ties at the bound still allowed
            # the normal equations of the facing points
            S[:, :] = 0.0
            Z[:, :] = 0.0
            zz = 0.0
            for slot in range(inside):
                j, dd = found[slot], gap[slot]
                if dd > bound:
                    continue
                if dd == bound and inside > slots:
                    if at_bound == 0:
                        continue
                    at_bound -= 1
                if N[j, 0] * n0 + N[j, 1] * n1 + N[j, 2] * n2 <= 0.0:
                    continue
                d0, d1 = (P[j, 0] - P[i, 0]) / radius, (P[j, 1] - P[i, 1]) / radius
                d2 = (P[j, 2] - P[i, 2]) / radius
                x = d0 * u0 + d1 * u1 + d2 * u2
                y = d0 * v0 + d1 * v1 + d2 * v2
                z = d0 * n0 + d1 * n1 + d2 * n2
                _add_monomials(S, 1.0, x, y, top)  # power sums sum x^a y^b, a + b <= 2 degree
                _add_monomials(Z, z, x, y, degree)  # and sum z x^a y^b, a + b <= degree
                zz += z * z
            count = int(S[0, 0])
            for s in range(p):
                rhs[s] = Z[ex[s], ey[s]]
                for t in range(s, p):
                    M[s, t] = S[ex[s] + ex[t], ey[s] + ey[t]]
            # Cholesky factor in the lower triangle of M (upper holds the matrix), solve in place
            trace = 0.0
            for s in range(p):
                trace += M[s, s]
            ridge = 1e-10 * trace / p + 1e-300
            for s in range(p):
                acc = M[s, s] + ridge
                for t in range(s):
                    acc -= M[s, t] * M[s, t]
                diag = np.sqrt(max(acc, ridge))
                for q in range(s + 1, p):
                    acc = M[s, q]
                    for t in range(s):
                        acc -= M[q, t] * M[s, t]
                    M[q, s] = acc / diag
                M[s, s] = diag  # the diagonal of L; the matrix's diagonal is no longer needed
            for s in range(p):
                acc = rhs[s]
                for t in range(s):
                    acc -= M[s, t] * coef[t]
                coef[s] = acc / M[s, s]
            for s in range(p - 1, -1, -1):
                acc = coef[s]
                for t in range(s + 1, p):
                    acc -= M[t, s] * coef[t]
                coef[s] = acc / M[s, s]
            residual = zz
            for s in range(p):
                residual -= coef[s] * rhs[s]
            # curvatures and directions of the fitted graph at the vertex (graph_curvatures)
            fx, fy = coef[1], coef[2]
            k1, k2, w0, w1 = _graph_shape(fx, fy, 2.0 * coef[3], coef[4], 2.0 * coef[5])
            m0, m1, m2 = n0 - fx * u0 - fy * v0, n1 - fx * u1 - fy * v1, n2 - fx * u2 - fy * v2
            mn = np.sqrt(m0 * m0 + m1 * m1 + m2 * m2)
            m0, m1, m2 = m0 / mn, m1 / mn, m2 / mn
            g0 = w0 * (u0 + fx * n0) + w1 * (v0 + fy * n0)
            g1 = w0 * (u1 + fx * n1) + w1 * (v1 + fy * n1)
            g2 = w0 * (u2 + fx * n2) + w1 * (v2 + fy * n2)
            gn = np.sqrt(g0 * g0 + g1 * g1 + g2 * g2)
            if gn > 0.0:
                g0, g1, g2 = g0 / gn, g1 / gn, g2 / gn
            k1o[r], k2o[r] = k1 / radius, k2 / radius
            no[r, 0], no[r, 1], no[r, 2] = m0, m1, m2
            d1o[r, 0], d1o[r, 1], d1o[r, 2] = g0, g1, g2
            d2o[r, 0], d2o[r, 1], d2o[r, 2] = m1 * g2 - m2 * g1, m2 * g0 - m0 * g2, m0 * g1 - m1 * g0
            # quality: balance of the neighbourhood times its size (_neighbourhood_quality's rule)
            safe = max(count, 1)
            spread = np.sqrt((S[2, 0] + S[0, 2]) / safe)
            offset = np.sqrt(S[1, 0] ** 2 + S[0, 1] ** 2) / safe
            balance = 1.0 - (offset / (HALF_DISC * max(spread, 1e-300))) ** 2
            size = (count - p) / p
            qualo[r] = min(max(balance, 0.0), 1.0) * min(max(size, 0.0), 1.0)
            counto[r] = count
            rmso[r] = np.sqrt(max(residual, 0.0) / max(count - p, 1)) * radius
    return k1o, k2o, d1o, d2o, no, counto, qualo, rmso


def _pilot_rows(normals: np.ndarray) -> np.ndarray:
    used = np.flatnonzero(np.linalg.norm(normals, axis=1) > 0)
    return used[np.linspace(0, len(used) - 1, min(PILOT_SAMPLE, len(used))).astype(np.int64)]


def _residual_level(grid: ColumnGrid, rows: np.ndarray, radius: float):
    """Median residual RMS of quadric jets within ``radius`` at ``rows``, and the curvatures found there."""
    k1, k2, *_, count, _, rms = grid.jets(rows, radius, 2)
    fitted = count > len(jet_exponents(2)) + 3
    return (float(np.median(rms[fitted])) if fitted.any() else 0.0), k1, k2


def _pilot(grid: ColumnGrid, normals: np.ndarray, edge: float) -> tuple[float, float]:
    """Noise level (part units) and curvature length of the part, from quadric jets on a sample.

    The residual of a quadric jet is noise plus misfit; the misfit grows as the cube of the radius
    (the jet's first neglected terms), the noise does not. Residuals at two radii r1 < r2 separate
    them: noise^2 = (s1^2 q^6 - s2^2) / (q^6 - 1) with q = r2 / r1.
    """
    rows = _pilot_rows(normals)
    small, _, _ = _residual_level(grid, rows, MIN_RADIUS * edge)
    large, k1, k2 = _residual_level(grid, rows, SCALE_RADIUS * edge)
    q6 = (SCALE_RADIUS / MIN_RADIUS) ** 6
    noise = np.sqrt(max(small * small * q6 - large * large, 0.0) / (q6 - 1.0))
    bend = np.nanpercentile(np.maximum(np.abs(k1), np.abs(k2)), 90) if len(rows) else 0.0
    return float(noise), min(1.0 / max(bend, 1e-300), 1e3 * edge)


def _default_radius(grid: ColumnGrid, normals: np.ndarray, edge: float) -> float:
    sigma, length = _pilot(grid, normals, edge)
    balanced = RADIUS_GAIN * (sigma * edge) ** 0.2 * length**0.6
    return float(np.clip(balanced, MIN_RADIUS * edge, MAX_RADIUS * edge))


def _grid_of(V: np.ndarray, F: np.ndarray, radius: float | None = None):
    """Normals, mean edge length and the column grid of a mesh (columns of the radius, or of the
    smallest default radius when none is given)."""
    normals, edge, area, used = _mesh_measures(V, F)
    side = MIN_RADIUS * edge if radius is None else radius
    return normals, edge, ColumnGrid.of_vertices(V, normals, used / max(area, 1e-300), side)


def noise_level(V: np.ndarray, F: np.ndarray) -> float:
    """Estimated standard deviation of the vertices' scatter about a smooth surface (part units).

    From the residuals of quadric jets at MIN_RADIUS and SCALE_RADIUS mean edge lengths on a fixed
    sample of PILOT_SAMPLE vertices, with the quadric's own misfit taken out (see _pilot). About zero
    on a clean mesh; the scanner's noise on a scan.
    """
    V, F = _as_mesh(V, F)
    normals, edge, grid = _grid_of(V, F)
    return _pilot(grid, normals, edge)[0]


def default_radius(V: np.ndarray, F: np.ndarray) -> float:
    """The neighbourhood radius used when none is given (part units); derivation in docs/curvature.md.

    A quadric jet's curvature error from noise sigma falls as sigma e / r^3 (e the mean edge length)
    while its bias grows as r^2 / L^3 (L a curvature length). The sum is least at
    r = RADIUS_GAIN (sigma e)^(1/5) L^(3/5), clipped to MIN_RADIUS..MAX_RADIUS edge lengths. sigma is
    the noise_level; L is one over the 90th percentile of max(|k1|, |k2|) of pilot fits at
    SCALE_RADIUS edge lengths, so the radius suits the tighter features (fillets) of the part. A clean
    mesh gets MIN_RADIUS edge lengths.
    """
    V, F = _as_mesh(V, F)
    normals, edge, grid = _grid_of(V, F)
    return _default_radius(grid, normals, edge)


def principal_curvatures(
    V: np.ndarray, F: np.ndarray, radius: float | None = None, degree: int = 2
) -> Curvature:
    """Principal curvatures and directions at every vertex from osculating jets.

    Each vertex's neighbours within ``radius`` (part units; None: default_radius) are expressed in the
    frame of its angle-weighted normal and fitted, by least squares, with a height polynomial of total
    degree ``degree`` (2 to 4) including a constant term (Cazals and Pouget 2003; Goldfeather and
    Interrante 2004). Curvatures and directions are those of the fitted graph at the vertex. Vertices
    near an open boundary get one-sided neighbourhoods and a lower ``quality``; vertices no triangle
    uses get NaN.
    """
    V, F = _as_mesh(V, F)
    if not 2 <= degree <= 4:
        raise InputError(f"curvature needs a jet of degree 2 to 4, not {degree}")
    if radius is not None:
        _check_radius(radius)
    normals, edge, grid = _grid_of(V, F, radius)
    if radius is None:
        radius = _default_radius(grid, normals, edge)
    k1, k2, d1, d2, normal, count, quality, _ = grid.jets(np.arange(len(V)), radius, degree)
    return Curvature(k1, k2, d1, d2, normal, count, quality, float(radius))


# ---------------------------------------------------------------------------------------------------
# Discrete operators (Meyer, Desbrun, Schroder and Barr 2003, "Discrete differential-geometry
# operators for triangulated 2-manifolds").


def boundary_vertices(F: np.ndarray, n: int) -> np.ndarray:
    """(n,) bool: the vertex lies on an edge used by exactly one triangle (edges of zero length, from
    degenerate triangles, are not edges)."""
    F = np.asarray(F, dtype=np.int64)
    ends = np.sort(np.stack([F, np.roll(F, -1, axis=1)], axis=2).reshape(-1, 2), axis=1)
    ends = ends[ends[:, 0] != ends[:, 1]]
    keys, counts = np.unique(ends[:, 0] * n + ends[:, 1], return_counts=True)
    single = keys[counts == 1]
    flag = np.zeros(n, dtype=bool)
    flag[single // n] = True
    flag[single % n] = True
    return flag


def mixed_areas(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(n,) Meyer et al.'s mixed Voronoi area of each vertex; they sum to the mesh's area."""
    V, F = _as_mesh(V, F)
    P = V[F]
    angle = _corner_angles(V, F)
    cot = _cotangents(angle)
    opposite_sq = np.sum((np.roll(P, -1, axis=1) - np.roll(P, 1, axis=1)) ** 2, axis=2)  # edge facing corner
    # Voronoi share of corner i: (|e_ij|^2 cot(angle k) + |e_ik|^2 cot(angle j)) / 8.
    voronoi = (np.roll(opposite_sq * cot, 1, axis=1) + np.roll(opposite_sq * cot, -1, axis=1)) / 8.0
    area = 0.5 * np.linalg.norm(np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0]), axis=1)
    obtuse = angle > 0.5 * np.pi
    any_obtuse = obtuse.any(axis=1, keepdims=True)
    share = np.where(any_obtuse, np.where(obtuse, 0.5, 0.25) * area[:, None], voronoi)
    return _scatter(F, share, len(V))


def angle_defect(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(n,) 2 pi minus the angles around each vertex (pi minus them on an open boundary).

    Discrete Gauss-Bonnet: the sum over all vertices is 2 pi times the Euler characteristic.
    """
    V, F = _as_mesh(V, F)
    total = _scatter(F, _corner_angles(V, F), len(V))
    full = np.where(boundary_vertices(F, len(V)), np.pi, 2.0 * np.pi)
    return full - total


def gaussian_curvature(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(n,) Gaussian curvature, angle defect over mixed area (Meyer et al. 2003); NaN on open boundaries."""
    V, F = _as_mesh(V, F)
    with np.errstate(divide="ignore", invalid="ignore"):
        K = angle_defect(V, F) / mixed_areas(V, F)
    K[boundary_vertices(F, len(V))] = np.nan
    return K


def mean_curvature(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(n,) mean curvature (k1 + k2) / 2 from the cotangent Laplacian (Meyer et al. 2003).

    The mean-curvature normal is sum_j (cot a_ij + cot b_ij)(x_i - x_j) / (2 A_mixed) = 2 H n; its
    component along the angle-weighted normal gives the sign. NaN on open boundaries.
    """
    V, F = _as_mesh(V, F)
    P = V[F]
    cot = _cotangents(_corner_angles(V, F))
    # Edge from corner i to corner i+1 is opposite corner i+2.
    edge = np.roll(P, -1, axis=1) - P
    weighted = np.roll(cot, -2, axis=1)[:, :, None] * edge  # (cot of the opposite corner) * (x_j - x_i)
    laplace = _scatter(F, -weighted, len(V)) + _scatter(np.roll(F, -1, axis=1), weighted, len(V))
    with np.errstate(divide="ignore", invalid="ignore"):
        H = np.einsum("ij,ij->i", laplace, vertex_normals(V, F)) / (4.0 * mixed_areas(V, F))
    H[boundary_vertices(F, len(V))] = np.nan
    return H
