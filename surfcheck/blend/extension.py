"""Order-K extensions of a surface across one of its boundary chains.

At each chain vertex p a one-sided jet is fitted: the surface near p is taken as a height function
z = f(x, y) over its tangent plane, with x along the chain and y across it, fitted by weighted least
squares to the vertices of that side only (osculating jets: Cazals and Pouget, "Estimating
differential quantities using polynomial fitting of osculating jets", CAGD 2005). The cross-boundary
normal section is z = f(0, y); at y = 0 it has tangent D (the unit cross direction, pointing off the
surface), curvature f_yy and curvature rate f_yyy (f_y = 0 in the refitted frame). The order-K
extension is its Taylor polynomial

    E(r) = p + r D + (f_yy r^2 / 2 + f_yyy r^3 / 6) N,     terms up to r^K,

which shares the surface's K-jet across the boundary, so it meets the surface with G^K contact.
"""

from __future__ import annotations

from dataclasses import dataclass
from math import factorial

import numpy as np
import scipy.sparse as sp
from scipy.interpolate import CubicSpline
from scipy.sparse.csgraph import dijkstra
from scipy.spatial import cKDTree

from surfcheck.geometry.differential import vertex_normals
from surfcheck.geometry.jetkernel import fit_height, jet_exponents
from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.seams import Curve

FIT_RADIUS_EDGES = 5.0  # fit window radius in chain edge lengths (common practice, no published source)
NEIGHBOURS = 160
MIN_POINTS_PER_COEFFICIENT = 3
MAX_FIT_DEGREE = 4


@dataclass(frozen=True)
class Extension:
    """Taylor extensions E(r) across a boundary at a row of stations: base points p (n,3), unit cross
    directions D (n,3) pointing off the surface, unit normals N (n,3), and coefficients (n, K-1) of
    r^j / j! along N for j = 2..K."""

    p: np.ndarray
    D: np.ndarray
    N: np.ndarray
    coefficients: np.ndarray

    @property
    def order(self) -> int:
        return self.coefficients.shape[1] + 1

    def derivative(self, r: np.ndarray, n: int = 0) -> np.ndarray:
        """The n-th r-derivative of E at cross distances r (shape (..., stations)) -> (..., stations, 3)."""
        r = np.asarray(r, dtype=np.float64)
        height = np.zeros(r.shape)
        for j in range(max(n, 2), self.order + 1):
            height = height + self.coefficients[:, j - 2] * r ** (j - n) / factorial(j - n)
        out = height[..., None] * self.N
        if n == 0:
            out = out + self.p + r[..., None] * self.D
        elif n == 1:
            out = out + self.D
        return out

    def at(self, s: np.ndarray, s_stations: np.ndarray, closed: bool) -> "Extension":
        """The extension at other arc-length parameters s, by cubic splines through the stations."""
        x, values = s_stations, [self.p, self.D, self.N, self.coefficients]
        if closed:
            x = np.append(s_stations, 1.0)
            values = [np.vstack([v, v[:1]]) for v in values]
        kind = "periodic" if closed else "not-a-knot"
        p, D, N, c = (CubicSpline(x, v, axis=0, bc_type=kind)(s) for v in values)
        D = _unit(D)
        N = _unit(N - np.sum(N * D, axis=1, keepdims=True) * D)
        return Extension(p, D, N, c)


def boundary_extension(part: Part, chain: Curve, order: int, radius: float | None = None) -> Extension:
    """The order-``order`` extension of ``part`` across ``chain`` at each chain vertex."""
    P = part.vertices[chain.vertices]
    spacing = float(np.median(np.linalg.norm(np.diff(P, axis=0), axis=1)))
    radius = radius or FIT_RADIUS_EDGES * spacing
    faces = _side_faces(part, chain)
    samples = _side_vertices(part, faces, chain.vertices, 3.0 * radius)
    exponents = jet_exponents(min(order + 2, MAX_FIT_DEGREE))  # above the top derivative: less bias
    need = MIN_POINTS_PER_COEFFICIENT * len(exponents)
    if len(samples) < need:
        raise InputError(f"chain {chain.id}: too few vertices beside the chain to fit its surface "
                         f"({len(samples)}, need {need}); the mesh is too coarse near that boundary")
    distance, neighbour = cKDTree(samples).query(P, k=min(NEIGHBOURS, len(samples)))
    window = np.maximum(radius, 1.05 * distance[:, need - 1])  # wider at chain ends, where a side is thin
    weights = np.clip(1.0 - (distance / window[:, None]) ** 2, 0.0, None) ** 2
    offsets = samples[neighbour] - P[:, None, :]
    T = _unit(_chain_tangents(P, chain.closed))
    N = vertex_normals(part.vertices, faces)[chain.vertices]
    D = np.cross(N, T)
    inward = np.einsum("sk,skc->sc", weights, offsets)
    D = np.where(np.sum(D * inward, axis=1, keepdims=True) > 0, -D, D)
    for _ in range(2):  # the second fit is made in the tangent frame the first one found
        coeff = _fit(offsets, weights, (T, D, N), exponents, window)
        gx, gy = coeff[:, exponents.index((1, 0))], coeff[:, exponents.index((0, 1))]
        N = _unit(N - gx[:, None] * T - gy[:, None] * D)
        T = _unit(T - np.sum(T * N, axis=1, keepdims=True) * N)
        D = np.cross(N, T) * np.sign(np.sum(np.cross(N, T) * D, axis=1, keepdims=True))
    taylor = [coeff[:, exponents.index((0, j))] * factorial(j) / window ** (j - 1) for j in range(2, order + 1)]
    coefficients = np.stack(taylor, axis=1) if taylor else np.zeros((len(P), 0))
    return Extension(P.copy(), D, N, coefficients)


def _fit(offsets, weights, frame, exponents, window) -> np.ndarray:
    """Height polynomials in the frame (x along T, y along D, heights along N), scaled by the window."""
    x, y, z = (np.einsum("skc,sc->sk", offsets, axis) / window[:, None] for axis in frame)
    return fit_height(x, y, z, weights, exponents)


def _side_faces(part: Part, chain: Curve) -> np.ndarray:
    """Faces of the chain's own group (all faces when the chain names no group of the part)."""
    if chain.groups and chain.groups[0] in part.group_names:
        return part.faces[part.faces_of_group(chain.groups[0])]
    return part.faces


def _side_vertices(part: Part, faces: np.ndarray, chain_vertices: np.ndarray, limit: float) -> np.ndarray:
    """Positions of the vertices of ``faces`` within mesh distance ``limit`` of the chain, so the other
    side of a narrow gap on the same part is never taken for this side."""
    V = part.vertices
    e = np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]])
    lengths = np.linalg.norm(V[e[:, 0]] - V[e[:, 1]], axis=1)
    graph = sp.csr_matrix((lengths, (e[:, 0], e[:, 1])), shape=(len(V), len(V)))
    distance = dijkstra(graph, directed=False, indices=chain_vertices, min_only=True, limit=limit)
    return V[np.isfinite(distance)]


def _chain_tangents(P: np.ndarray, closed: bool) -> np.ndarray:
    if closed:
        return np.roll(P, -1, axis=0) - np.roll(P, 1, axis=0)
    return np.gradient(P, axis=0)


def _unit(v: np.ndarray) -> np.ndarray:
    return v / np.linalg.norm(v, axis=-1, keepdims=True)
