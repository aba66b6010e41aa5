"""Differential quantities of a triangle mesh: normals, local frames, jet fits, curvatures.

Principal curvatures come from a local polynomial ("jet") fit of the surface as a height function over
the tangent plane (Cazals and Pouget 2003, "Estimating differential quantities using polynomial fitting
of osculating jets"; Goldfeather and Interrante 2004), over a metric neighbourhood found with a k-d
tree. Every vertex is fitted at once in chunks: the least-squares normal equations are assembled from
power sums of the neighbours' local coordinates and solved by a batched Cholesky factorisation, and the
2x2 shape operator is diagonalised in closed form. Mean and Gaussian curvature are also offered from
the cotangent Laplacian and the angle defect (Meyer, Desbrun, Schroder and Barr 2003).

Sign convention: a curvature is positive where the surface bends away from its outward normal (an
outward-wound sphere has k1 = k2 = +1/R); k1 >= k2. Radians inside, curvature in 1/unit.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace
from functools import cached_property

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


def _triangle_geometry(V: np.ndarray, F: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per triangle: the cross product (b - a) x (c - a), (m, 3), and the corner angles (m, 3), radians.

    The three corner angles share one sine term, |cross| (twice the area), so each costs one dot
    product and one arctan2.
    """
    a, b, c = V[F[:, 0]], V[F[:, 1]], V[F[:, 2]]
    ab, bc, ca = b - a, c - b, a - c
    cross = np.cross(ab, -ca)
    double_area = np.sqrt(np.einsum("ij,ij->i", cross, cross))
    dots = [-np.einsum("ij,ij->i", ab, ca), -np.einsum("ij,ij->i", bc, ab), -np.einsum("ij,ij->i", ca, bc)]
    return cross, np.arctan2(double_area[:, None], np.stack(dots, axis=1))


def _corner_angles(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(m, 3) interior angle of each triangle at each of its corners, radians."""
    return _triangle_geometry(V, F)[1]


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


def vertex_normals(V: np.ndarray, F: np.ndarray) -> np.ndarray:
    """(n, 3) unit vertex normals, face normals weighted by the corner angle (Thurmer and Wuthrich 1998).

    Outward for outward-wound (counter-clockwise seen from outside) faces. A vertex that no triangle
    uses gets the zero vector.
    """
    V, F = _as_mesh(V, F)
    cross, angle = _triangle_geometry(V, F)
    face_normal = _unit(cross)
    n = len(V)
    summed = np.zeros((n, 3))
    for i in range(3):  # corners
        for j in range(3):  # coordinates
            summed[:, j] += np.bincount(F[:, i], weights=angle[:, i] * face_normal[:, j], minlength=n)
    return _unit(summed)


def tangent_frames(normals: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two unit tangents (t1, t2) per normal with (t1, t2, n) right-handed and orthonormal."""
    axis = np.zeros_like(normals)
    axis[np.arange(len(normals)), np.argmin(np.abs(normals), axis=1)] = 1.0
    t1 = _unit(np.cross(normals, axis))
    return t1, np.cross(normals, t1)


def mean_edge_length(V: np.ndarray, F: np.ndarray) -> float:
    """Mean length of the triangles' edges (each interior edge counted from both sides)."""
    P = V[F]
    return float(np.linalg.norm(P - np.roll(P, 1, axis=1), axis=2).mean())


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


def graph_curvatures(fx, fy, fxx, fxy, fyy):
    """Principal curvatures and directions at the origin of the graph z = f(x, y).

    From the first and second fundamental forms of the graph (do Carmo 1976, section 3-3): the
    principal curvatures solve det(II - k I) = 0. The sign is flipped so that a graph bending down,
    away from +z, is positive. Returns k1 >= k2 and their directions as (c, 2) parameter vectors.
    """
    W = np.sqrt(1.0 + fx * fx + fy * fy)
    E, Fm, G = 1.0 + fx * fx, fx * fy, 1.0 + fy * fy
    L, M, N = -fxx / W, -fxy / W, -fyy / W
    det_I = E * G - Fm * Fm
    H = (E * N + G * L - 2.0 * Fm * M) / (2.0 * det_I)
    K = (L * N - M * M) / det_I
    root = np.sqrt(np.maximum(H * H - K, 0.0))
    k1, k2 = H + root, H - root
    # (II - k1 I) v = 0: take the better conditioned of the two rows' null vectors.
    a, b, d = L - k1 * E, M - k1 * Fm, N - k1 * G
    v_row1 = np.stack([b, -a], axis=-1)
    v_row2 = np.stack([d, -b], axis=-1)
    use_row1 = (a * a + b * b) >= (b * b + d * d)
    v1 = np.where(use_row1[:, None], v_row1, v_row2)
    degenerate = np.linalg.norm(v1, axis=1) <= 1e-12 * (np.abs(k1) + 1e-300)
    v1[degenerate] = (1.0, 0.0)
    return k1, k2, v1


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
        if not np.isfinite(radius) or radius <= 0:
            raise InputError(f"the neighbourhood radius must be a positive length, not {radius}")
        expected = np.pi * radius * radius * self.density
        count = int(np.clip(np.ceil(scale * 1.6 * expected) + 1, 12, 512))
        return replace(self, radius=float(radius), count=min(count, len(self.V)))

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


def _neighbourhood_quality(x: np.ndarray, y: np.ndarray, w: np.ndarray, unknowns: int):
    """Quality in [0, 1] from the balance of the neighbourhood and its size (see Curvature).

    Balance compares the offset of the neighbours' centroid from the vertex with their RMS distance:
    about 0 for a full disc, HALF_DISC (0.5 measured on grid meshes; 0.6 for a continuous half disc)
    for a vertex on a straight open edge. Size counts the points beyond the unknowns.
    """
    count = w.sum(axis=1)
    safe = np.maximum(count, 1.0)
    spread = np.sqrt((w * (x * x + y * y)).sum(axis=1) / safe)
    offset = np.hypot((w * x).sum(axis=1), (w * y).sum(axis=1)) / safe
    balance = 1.0 - (offset / (HALF_DISC * np.maximum(spread, 1e-300))) ** 2
    size = (count - unknowns) / unknowns
    return np.clip(balance, 0.0, 1.0) * np.clip(size, 0.0, 1.0), count.astype(np.int64)


def _jet_curvatures(hood: Neighbourhoods, rows: np.ndarray, degree: int):
    """k1, k2 (1/unit), d1, d2, fitted normal, neighbour count, quality and residual RMS at ``rows``."""
    exponents = jet_exponents(degree)
    coef, (t1, t2, n), residual, (x, y, _, w) = _jet_at(hood, rows, degree)
    fx, fy = coef[:, 1], coef[:, 2]
    k1, k2, v1 = jet_shape(coef)
    normal = _unit(n - fx[:, None] * t1 - fy[:, None] * t2)
    d1 = _unit(v1[:, :1] * (t1 + fx[:, None] * n) + v1[:, 1:] * (t2 + fy[:, None] * n))
    d2 = np.cross(normal, d1)
    quality, count = _neighbourhood_quality(x, y, w, len(exponents))
    dof = np.maximum(count - len(exponents), 1)
    rms = np.sqrt(residual / dof) * hood.radius
    return k1 / hood.radius, k2 / hood.radius, d1, d2, normal, count, quality, rms


def _pilot_rows(hood: Neighbourhoods) -> np.ndarray:
    used = np.flatnonzero(np.linalg.norm(hood.normals, axis=1) > 0)
    return used[np.linspace(0, len(used) - 1, min(PILOT_SAMPLE, len(used))).astype(np.int64)]


def _residual_level(hood: Neighbourhoods, rows: np.ndarray):
    """Median residual RMS of quadric jets over ``hood`` at ``rows``, and the curvatures found there."""
    k1, k2, *_, count, _, rms = _jet_curvatures(hood, rows, 2)
    fitted = count > len(jet_exponents(2)) + 3
    return (float(np.median(rms[fitted])) if fitted.any() else 0.0), k1, k2


def _pilot(hood: Neighbourhoods, edge: float) -> tuple[float, float]:
    """Noise level (part units) and curvature length of the part, from quadric jets on a sample.

    The residual of a quadric jet is noise plus misfit; the misfit grows as the cube of the radius
    (the jet's first neglected terms), the noise does not. Residuals at two radii r1 < r2 separate
    them: noise^2 = (s1^2 q^6 - s2^2) / (q^6 - 1) with q = r2 / r1.
    """
    rows = _pilot_rows(hood)
    small, _, _ = _residual_level(hood.at_radius(MIN_RADIUS * edge), rows)
    large, k1, k2 = _residual_level(hood.at_radius(SCALE_RADIUS * edge), rows)
    q6 = (SCALE_RADIUS / MIN_RADIUS) ** 6
    noise = np.sqrt(max(small * small * q6 - large * large, 0.0) / (q6 - 1.0))
    bend = np.nanpercentile(np.maximum(np.abs(k1), np.abs(k2)), 90) if len(rows) else 0.0
    return float(noise), min(1.0 / max(bend, 1e-300), 1e3 * edge)


def _default_radius(hood: Neighbourhoods, edge: float) -> float:
    sigma, length = _pilot(hood, edge)
    balanced = RADIUS_GAIN * (sigma * edge) ** 0.2 * length**0.6
    return float(np.clip(balanced, MIN_RADIUS * edge, MAX_RADIUS * edge))


def noise_level(V: np.ndarray, F: np.ndarray) -> float:
    """Estimated standard deviation of the vertices' scatter about a smooth surface (part units).

    From the residuals of quadric jets at MIN_RADIUS and SCALE_RADIUS mean edge lengths on a fixed
    sample of PILOT_SAMPLE vertices, with the quadric's own misfit taken out (see _pilot). About zero
    on a clean mesh; the scanner's noise on a scan.
    """
    V, F = _as_mesh(V, F)
    return _pilot(Neighbourhoods.of_mesh(V, F, vertex_normals(V, F)), mean_edge_length(V, F))[0]


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
    return _default_radius(Neighbourhoods.of_mesh(V, F, vertex_normals(V, F)), mean_edge_length(V, F))


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
    normals = vertex_normals(V, F)
    hood = Neighbourhoods.of_mesh(V, F, normals)
    if radius is None:
        radius = _default_radius(hood, mean_edge_length(V, F))
    hood = hood.at_radius(radius)
    parts = list(zip(*_in_parallel(lambda rows: _jet_curvatures(hood, rows, degree)[:7], len(V), hood.count)))
    k1, k2, d1, d2, normal, count, quality = (np.concatenate(p) for p in parts)
    unused = np.linalg.norm(normals, axis=1) == 0
    for field in (k1, k2, d1, d2, normal):
        field[unused] = np.nan
    quality[unused] = 0.0
    count[unused] = 0
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
