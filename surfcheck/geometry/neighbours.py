"""Fixed-radius neighbours of mesh vertices: a column grid searched by compiled kernels.

The vertices are sorted into square columns across the mesh's two widest axes and by height within
each column. The ball of radius r around a vertex lies in the (2m + 1)^2 columns around its own
(m = ceil(r / side)) and, within each, in one run of heights found by bisection: a cell-based
fixed-radius near-neighbour search (Bentley, Stanat and Williams 1977) that visits only the points of
those runs. Kernels (numba) receive the grid as one tuple (ColumnGrid.arrays) and call
local_neighbours per vertex.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

from surfcheck.errors import InputError


def check_radius(radius: float) -> None:
    """InputError unless ``radius`` is a positive finite length."""
    if not np.isfinite(radius) or radius <= 0:
        raise InputError(f"the neighbourhood radius must be a positive length, not {radius}")


@dataclass(frozen=True)
class ColumnGrid:
    """Vertices sorted into columns (see the module docstring), with their normals.

    The column side is at least ``side`` and large enough that there are at most about eight columns
    per vertex, so memory stays linear in the mesh size.
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
        """Most neighbours a fit within ``radius`` takes: 1.6 times the points of a full disc (at the
        grid's density) plus one, 12 to 512 and at most all: where the mesh is much denser than
        average a vertex takes its nearest points within the radius."""
        check_radius(radius)
        expected = np.pi * radius * radius * self.density
        return min(int(np.clip(np.ceil(1.6 * expected) + 1, 12, 512)), len(self.order))

    @property
    def arrays(self) -> tuple:
        """The grid as a kernel takes it: (points, normals, start, axes, columns across, low0, low1, side)."""
        return (self.points, self.normals, self.start, self.axes, self.shape[1], self.low[0], self.low[1],
                self.side)

    def run(self, kernel, rows: np.ndarray, *args) -> tuple[np.ndarray, ...]:
        """``kernel(arrays, positions, *args)`` at the vertices ``rows``, which it sees by sorted position
        and visits in grid order (neighbours stay in cache); its per-row outputs in the order of rows."""
        position = self.rank[rows]
        walk = np.argsort(position, kind="stable")
        results = []
        for field in kernel(self.arrays, position[walk], *args):
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
def _gather_ball(grid, i, radius, found, gap):
    """Sorted positions and squared distances of the points within ``radius`` of point i, written into
    ``found`` and ``gap`` as far as they hold; returns how many there are."""
    P, start, axes, ny, low0, low1, side = grid[0], grid[2], grid[3], grid[4], grid[5], grid[6], grid[7]
    a0, a1, a2 = axes[0], axes[1], axes[2]
    nx = (len(start) - 1) // ny
    reach = int(np.ceil(radius / side))
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


@numba.njit(cache=True)
def neighbour_work(slots):
    """Work arrays for local_neighbours (found, gap, local), room for a ball of 4 slots + 64 points."""
    size = 4 * slots + 64
    return np.empty(size, np.int64), np.empty(size), np.empty((size, 3))


@numba.njit(cache=True)
def local_neighbours(grid, i, radius, slots, frame, found, gap, local):
    """The neighbours of point i (sorted position) that a fit at i takes, in i's local frame.

    They are the points within ``radius`` (at most the ``slots`` nearest; ties at that distance count
    as long as slots remain) whose normal faces the same side as i's (this keeps the far wall of a thin
    part out). Their coordinates along the rows of ``frame`` (tangent, tangent, normal), divided by
    the radius, go into the rows of ``local``. ``found``, ``gap`` and ``local`` are the work arrays of
    neighbour_work, replaced by longer ones where the ball holds more points. Returns the number of
    neighbours and the work arrays.
    """
    P, N = grid[0], grid[1]
    inside = _gather_ball(grid, i, radius, found, gap)
    if inside > len(found):
        found, gap, local = np.empty(2 * inside, np.int64), np.empty(2 * inside), np.empty((2 * inside, 3))
        _gather_ball(grid, i, radius, found, gap)
    bound, at_bound = radius * radius, slots  # take all points closer than bound, at most at_bound at it
    if inside > slots:
        ranked = np.sort(gap[:inside])
        bound = ranked[slots - 1]
        at_bound = slots - np.searchsorted(ranked, bound)
    count = 0
    for slot in range(inside):
        j, dd = found[slot], gap[slot]
        if dd > bound:
            continue
        if dd == bound and inside > slots:
            if at_bound == 0:
                continue
            at_bound -= 1
        if N[j, 0] * N[i, 0] + N[j, 1] * N[i, 1] + N[j, 2] * N[i, 2] <= 0.0:
            continue
        d0, d1, d2 = (P[j, 0] - P[i, 0]) / radius, (P[j, 1] - P[i, 1]) / radius, (P[j, 2] - P[i, 2]) / radius
        for axis in range(3):
            local[count, axis] = d0 * frame[axis, 0] + d1 * frame[axis, 1] + d2 * frame[axis, 2]
        count += 1
    return count, found, gap, local
