"""Primitive regions of an unlabelled mesh: the stages of segmentation that grow faces.

- Local shape from surfcheck.geometry.differential: jets give smoothed normals and principal curvatures; the
  noise level is the median jet residual (noise_level); the normal's noise follows from least squares
  (see prepare_mesh). Every threshold is a multiple of these two.
- Region growing from seeds in the flattest places: a primitive (plane, cylinder, sphere, cone, torus;
  Lukacs, Martin and Marshall 1998) fitted around the seed is grown over connected faces that lie within
  3 noise levels of it and whose normals agree with it, refitted and grown again until stable (region
  growing with a global model, so it cannot creep along a tangent blend; Besl and Jain 1988,
  "Segmentation through variable-order surface fitting").
- Merging of neighbouring regions one primitive fits; competition (each face goes to the nearby
  primitive that explains it best, which puts the border between two tangent primitives where they
  touch; in the spirit of Isack and Boykov 2012, "Energy-based geometric multi-model fitting"); thin or
  small leftovers go to the neighbour nearest in distance, the rest become freeform regions.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, connected_components
from scipy.spatial import cKDTree

from surfcheck.geometry.differential import Curvature, noise_level, principal_curvatures
from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.geometry.primitives import KINDS, Primitive, fit_simplest

SCALE_EDGES = 2.5  # neighbourhood radius in median edge lengths: about 25 vertices per jet
DISTANCE_SIGMAS = 3.0  # a face fits a primitive if its vertices' rms distance is under 3 noise levels
NORMAL_SIGMAS = 3.5  # ... and its normal is within 3.5 normal-noise levels
LOOSE_NORMAL_DEG = 15.0  # competition: normals may be off this much (jets are biased near creases)
MAX_ROUGHNESS_DEG = 40.0  # median angle between neighbouring triangles above which there is no surface
MAX_SEEDS = 400  # seeds tried before giving up on the rest

@dataclass(eq=False)
class ScanMesh:
    """The arrays every stage uses: vertices, faces, face adjacency, smoothed face normals, areas."""

    V: np.ndarray
    F: np.ndarray
    adjacency: sp.csr_matrix
    centroids: np.ndarray
    normals: np.ndarray
    areas: np.ndarray
    shape: Curvature
    noise: float
    normal_noise: float
    scale: float

    def distance(self, model: Primitive, faces: np.ndarray | None = None) -> np.ndarray:
        """(m,) rms over each face's corners of their distance to the model (of the faces given, when
        given: only their corners are measured)."""
        if faces is None:
            d = model.signed_distance(self.V)[self.F]
        else:
            corners = self.F[faces]
            d = model.signed_distance(self.V[corners.reshape(-1)]).reshape(corners.shape)
        return np.sqrt((d ** 2).mean(axis=1))

    def angle(self, model: Primitive) -> np.ndarray:
        """(m,) angle (radians) between each face's smoothed normal and the model's normal there."""
        cos = np.abs(np.einsum("ij,ij->i", self.normals, model.normals(self.centroids)))
        return np.arccos(np.clip(cos, 0.0, 1.0))

    def fits(self, model: Primitive, strict: bool) -> np.ndarray:
        """Faces within 3 noise levels of the model whose normals agree with it: within 3.5
        normal-noise levels (strict), or within LOOSE_NORMAL_DEG (loose: a jet within its radius of
        a crease or of a curvature step is off by more than its noise)."""
        near = self.distance(model) < DISTANCE_SIGMAS * self.noise
        limit = NORMAL_SIGMAS * self.normal_noise
        if not strict:
            limit = max(limit, np.radians(LOOSE_NORMAL_DEG))
        return near & (self.angle(model) < limit)

    def label_components(self, label: np.ndarray) -> np.ndarray:
        """Connected pieces of equal label.

        Parameters
        ----------
        label : (m,) int or bool
            A label per face.

        Returns
        -------
        (m,) int
            The piece of each face: faces share a piece when a path of edge-adjacent faces of their
            label joins them.
        """
        A = self.adjacency.tocoo()
        same = label[A.row] == label[A.col]
        g = sp.csr_matrix((np.ones(int(same.sum())), (A.row[same], A.col[same])), shape=A.shape)
        return connected_components(g, directed=False)[1]

    def cost(self, model: Primitive) -> np.ndarray:
        """(m,) squared distance and normal residuals of each face to the model, in noise units."""
        return (self.distance(model) / self.noise) ** 2 + (self.angle(model) / self.normal_noise) ** 2


def face_adjacency(part: Part) -> sp.csr_matrix:
    """(m, m) symmetric 0/1 matrix: faces sharing an edge."""
    inc = part.edge_faces.astype(np.int32)
    adjacency = (inc.T @ inc).tocsr()
    adjacency.setdiag(0)
    adjacency.eliminate_zeros()
    adjacency.data[:] = 1
    return adjacency


def roughness_deg(part: Part, adjacency: sp.csr_matrix) -> float:
    """Median angle (degrees) between the normals of edge-adjacent triangles."""
    V, F = part.vertices, part.faces
    n = np.cross(V[F[:, 1]] - V[F[:, 0]], V[F[:, 2]] - V[F[:, 0]])
    n /= np.maximum(np.linalg.norm(n, axis=1, keepdims=True), 1e-300)
    A = sp.triu(adjacency).tocoo()
    if not len(A.row):
        return 0.0
    cos = np.abs(np.einsum("ij,ij->i", n[A.row], n[A.col]))
    return float(np.degrees(np.median(np.arccos(np.clip(cos, 0.0, 1.0)))))


def prepare_mesh(part: Part, scale: float | None, noise: float | None) -> ScanMesh:
    """The arrays of ``part`` for segmentation: jets at radius ``scale`` (default SCALE_EDGES median
    edges), noise level (default: estimated), the normal's noise; InputError on a noise cloud."""
    adjacency = face_adjacency(part)
    rough = roughness_deg(part, adjacency)
    if rough > MAX_ROUGHNESS_DEG:
        raise InputError(
            f"{part.source or 'part'}: neighbouring triangles differ by {rough:.0f} degrees in the median; "
            "the mesh looks like a noise cloud, not a surface; smooth or re-mesh the scan first"
        )
    h = float(np.median(part.edge_lengths))
    rho = SCALE_EDGES * h if scale is None else float(scale)
    if not rho > 0:
        raise InputError(f"the neighbourhood scale must be positive; got {scale}")
    shape = principal_curvatures(part.vertices, part.faces, radius=rho)
    sigma = noise_level(part.vertices, part.faces) if noise is None else float(noise)
    sigma = max(sigma, 1e-6 * part.diagonal)
    # least-squares slope of N points spread evenly over a disc of radius rho: sd 2 sigma / (rho sqrt N)
    # per tangent direction, so the normal's angle has sd about 2 sqrt(2) sigma / (rho sqrt N)
    count = float(np.median(shape.neighbours[shape.neighbours > 0])) if (shape.neighbours > 0).any() else 1.0
    normal_noise = max(2.0 * np.sqrt(2.0) * sigma / (rho * np.sqrt(count)), np.radians(0.05))
    F = part.faces
    normals = shape.normals[F].sum(axis=1)
    normals /= np.maximum(np.linalg.norm(normals, axis=1, keepdims=True), 1e-300)
    centroids = part.vertices[F].mean(axis=1)
    return ScanMesh(part.vertices, F, adjacency, centroids, normals, part.face_areas, shape,
                 sigma, normal_noise, rho)


def _reachable(mesh: ScanMesh, allowed: np.ndarray, seed: int) -> np.ndarray:
    """Faces reachable from ``seed`` through edge-adjacent faces that are all ``allowed``."""
    keep = sp.diags(allowed.astype(np.float64))
    sub = (keep @ mesh.adjacency @ keep).tocsr()
    order = breadth_first_order(sub, seed, directed=False, return_predecessors=False)
    return order


def fit_faces(mesh: ScanMesh, faces: np.ndarray, prefer: str | None = None) -> Primitive:
    return _fit(mesh, np.unique(mesh.F[faces]), prefer)


def _fit(mesh: ScanMesh, vertices: np.ndarray, prefer: str | None = None) -> Primitive:
    """The simplest primitive through the vertices; one within 1.2 noise levels is taken at once, and
    the ``prefer``red kind (the region's current one) is tried first."""
    kinds = KINDS if prefer is None else (prefer, *(k for k in KINDS if k != prefer))
    return fit_simplest(mesh.V[vertices], mesh.shape.normals[vertices], 0.25 * mesh.noise, kinds,
                        good_enough=1.2 * mesh.noise)


def _grow(mesh: ScanMesh, free: np.ndarray, seed: int, model: Primitive) -> tuple[np.ndarray, Primitive] | None:
    """Grow the seed's primitive over connected free faces that fit it, refit, repeat until stable.

    First with the strict normal test; a curved primitive then goes on with the loose one, since the
    jets across a fillet narrower than a few scales are all bent by its tangent lines. A plane stays
    strict, so it cannot creep into a G2 or G3 blend whose curvature starts from zero. If a refit no
    longer holds the seed, the last region that did is kept.
    """
    region, kept = None, None
    for strict in (True, False):
        if not strict and kept is not None and kept.kind == "plane":
            break
        for _ in range(10):
            allowed = free & mesh.fits(model, strict=strict)
            if not allowed[seed]:
                break
            grown = _reachable(mesh, allowed, seed)
            stable = region is not None and len(region) <= len(grown) <= 1.01 * len(region)
            region, kept = grown, model
            if stable:
                break
            model = fit_faces(mesh, region, prefer=model.kind)
        if kept is None:
            return None
        model = kept
    return region, kept


def _seed_model(mesh: ScanMesh, ball: np.ndarray) -> Primitive | None:
    """The primitive of a seed's ball of free faces, if one fits it within 1.5 noise levels."""
    if len(ball) < 10:
        return None
    try:
        model = fit_faces(mesh, ball)
    except InputError:
        return None
    return model if model.rms <= 1.5 * mesh.noise else None


def grow_regions(mesh: ScanMesh, min_faces: int, rho: float) -> tuple[np.ndarray, list[Primitive]]:
    """Seeds in increasing curvature order; each grows a primitive region over unclaimed faces.

    A seed is skipped when its ball (radius 1.5 scales) is mostly claimed already or holds no
    primitive; a failed seed retires the faces within one scale of it as seeds.
    """
    m = len(mesh.F)
    label = -np.ones(m, dtype=np.int64)
    tried = np.zeros(m, dtype=bool)
    flatness = np.nan_to_num((np.abs(mesh.shape.k1) + np.abs(mesh.shape.k2))[mesh.F].mean(axis=1), nan=np.inf)
    order = np.argsort(flatness, kind="stable")
    tree = cKDTree(mesh.centroids)
    models: list[Primitive] = []
    attempts = 0
    for seed in order:
        if label[seed] >= 0 or tried[seed]:
            continue
        attempts += 1
        if attempts > MAX_SEEDS:
            break
        ball = np.asarray(tree.query_ball_point(mesh.centroids[seed], 1.5 * rho), dtype=np.int64)
        free_ball = ball[label[ball] < 0]
        model = _seed_model(mesh, free_ball) if len(free_ball) >= 0.7 * len(ball) else None
        grown = _grow(mesh, label < 0, int(seed), model) if model is not None else None
        if grown is None or len(grown[0]) < min_faces:
            tried[seed] = True
            tried[tree.query_ball_point(mesh.centroids[seed], rho)] = True
            continue
        label[grown[0]] = len(models)
        models.append(grown[1])
    return label, models


def merge_regions(mesh: ScanMesh, label: np.ndarray, models: list[Primitive]) -> tuple[np.ndarray, list[Primitive]]:
    """Merge neighbouring regions that one primitive fits within 1.2 noise levels (pieces of one
    surface grown from different seeds). Returns relabelled faces and the surviving models."""
    label, models = label.copy(), list(models)
    alive = [True] * len(models)
    failed: set[tuple[int, int]] = set()
    merged_any = True
    while merged_any:
        merged_any = False
        for i, j in _adjacent_pairs(mesh, label):
            if (i, j) in failed or not (alive[i] and alive[j]):
                continue
            union = np.flatnonzero((label == i) | (label == j))
            model = fit_faces(mesh, union, prefer=models[i].kind)
            if model.rms <= 1.2 * mesh.noise:
                label[label == j] = i
                models[i], alive[j] = model, False
                merged_any = True
            else:
                failed.add((i, j))
    keep = [j for j in range(len(models)) if alive[j]]
    remap = -np.ones(len(models) + 1, dtype=np.int64)
    remap[keep] = np.arange(len(keep))
    return remap[label], [models[j] for j in keep]


def _adjacent_pairs(mesh: ScanMesh, label: np.ndarray, rings: int = 4) -> list[tuple[int, int]]:
    """Pairs (i < j) of labels >= 0 that come within ``rings`` face rings of each other."""
    n_labels = int(label.max()) + 1 if (label >= 0).any() else 0
    present = nearby_labels(mesh, label, n_labels, rings).astype(np.int32)
    together = sp.triu(present.T @ present, k=1).tocoo()
    return sorted(zip(together.row.tolist(), together.col.tolist()))


def nearby_labels(mesh: ScanMesh, label: np.ndarray, n_labels: int, rings: int) -> sp.csr_matrix:
    """(m, n_labels) boolean: which labels occur within ``rings`` face rings of each face."""
    m = len(label)
    has = label >= 0
    present = sp.csr_matrix((np.ones(int(has.sum())), (np.flatnonzero(has), label[has])), shape=(m, n_labels))
    step = mesh.adjacency + sp.identity(m, format="csr")
    for _ in range(rings):
        present = step @ present
    return present.astype(bool).tocsr()


def compete(mesh: ScanMesh, label: np.ndarray, models: list[Primitive], rings: int = 3) -> np.ndarray:
    """Give each face to the nearby model that fits it at lowest cost; -1 where none fits."""
    m, r = len(label), len(models)
    cost = np.full((m, r), np.inf)
    nearby = nearby_labels(mesh, label, r, rings).toarray()
    for j, model in enumerate(models):
        cand = np.flatnonzero(nearby[:, j])
        ok = np.zeros(m, dtype=bool)
        ok[cand] = True
        ok &= mesh.fits(model, strict=False)
        cost[ok, j] = mesh.cost(model)[ok]
    best = np.argmin(cost, axis=1)
    return np.where(np.isfinite(cost[np.arange(m), best]), best, -1)


def largest_pieces(mesh: ScanMesh, label: np.ndarray) -> np.ndarray:
    """Keep, for each label, only its connected piece of largest area; the rest becomes -1."""
    comp = mesh.label_components(label)
    out = label.copy()
    has = label >= 0
    comp_area = np.bincount(comp, weights=mesh.areas)
    best = {}
    for c in np.unique(comp[has]):
        lab = label[np.flatnonzero(comp == c)[0]]
        if lab not in best or comp_area[c] > comp_area[best[lab]]:
            best[lab] = c
    keep = np.zeros(len(comp_area), dtype=bool)
    keep[list(best.values())] = True
    out[has & ~keep[comp]] = -1
    return out


def settle_leftovers(mesh: ScanMesh, label: np.ndarray, models: list[Primitive], min_area: float) -> tuple[np.ndarray, list[np.ndarray]]:
    """Absorb small or crease leftovers into their neighbours; return the freeform leftovers' faces."""
    label = label.copy()
    comp = mesh.label_components(label < 0)
    free = np.flatnonzero(label < 0)
    freeform = []
    if len(free) == 0:
        return label, freeform
    A = mesh.adjacency
    order = np.argsort(comp[free], kind="stable")  # the leftovers by piece, each piece's faces ascending
    starts = np.flatnonzero(np.diff(comp[free][order], prepend=-1))
    for faces in np.split(free[order], starts[1:]):
        neigh = np.unique(label[A[faces].indices])
        neigh = neigh[neigh >= 0]
        if len(neigh) == 0:
            freeform.append(faces)
            continue
        dist = np.stack([mesh.distance(models[j], faces) for j in neigh], axis=1)
        explained = (dist.min(axis=1) < 2.0 * DISTANCE_SIGMAS * mesh.noise).mean() > 0.9
        if mesh.areas[faces].sum() < min_area or explained:
            label[faces] = neigh[np.argmin(dist, axis=1)]
        else:
            freeform.append(faces)
    return label, freeform
