"""Differential quantities of a triangle mesh: normals, jet fits, principal curvatures.

Principal curvatures come from a local polynomial ("jet") fit of the surface as a height function over
the tangent plane (Cazals and Pouget 2003, "Estimating differential quantities using polynomial fitting
of osculating jets"; Goldfeather and Interrante 2004), over a metric neighbourhood. The whole-mesh
fit runs in a compiled kernel (numba): neighbours from a column grid (surfcheck.geometry.neighbours), the
least-squares normal equations assembled from power sums of the neighbours' local coordinates and
solved by Cholesky per vertex (surfcheck.geometry.jetkernel), the 2x2 shape operator diagonalised in closed
form. Mean and Gaussian curvature are also offered from the cotangent Laplacian and the angle defect
(Meyer, Desbrun, Schroder and Barr 2003).

Sign convention: a curvature is positive where the surface bends away from its outward normal (an
outward-wound sphere has k1 = k2 = +1/R); k1 >= k2. Radians inside, curvature in 1/unit.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numba
import numpy as np

from surfcheck.errors import InputError
from surfcheck.geometry.jetkernel import exponent_arrays, fit_local_jet, graph_shape, jet_exponents, tangent_frame
from surfcheck.geometry.neighbours import ColumnGrid, check_radius, local_neighbours, neighbour_work
from surfcheck.part import check_mesh_arrays, edge_table

PILOT_SAMPLE = 4000  # vertices of the pilot fits that choose the default radius
MIN_RADIUS = 2.5  # default radius limits, in mean edge lengths: enough points for a quadric ...
MAX_RADIUS = 6.0  # ... and a bounded cost (the count of neighbours grows as the radius squared)
SCALE_RADIUS = 4.0  # pilot radius for the curvature scale, in mean edge lengths
RADIUS_GAIN = 2.2  # constant of the error-balancing radius, fitted on noisy tori (docs/curvature.md)
HALF_DISC = 0.5  # centroid offset / RMS radius of the neighbours of a vertex on a straight open edge


def _as_mesh(V: np.ndarray, F: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    V = np.ascontiguousarray(V, dtype=np.float64)
    F = np.ascontiguousarray(F, dtype=np.int64)
    check_mesh_arrays(V, F, "curvature")
    return V, F


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

    Parameters
    ----------
    V : (n, 3) float
        Vertex coordinates.
    F : (m, 3) int
        Triangles, indices into V.

    Returns
    -------
    (n, 3) float
        Unit normals (zero rows for unused vertices).
    """
    V, F = _as_mesh(V, F)
    return _mesh_measures(V, F)[0]


def mean_edge_length(V: np.ndarray, F: np.ndarray) -> float:
    """Mean length of the triangles' edges (each interior edge counted from both sides)."""
    V, F = _as_mesh(V, F)
    return float(_mesh_measures(V, F)[1])


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



# ---------------------------------------------------------------------------------------------------
# The compiled jet fit: per vertex, the neighbours of the column grid (surfcheck.geometry.neighbours) in the
# local frame, the normal equations of the jet accumulated and solved in place (surfcheck.geometry.jetkernel),
# parallel over vertices.


@numba.njit(cache=True, parallel=True, fastmath=False)
def _jet_kernel(grid, rows, radius, slots, ex, ey):
    """Per vertex of ``rows`` (sorted positions): local_neighbours, the jet with the monomials x^ex y^ey
    (fit_local_jet; Cazals and Pouget 2003), then graph_shape's closed form and the quality of the
    neighbourhood."""
    N = grid[1]
    n_rows, p = len(rows), len(ex)
    degree = int(np.max(ex + ey))
    k1o, k2o = np.full(n_rows, np.nan), np.full(n_rows, np.nan)
    d1o, d2o, no = np.full((n_rows, 3), np.nan), np.full((n_rows, 3), np.nan), np.full((n_rows, 3), np.nan)
    counto, qualo, rmso = np.zeros(n_rows, np.int64), np.zeros(n_rows), np.zeros(n_rows)
    block = 256
    for chunk in numba.prange((n_rows + block - 1) // block):
        M, rhs, coef = np.empty((p, p)), np.empty(p), np.empty(p)
        S, Z = np.empty((2 * degree + 1, 2 * degree + 1)), np.empty((degree + 1, degree + 1))
        frame = np.empty((3, 3))
        found, gap, local = neighbour_work(slots)
        for r in range(chunk * block, min((chunk + 1) * block, n_rows)):
            i = rows[r]
            n0, n1, n2 = N[i, 0], N[i, 1], N[i, 2]
            if n0 == 0.0 and n1 == 0.0 and n2 == 0.0:
                continue
            tangent_frame(n0, n1, n2, frame)
            count, found, gap, local = local_neighbours(grid, i, radius, slots, frame, found, gap, local)
            residual = fit_local_jet(local, count, ex, ey, degree, S, Z, M, rhs, coef)
            for s in range(p):
                residual -= coef[s] * rhs[s]
            # curvatures and directions of the fitted graph at the vertex
            u0, u1, u2 = frame[0, 0], frame[0, 1], frame[0, 2]
            v0, v1, v2 = frame[1, 0], frame[1, 1], frame[1, 2]
            fx, fy = coef[1], coef[2]
            k1, k2, w0, w1 = graph_shape(fx, fy, 2.0 * coef[3], coef[4], 2.0 * coef[5])
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
            # quality: balance of the neighbourhood (centroid offset against HALF_DISC) times its size
            safe = max(count, 1)
            spread = np.sqrt((S[2, 0] + S[0, 2]) / safe)
            offset = np.sqrt(S[1, 0] ** 2 + S[0, 1] ** 2) / safe
            balance = 1.0 - (offset / (HALF_DISC * max(spread, 1e-300))) ** 2
            size = (count - p) / p
            qualo[r] = min(max(balance, 0.0), 1.0) * min(max(size, 0.0), 1.0)
            counto[r] = count
            rmso[r] = np.sqrt(max(residual, 0.0) / max(count - p, 1)) * radius
    return k1o, k2o, d1o, d2o, no, counto, qualo, rmso


def grid_jets(grid: ColumnGrid, rows: np.ndarray, radius: float, degree: int):
    """Jet fits of total degree ``degree`` within ``radius`` at the vertices ``rows`` (_jet_kernel):
    k1, k2 (1/unit), d1, d2, fitted normal, neighbour count, quality and residual RMS (part units)."""
    exponents = exponent_arrays(jet_exponents(degree))
    return grid.run(_jet_kernel, rows, float(radius), grid.slot_count(radius), *exponents)


def _pilot_rows(normals: np.ndarray) -> np.ndarray:
    used = np.flatnonzero(np.linalg.norm(normals, axis=1) > 0)
    return used[np.linspace(0, len(used) - 1, min(PILOT_SAMPLE, len(used))).astype(np.int64)]


def _residual_level(grid: ColumnGrid, rows: np.ndarray, radius: float):
    """Median residual RMS of quadric jets within ``radius`` at ``rows``, and the curvatures found there."""
    k1, k2, *_, count, _, rms = grid_jets(grid, rows, radius, 2)
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


def fitted_radius(grid: ColumnGrid, normals: np.ndarray, edge: float) -> float:
    """default_radius from a mesh's jet_grid, its normals and mean edge length."""
    sigma, length = _pilot(grid, normals, edge)
    balanced = RADIUS_GAIN * (sigma * edge) ** 0.2 * length**0.6
    return float(np.clip(balanced, MIN_RADIUS * edge, MAX_RADIUS * edge))


def jet_grid(V: np.ndarray, F: np.ndarray, radius: float | None = None):
    """Angle-weighted normals, mean edge length and the column grid of a mesh for jet fits (columns
    of the radius, or of the smallest default radius when none is given); InputError on a malformed
    mesh."""
    V, F = _as_mesh(V, F)
    normals, edge, area, used = _mesh_measures(V, F)
    side = MIN_RADIUS * edge if radius is None else radius
    return normals, edge, ColumnGrid.of_vertices(V, normals, used / max(area, 1e-300), side)


def noise_level(V: np.ndarray, F: np.ndarray) -> float:
    """Estimated standard deviation of the vertices' scatter about a smooth surface (part units).

    From the residuals of quadric jets at MIN_RADIUS and SCALE_RADIUS mean edge lengths on a fixed
    sample of PILOT_SAMPLE vertices, with the quadric's own misfit taken out (see _pilot). About zero
    on a clean mesh; the scanner's noise on a scan.
    """
    normals, edge, grid = jet_grid(V, F)
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
    normals, edge, grid = jet_grid(V, F)
    return fitted_radius(grid, normals, edge)


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

    Parameters
    ----------
    V : (n, 3) float
        Vertex coordinates, part units.
    F : (m, 3) int
        Triangles, indices into V, outward wound.
    radius : float, optional
        Neighbourhood radius, part units.
    degree : int
        Total degree of the jet, 2 to 4.

    Returns
    -------
    Curvature
        k1, k2 (n,) float in 1/unit (k1 >= k2), d1, d2 and normals (n, 3) float, the neighbour count
        and fit quality per vertex (n,).
    """
    V, F = _as_mesh(V, F)
    if not 2 <= degree <= 4:
        raise InputError(f"curvature needs a jet of degree 2 to 4, not {degree}")
    if radius is not None:
        check_radius(radius)
    normals, edge, grid = jet_grid(V, F, radius)
    if radius is None:
        radius = fitted_radius(grid, normals, edge)
    k1, k2, d1, d2, normal, count, quality, _ = grid_jets(grid, np.arange(len(V)), radius, degree)
    return Curvature(k1, k2, d1, d2, normal, count, quality, float(radius))


# ---------------------------------------------------------------------------------------------------
# Discrete operators (Meyer, Desbrun, Schroder and Barr 2003, "Discrete differential-geometry
# operators for triangulated 2-manifolds").


def boundary_vertices(F: np.ndarray, n: int) -> np.ndarray:
    """(n,) bool: the vertex lies on an edge used by exactly one triangle (surfcheck.part.edge_table;
    edges of zero length, from degenerate triangles, are not edges)."""
    edges, _, face_count = edge_table(np.asarray(F, dtype=np.int64), n)
    single = edges[(face_count == 1) & (edges[:, 0] != edges[:, 1])]
    flag = np.zeros(n, dtype=bool)
    flag[single.reshape(-1)] = True
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
    """(n,) Gaussian curvature, angle defect over mixed area (Meyer et al. 2003); NaN on open boundaries.

    Parameters
    ----------
    V : (n, 3) float
        Vertex coordinates, part units.
    F : (m, 3) int
        Triangles, indices into V.

    Returns
    -------
    (n,) float
        Gaussian curvature, 1/unit^2.
    """
    V, F = _as_mesh(V, F)
    with np.errstate(divide="ignore", invalid="ignore"):
        K = angle_defect(V, F) / mixed_areas(V, F)
    K[boundary_vertices(F, len(V))] = np.nan
    return K


def mean_curvature(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(n,) mean curvature (k1 + k2) / 2 from the cotangent Laplacian (Meyer et al. 2003).

    The mean-curvature normal is sum_j (cot a_ij + cot b_ij)(x_i - x_j) / (2 A_mixed) = 2 H n; its
    component along the angle-weighted normal gives the sign. NaN on open boundaries.

    Parameters
    ----------
    V : (n, 3) float
        Vertex coordinates, part units.
    F : (m, 3) int
        Triangles, indices into V, outward wound.

    Returns
    -------
    (n,) float
        Mean curvature, 1/unit.
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
