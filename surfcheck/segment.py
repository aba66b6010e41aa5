"""Automatic segmentation of an unlabelled (scanned) mesh into smooth faces and fillet bands.

Method (see docs/segmentation.md):
1. Local shape: degree-2 jets over a metric ball give smoothed normals, principal curvatures and a fit
   residual per vertex; the median residual is the noise level, the jets' least-squares covariance the
   normal's noise. Every threshold below is a multiple of these two.
2. Region growing from seeds in the flattest places (lowest curvature first): a primitive (plane,
   cylinder, sphere, cone; Lukacs, Martin and Marshall 1998) fitted around the seed is grown over the
   connected faces that lie within 3 noise levels of it and whose normals agree with it, refitted and
   grown again until the region stops changing (region growing with a global model, so it cannot creep
   along a tangent blend; Besl and Jain 1988, "Segmentation through variable-order surface fitting").
3. Competition: each face goes to the nearby primitive that explains it best (distance and normal),
   which puts the boundary between two tangent primitives where they touch (a label-cost refinement in
   the spirit of Isack and Boykov 2012, "Energy-based geometric multi-model fitting").
4. Faces no primitive explains form leftover regions. Thin leftovers along creases and small specks go
   to the neighbour that is nearest in distance; the rest are freeform.
5. Bands: a curved region whose largest curvature runs across its borders with other regions (the
   borders follow the direction of least curvature) is a piece of a blend band. Connected band pieces
   touching two or more faces form one fillet group, measured by cross-section circle fits
   (surfcheck.fillets).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, connected_components
from scipy.spatial import cKDTree

from surfcheck.errors import InputError
from surfcheck.fillets import FilletRadius, _stations, measure_fillet
from surfcheck.differential import Curvature, noise_level, principal_curvatures
from surfcheck.part import Part
from surfcheck.primitives import KINDS, Primitive, fit_simplest
from surfcheck.seams import Curve, group_seams

SCALE_EDGES = 2.5  # neighbourhood radius in median edge lengths: about 25 vertices per jet
DISTANCE_SIGMAS = 3.0  # a face fits a primitive if its vertices' rms distance is under 3 noise levels
NORMAL_SIGMAS = 3.5  # ... and its normal is within 3.5 normal-noise levels
LOOSE_NORMAL_DEG = 15.0  # competition: normals may be off this much (jets are biased near creases)
BAND_ACROSS = 0.5  # band piece: median |border tangent . steepest direction| under this
TANGENT_DEG = 12.0  # band piece: median angle between the normals across its borders under this
BORDER_STEPS = 4  # face-ring averaging steps of the cost when a band's borders are placed
BORDER_MADS = 6.0  # a face keeps its border faces while their averaged cost stays within 6 MADs
STRAIGHTEN_REACH = 3.0  # scales either side of a band border that are relabelled when it is straightened
MAX_ROUGHNESS_DEG = 40.0  # median angle between neighbouring triangles above which there is no surface
MAX_SEEDS = 400  # seeds tried before giving up on the rest


@dataclass(frozen=True, eq=False)
class SegmentGroup:
    """One segmented group: a face (kind plane, cylinder, sphere, cone or freeform) or a fillet band."""

    name: str
    kind: str
    faces: np.ndarray
    area: float
    primitive: Primitive | None
    residual: float
    neighbours: tuple[str, ...]
    fillet: FilletRadius | None = None

    def to_json(self) -> dict:
        out = {
            "name": self.name,
            "kind": self.kind,
            "faces": int(len(self.faces)),
            "area": round(self.area, 6),
            "fit_residual": None if not np.isfinite(self.residual) else round(self.residual, 6),
            "neighbours": list(self.neighbours),
        }
        if self.primitive is not None:
            out["primitive"] = self.primitive.kind
            out["parameters"] = self.primitive.parameters()
        if self.fillet is not None:
            out["radius"] = self.fillet.to_json()
        return out


@dataclass(frozen=True, eq=False)
class Segmentation:
    """The labelled part, its groups, and the noise level and scale the thresholds came from."""

    part: Part
    groups: tuple[SegmentGroup, ...]
    noise: float
    normal_noise: float
    scale: float
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def fillets(self) -> tuple[SegmentGroup, ...]:
        return tuple(g for g in self.groups if g.kind == "fillet")

    @property
    def faces(self) -> tuple[SegmentGroup, ...]:
        return tuple(g for g in self.groups if g.kind != "fillet")

    def group(self, name: str) -> SegmentGroup:
        self.part.group_index(name)
        return next(g for g in self.groups if g.name == name)

    def to_json(self) -> dict:
        return {
            "part": self.part.source,
            "units": self.part.units,
            "noise": round(self.noise, 6),
            "normal_noise_deg": round(float(np.degrees(self.normal_noise)), 4),
            "scale": round(self.scale, 6),
            "groups": [g.to_json() for g in self.groups],
            "notes": list(self.notes),
        }


@dataclass(eq=False)
class _Mesh:
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

    def distance(self, model: Primitive) -> np.ndarray:
        """(m,) rms over each face's corners of their distance to the model."""
        d = model.signed_distance(self.V)
        return np.sqrt((d[self.F] ** 2).mean(axis=1))

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

    def cost(self, model: Primitive) -> np.ndarray:
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


def _prepare(part: Part, scale: float | None, noise: float | None) -> _Mesh:
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
    return _Mesh(part.vertices, F, adjacency, centroids, normals, part.face_areas, shape,
                 sigma, normal_noise, rho)


def _reachable(mesh: _Mesh, allowed: np.ndarray, seed: int) -> np.ndarray:
    """Faces reachable from ``seed`` through edge-adjacent faces that are all ``allowed``."""
    keep = sp.diags(allowed.astype(np.float64))
    sub = (keep @ mesh.adjacency @ keep).tocsr()
    order = breadth_first_order(sub, seed, directed=False, return_predecessors=False)
    return order


def _fit_faces(mesh: _Mesh, faces: np.ndarray, prefer: str | None = None) -> Primitive:
    return _fit(mesh, np.unique(mesh.F[faces]), prefer)


def _fit(mesh: _Mesh, vertices: np.ndarray, prefer: str | None = None) -> Primitive:
    """The simplest primitive through the vertices; one within 1.2 noise levels is taken at once, and
    the ``prefer``red kind (the region's current one) is tried first."""
    kinds = KINDS if prefer is None else (prefer, *(k for k in KINDS if k != prefer))
    return fit_simplest(mesh.V[vertices], mesh.shape.normals[vertices], 0.25 * mesh.noise, kinds,
                        good_enough=1.2 * mesh.noise)


def _grow(mesh: _Mesh, free: np.ndarray, seed: int, model: Primitive) -> tuple[np.ndarray, Primitive] | None:
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
            model = _fit_faces(mesh, region, prefer=model.kind)
        if kept is None:
            return None
        model = kept
    return region, kept


def _seed_model(mesh: _Mesh, ball: np.ndarray) -> Primitive | None:
    """The primitive of a seed's ball of free faces, if one fits it within 1.5 noise levels."""
    if len(ball) < 10:
        return None
    try:
        model = _fit_faces(mesh, ball)
    except InputError:
        return None
    return model if model.rms <= 1.5 * mesh.noise else None


def _grow_regions(mesh: _Mesh, min_faces: int, rho: float) -> tuple[np.ndarray, list[Primitive]]:
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


def _merge_regions(mesh: _Mesh, label: np.ndarray, models: list[Primitive]) -> tuple[np.ndarray, list[Primitive]]:
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
            model = _fit_faces(mesh, union, prefer=models[i].kind)
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


def _adjacent_pairs(mesh: _Mesh, label: np.ndarray, rings: int = 4) -> list[tuple[int, int]]:
    """Pairs (i < j) of labels >= 0 that come within ``rings`` face rings of each other."""
    n_labels = int(label.max()) + 1 if (label >= 0).any() else 0
    present = _nearby_labels(mesh, label, n_labels, rings).astype(np.int32)
    together = sp.triu(present.T @ present, k=1).tocoo()
    return sorted(zip(together.row.tolist(), together.col.tolist()))


def _nearby_labels(mesh: _Mesh, label: np.ndarray, n_labels: int, rings: int) -> sp.csr_matrix:
    """(m, n_labels) boolean: which labels occur within ``rings`` face rings of each face."""
    m = len(label)
    has = label >= 0
    present = sp.csr_matrix((np.ones(int(has.sum())), (np.flatnonzero(has), label[has])), shape=(m, n_labels))
    step = mesh.adjacency + sp.identity(m, format="csr")
    for _ in range(rings):
        present = step @ present
    return present.astype(bool).tocsr()


def _compete(mesh: _Mesh, label: np.ndarray, models: list[Primitive], rings: int = 3) -> np.ndarray:
    """Give each face to the nearby model that fits it at lowest cost; -1 where none fits."""
    m, r = len(label), len(models)
    cost = np.full((m, r), np.inf)
    nearby = _nearby_labels(mesh, label, r, rings).toarray()
    for j, model in enumerate(models):
        cand = np.flatnonzero(nearby[:, j])
        ok = np.zeros(m, dtype=bool)
        ok[cand] = True
        ok &= mesh.fits(model, strict=False)
        cost[ok, j] = mesh.cost(model)[ok]
    best = np.argmin(cost, axis=1)
    return np.where(np.isfinite(cost[np.arange(m), best]), best, -1)


def _largest_pieces(mesh: _Mesh, label: np.ndarray) -> np.ndarray:
    """Keep, for each label, only its connected piece of largest area; the rest becomes -1."""
    A = mesh.adjacency.tocoo()
    same = (label[A.row] == label[A.col]) & (label[A.row] >= 0)
    g = sp.csr_matrix((np.ones(int(same.sum())), (A.row[same], A.col[same])), shape=A.shape)
    _, comp = connected_components(g, directed=False)
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


def _leftover_components(mesh: _Mesh, label: np.ndarray) -> tuple[int, np.ndarray]:
    A = mesh.adjacency.tocoo()
    free = label < 0
    both = free[A.row] & free[A.col]
    g = sp.csr_matrix((np.ones(int(both.sum())), (A.row[both], A.col[both])), shape=A.shape)
    return connected_components(g, directed=False)


def _settle_leftovers(mesh: _Mesh, label: np.ndarray, models: list[Primitive], min_area: float) -> tuple[np.ndarray, list[np.ndarray]]:
    """Absorb small or crease leftovers into their neighbours; return the freeform leftovers' faces."""
    label = label.copy()
    _, comp = _leftover_components(mesh, label)
    free = np.flatnonzero(label < 0)
    freeform = []
    if len(free) == 0:
        return label, freeform
    A = mesh.adjacency
    for c in np.unique(comp[free]):
        faces = free[comp[free] == c]
        neigh = np.unique(label[A[faces].indices])
        neigh = neigh[neigh >= 0]
        if len(neigh) == 0:
            freeform.append(faces)
            continue
        dist = np.stack([mesh.distance(models[j])[faces] for j in neigh], axis=1)
        explained = (dist.min(axis=1) < 2.0 * DISTANCE_SIGMAS * mesh.noise).mean() > 0.9
        if mesh.areas[faces].sum() < min_area or explained:
            label[faces] = neigh[np.argmin(dist, axis=1)]
        else:
            freeform.append(faces)
    return label, freeform


def _band_pieces(mesh: _Mesh, label: np.ndarray, models: list[Primitive | None]) -> np.ndarray:
    """(n_labels,) True for the curved regions that are pieces of blend bands.

    A band piece bends noticeably, meets every neighbour tangentially (median angle between the two
    sides' normals along the border under TANGENT_DEG) and its largest curvature runs across its borders
    (median |border tangent . steepest direction| under BAND_ACROSS): a fillet's borders follow its
    direction of least curvature, a cylinder boss's borders go round it. The steepest direction is the
    primitive's where it fits within 1.2 noise levels (jets beside a border see the neighbour's
    curvature), the jets' elsewhere.
    """
    A = sp.triu(mesh.adjacency).tocoo()
    border = label[A.row] != label[A.col]
    fa, fb = A.row[border], A.col[border]
    tangent = _border_direction(mesh, fa, fb, label)
    side_normal = mesh.normals.copy()
    steepest = _jet_steepest(mesh)
    for j, model in enumerate(models):
        if model is None:
            continue
        faces = np.flatnonzero(label == j)
        side_normal[faces] = model.normals(mesh.centroids[faces])
        own = model.steepest_directions(mesh.centroids[faces]) if model.rms <= 1.2 * mesh.noise else None
        if own is not None:
            steepest[faces] = own
    bend = np.arccos(np.clip(np.abs(np.einsum("ij,ij->i", side_normal[fa], side_normal[fb])), 0, 1))
    k = np.maximum(np.abs(mesh.shape.k1), np.abs(mesh.shape.k2))[mesh.F].mean(axis=1)
    pieces = np.zeros(len(models), dtype=bool)
    for j, model in enumerate(models):
        if model is not None and model.kind == "plane":
            continue
        on_a, on_b = label[fa] == j, label[fb] == j
        side = np.concatenate([fa[on_a], fb[on_b]])
        if len(side) < 3:
            continue
        tang = np.concatenate([tangent[on_a], tangent[on_b]])
        across = np.median(np.abs(np.einsum("ij,ij->i", steepest[side], tang)))
        smooth = np.median(np.concatenate([bend[on_a], bend[on_b]])) < np.radians(TANGENT_DEG)
        faces = label == j
        curved = np.median(k[faces]) * np.sqrt(mesh.areas[faces].sum()) > 1.0
        pieces[j] = across < BAND_ACROSS and smooth and curved
    return pieces


def _jet_steepest(mesh: _Mesh) -> np.ndarray:
    """(m,3) per face, the jets' principal direction of largest |curvature| (sign-aligned average)."""
    shape = mesh.shape
    d = np.where((np.abs(shape.k1) >= np.abs(shape.k2))[:, None], shape.d1, shape.d2)[mesh.F]
    d = d * np.sign(np.einsum("fki,fi->fk", d, d[:, 0]))[..., None]
    d = d.sum(axis=1)
    return d / np.maximum(np.linalg.norm(d, axis=1, keepdims=True), 1e-300)


def _border_direction(mesh: _Mesh, fa: np.ndarray, fb: np.ndarray, label: np.ndarray, k: int = 12) -> np.ndarray:
    """Unit direction of the border between two regions at each border edge (faces fa[i] | fb[i]):
    the principal axis of the k nearest border-edge midpoints of the same pair of regions, so that a
    ragged staircase of mesh edges still gives the direction the border runs in."""
    Fa, Fb = mesh.F[fa], mesh.F[fb]
    common = (Fa[:, :, None] == Fb[:, None, :]).any(axis=2)
    first = np.argmax(common, axis=1)
    second = 2 - np.argmax(common[:, ::-1], axis=1)
    rows = np.arange(len(fa))
    mid = 0.5 * (mesh.V[Fa[rows, first]] + mesh.V[Fa[rows, second]])
    pair = np.sort(np.stack([label[fa], label[fb]], 1), axis=1)
    _, group = np.unique(pair, axis=0, return_inverse=True)
    direction = np.zeros_like(mid)
    for g in np.unique(group):
        idx = np.flatnonzero(group.ravel() == g)
        direction[idx] = _principal_directions(mid[idx], k)
    return direction


def segment_part(
    part: Part,
    *,
    scale: float | None = None,
    noise: float | None = None,
    nominal_radius: float | None = None,
    min_face_area: float | None = None,
) -> Segmentation:
    """Split an unlabelled mesh into smooth faces and fillet bands (see the module docstring).

    ``scale``: the neighbourhood radius of the local fits (default 2.5 median edge lengths);
    ``noise``: the noise level in part units (default: estimated from the fits); ``nominal_radius``:
    the fillet radius the bands' measured radii are compared with; ``min_face_area``: smaller regions
    are merged into their neighbours (default: a disc of twice the scale).
    """
    where = part.source or "part"
    mesh = _prepare(part, scale, noise)
    rho = SCALE_EDGES * float(np.median(part.edge_lengths)) if scale is None else float(scale)
    min_area = np.pi * (2 * rho) ** 2 if min_face_area is None else float(min_face_area)
    min_faces = max(10, int(min_area / max(np.median(mesh.areas), 1e-300) / 4))
    label, models = _merge_regions(mesh, *_grow_regions(mesh, min_faces, rho))
    if not models:
        raise InputError(
            f"{where}: no smooth face found (estimated noise {mesh.noise:.3g} {part.units} against a "
            f"median edge of {np.median(part.edge_lengths):.3g}); the mesh looks like noise, not a part"
        )
    for _ in range(2):
        label = _largest_pieces(mesh, _compete(mesh, label, models))
        models = [_fit_faces(mesh, np.flatnonzero(label == j)) if (label == j).sum() >= 3 else models[j]
                  for j in range(len(models))]
    label, freeform = _settle_leftovers(mesh, label, models, min_area)
    return _assemble(part, mesh, label, models, freeform, nominal_radius, rho)


def _assemble(part, mesh, label, models, freeform, nominal_radius, rho) -> Segmentation:
    """Classify regions into faces and bands, merge band pieces, name and measure the groups."""
    used = [j for j in range(len(models)) if (label == j).any()]
    remap = -np.ones(len(models) + 1, dtype=np.int64)
    remap[used] = np.arange(len(used))
    label = remap[label]
    regions_model: list[Primitive | None] = [models[j] for j in used]
    for faces in freeform:
        label[faces] = len(regions_model)
        regions_model.append(None)
    kinds = [m.kind if m is not None else "freeform" for m in regions_model]
    pieces = _band_pieces(mesh, label, regions_model)
    A = mesh.adjacency.tocoo()
    is_piece = pieces[label]
    link = is_piece[A.row] & is_piece[A.col]
    g = sp.csr_matrix((np.ones(int(link.sum())), (A.row[link], A.col[link])), shape=A.shape)
    _, comp = connected_components(g, directed=False)
    groups_faces: list[tuple[str, np.ndarray, Primitive | None]] = []
    consumed = np.zeros(len(kinds), dtype=bool)
    for c in np.unique(comp[is_piece]):
        faces = np.flatnonzero((comp == c) & is_piece)
        outside = np.unique(label[mesh.adjacency[faces].indices])
        faces_around = [j for j in outside if not pieces[j]]
        if len(faces_around) >= 2:
            members = np.unique(label[faces])
            consumed[members] = True
            model = regions_model[members[0]] if len(members) == 1 else None
            groups_faces.append(("fillet", faces, model))
    for j, kind in enumerate(kinds):
        if not consumed[j]:
            groups_faces.append((kind, np.flatnonzero(label == j), regions_model[j]))
    return _named(part, mesh, _refine_band_borders(mesh, groups_faces), nominal_radius, rho)


def _smoothed(mesh: _Mesh, values: np.ndarray, inside: np.ndarray, steps: int) -> np.ndarray:
    """``values`` averaged over face neighbourhoods ``steps`` times, within the faces ``inside``."""
    keep = sp.diags(inside.astype(np.float64))
    step = keep @ (mesh.adjacency + sp.identity(len(values), format="csr")) @ keep
    weight = np.maximum(np.asarray(step.sum(axis=1)).ravel(), 1.0)
    out = np.where(inside, values, 0.0)
    for _ in range(steps):
        out = (step @ out) / weight
    return out


def _refine_band_borders(mesh: _Mesh, groups_faces: list) -> list:
    """Smooth the border between each fillet band and each neighbouring face.

    Costs are averaged over a few face rings, which makes a per-face decision several times less
    noisy. A band with a primitive of its own (a circular fillet) meets the face where the two averaged
    costs (squared distance and normal residuals in noise units) are equal: where the two surfaces
    touch. A freeform band (a G2 or G3 blend, whose deviation from the face grows from zero) meets it
    where the face's averaged squared distance leaves its own typical level away from the band (median
    plus BORDER_MADS median absolute deviations); distances are used alone there because jets are bent
    within their radius of a change in curvature. Only faces within 3 BORDER_STEPS rings of the band move.
    """
    label = np.full(len(mesh.F), -1, dtype=np.int64)
    for j, (_, faces, _) in enumerate(groups_faces):
        label[faces] = j
    for b, (kind, band_faces, band_model) in enumerate(groups_faces):
        if kind != "fillet":
            continue
        around = np.unique(label[mesh.adjacency[label == b].indices])
        sides = [n for n in around if n != b and groups_faces[n][2] is not None and groups_faces[n][0] != "fillet"]
        if not sides:
            continue
        near_band = np.asarray(_nearby_labels(mesh, (label == b).astype(np.int64) - 1, 1, 3 * BORDER_STEPS)[:, 0].todense()).ravel()
        zone = np.isin(label, [b, *sides])
        movable = zone & near_band
        band_cost = _smoothed(mesh, mesh.cost(band_model), zone, BORDER_STEPS) if band_model is not None else None
        best_cost = np.full(len(label), np.inf)
        best_side = np.full(len(label), b)
        for n in sides:
            model = groups_faces[n][2]
            if band_cost is not None:
                cost = _smoothed(mesh, mesh.cost(model), zone, BORDER_STEPS)
                takes = movable & (cost < band_cost) & (cost < best_cost)
            else:
                cost = _smoothed(mesh, (mesh.distance(model) / mesh.noise) ** 2, zone, BORDER_STEPS)
                own = cost[(label == n) & ~near_band]
                own = cost[label == n] if len(own) < 10 else own
                level = np.median(own) + BORDER_MADS * np.median(np.abs(own - np.median(own)))
                takes = movable & (cost < level) & (cost < best_cost)
            best_cost[takes], best_side[takes] = cost[takes], n
        label[movable] = best_side[movable]
        for n in sides:
            label = _straightened_border(mesh, label, b, n)
    label = _absorbed_fragments(mesh, label)
    out = []
    for j, (kind, _, model) in enumerate(groups_faces):
        faces = np.flatnonzero(label == j)
        if len(faces):
            out.append((kind, faces, model))
    return out


def _straightened_border(mesh: _Mesh, label: np.ndarray, band: int, side: int) -> np.ndarray:
    """Straighten the border between ``band`` and ``side`` station by station.

    Stations every two scales along the border each get a reference point (the mean of their border
    vertices) and a direction across the border in the surface; faces of either group within
    STRAIGHTEN_REACH scales get an across coordinate s from their station. At each station the
    threshold on s that disagrees with the fewest current labels is taken (a one-dimensional
    classification), the thresholds are median-filtered along the border, and the faces are relabelled
    by them: the border keeps its place but loses the staircase that noise leaves in per-face decisions.
    """
    in_band, in_side = label == band, label == side
    on_band = np.zeros(len(mesh.V), dtype=bool)
    on_side = np.zeros(len(mesh.V), dtype=bool)
    on_band[mesh.F[in_band].ravel()] = True
    on_side[mesh.F[in_side].ravel()] = True
    border = np.flatnonzero(on_band & on_side)
    if len(border) < 6:
        return label
    P = mesh.V[border]
    cand = np.flatnonzero(in_band | in_side)
    dist, j = cKDTree(P).query(mesh.centroids[cand], distance_upper_bound=STRAIGHTEN_REACH * mesh.scale)
    near = np.isfinite(dist)
    cand, j = cand[near], j[near]
    stations = _stations(P, 2.0 * mesh.scale)
    station_of = cKDTree(P[stations]).query(P[j])[1]
    # each station's reference: the mean and principal axis of the border points nearest to it
    border_station = cKDTree(P[stations]).query(P)[1]
    centre = np.stack([P[border_station == k].mean(axis=0) for k in range(len(stations))])
    tangent = _principal_directions(P, 3 * max(1, len(P) // max(len(stations), 1)))[stations]
    normal = mesh.shape.normals[border[stations]]
    across = np.cross(tangent, normal)
    across /= np.maximum(np.linalg.norm(across, axis=1, keepdims=True), 1e-300)
    s = np.einsum("ij,ij->i", mesh.centroids[cand] - centre[station_of], across[station_of])
    vote = np.bincount(station_of, weights=np.where(in_band[cand], s, -s), minlength=len(stations))
    s *= np.where(vote[station_of] < 0, -1.0, 1.0)  # s > 0 on the band's side at every station
    threshold = np.zeros(len(stations))
    for k in range(len(stations)):
        mine = station_of == k
        order = np.argsort(s[mine])
        ys, ss = in_band[cand[mine]][order], s[mine][order]
        # wrong labels if the cut is before position i: band faces below plus side faces above
        wrong = np.concatenate([[0], np.cumsum(ys)]) + np.concatenate([np.cumsum((~ys)[::-1])[::-1], [0]])
        i = int(np.argmin(wrong))
        threshold[k] = 0.0 if not len(ss) else (ss[i - 1] + ss[i]) / 2 if 0 < i < len(ss) else ss[min(i, len(ss) - 1)]
    padded = np.concatenate([threshold[:1], threshold, threshold[-1:]])
    threshold = np.median(np.stack([padded[:-2], padded[1:-1], padded[2:]]), axis=0)
    out = label.copy()
    out[cand] = np.where(s < threshold[station_of], side, band)
    return out


def _absorbed_fragments(mesh: _Mesh, label: np.ndarray, rounds: int = 3) -> np.ndarray:
    """Give every piece of a group other than its largest to the group it shares most edges with
    (straight cuts through a triangulation leave single triangles joined to their group by a corner)."""
    label = label.copy()
    A = mesh.adjacency.tocoo()
    for _ in range(rounds):
        same = label[A.row] == label[A.col]
        g = sp.csr_matrix((np.ones(int(same.sum())), (A.row[same], A.col[same])), shape=A.shape)
        _, piece = connected_components(g, directed=False)
        area = np.bincount(piece, weights=mesh.areas)
        main = np.zeros(len(area), dtype=bool)
        for lab in np.unique(label):
            pieces = np.unique(piece[label == lab])
            main[pieces[np.argmax(area[pieces])]] = True
        stray = ~main[piece]
        if not stray.any():
            break
        cross = stray[A.row] & (label[A.row] != label[A.col])
        votes = sp.csr_matrix((np.ones(int(cross.sum())), (piece[A.row[cross]], label[A.col[cross]])),
                              shape=(len(area), int(label.max()) + 1)).toarray()
        target = np.argmax(votes, axis=1)
        has_vote = votes.max(axis=1) > 0
        move = stray & has_vote[piece]
        label[move] = target[piece[move]]
    return label


def _principal_directions(points: np.ndarray, k: int) -> np.ndarray:
    """Unit principal axis of each point's k nearest neighbours among ``points``."""
    k = min(k, len(points))
    _, near = cKDTree(points).query(points, k=k)
    Q = points[near.reshape(len(points), k)]
    Q = Q - Q.mean(axis=1, keepdims=True)
    return np.linalg.eigh(np.einsum("nki,nkj->nij", Q, Q))[1][:, :, 2]


def _named(part, mesh, groups_faces, nominal_radius, rho) -> Segmentation:
    areas = [float(mesh.areas[f].sum()) for _, f, _ in groups_faces]
    order = np.argsort(-np.asarray(areas), kind="stable")
    counters: dict[str, int] = {}
    names, face_group = [], np.zeros(len(mesh.F), dtype=np.int64)
    for gi, k in enumerate(order):
        kind = groups_faces[k][0]
        counters[kind] = counters.get(kind, 0) + 1
        names.append(f"{kind}-{counters[kind]}")
        face_group[groups_faces[k][1]] = gi
    labelled = part.with_groups(face_group, names)
    A = sp.triu(mesh.adjacency).tocoo()
    cross = face_group[A.row] != face_group[A.col]
    pairs = np.unique(np.sort(np.stack([face_group[A.row[cross]], face_group[A.col[cross]]], 1), axis=1), axis=0)
    groups = []
    for gi, k in enumerate(order):
        kind, faces, model = groups_faces[k]
        neighbours = tuple(names[b if a == gi else a] for a, b in pairs if gi in (a, b))
        if model is not None and kind != "fillet":
            model = _fit_faces(mesh, faces)
        residual = float(np.sqrt(np.mean(model.signed_distance(mesh.V[np.unique(mesh.F[faces])]) ** 2))) if model is not None else float("nan")
        fillet = None
        if kind == "fillet":
            fillet = measure_fillet(labelled, gi, mesh.shape.normals, rho, nominal_radius)
            residual = fillet.section_rms
        groups.append(SegmentGroup(names[gi], kind, faces, areas[k], model, residual, neighbours, fillet))
    notes = []
    if not any(g.kind == "fillet" for g in groups):
        notes.append("no fillet bands found" + ("; no seams found: the part is one face" if len(groups) == 1 else ""))
    return Segmentation(labelled, tuple(groups), mesh.noise, mesh.normal_noise, rho, tuple(notes))


def seams_of_segmentation(seg: Segmentation) -> list[Curve]:
    """The seams of every fillet band with its faces, as Curves of kind "seam" with groups
    (face, fillet); InputError "no seams found" when the part has no fillet band."""
    fillets = {g.name for g in seg.fillets}
    if not fillets:
        raise InputError(
            f"{seg.part.source or 'part'}: no seams found: the segmentation has {len(seg.groups)} face(s) "
            "and no fillet band (" + ", ".join(g.name for g in seg.groups) + ")"
        )
    found = []
    for curve in group_seams(seg.part):
        a, b = curve.groups
        if (a in fillets) == (b in fillets):
            continue
        found.append(curve if b in fillets else replace(curve, groups=(b, a)))
    return found
