"""Blend bands: which curved regions are pieces of fillet bands, and where a band's borders lie.

A band piece bends noticeably, meets its neighbours tangentially and has its largest curvature running
across its borders (band_pieces). A band's borders with its faces are then placed by averaged costs
and straightened station by station (refine_band_borders).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.spatial import cKDTree

from surfcheck.segmentation.fillets import stations_along
from surfcheck.geometry.primitives import Primitive
from surfcheck.segmentation.regions import ScanMesh, nearby_labels

BAND_ACROSS = 0.5  # band piece: median |border tangent . steepest direction| under this
TANGENT_DEG = 12.0  # band piece: median angle between the normals across its borders under this
BORDER_STEPS = 4  # face-ring averaging steps of the cost when a band's borders are placed
BORDER_MADS = 6.0  # a face keeps its border faces while their averaged cost stays within 6 MADs
STRAIGHTEN_WINDOW = 7  # stations in the running median of a border's thresholds (7 x 2 scales long)
STRAIGHTEN_REACH = 3.0  # scales either side of a band border that are relabelled when it is straightened
DEPARTURE_REACH = 6.0  # scales either side of a border whose points fix where a blend leaves its face
KNOT_F = 3.84  # chi-squared(1) 0.95 quantile: knots whose residuals the data cannot tell apart
DEPARTURE_LENGTH = 7.0  # scales along the border either side of a station, for the same fit

def band_pieces(mesh: ScanMesh, label: np.ndarray, models: list[Primitive | None]) -> np.ndarray:
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
    ramps = np.zeros(len(models), dtype=bool)
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
        ramps[j] = across < BAND_ACROSS and smooth and not curved
    return _with_ramps(pieces, ramps, label[fa], label[fb])


def _with_ramps(pieces: np.ndarray, ramps: np.ndarray, la: np.ndarray, lb: np.ndarray) -> np.ndarray:
    """Add to the band pieces every ramp joined to one through a chain of ramps.

    A ramp is a curved region that bends across its borders and meets its neighbours tangentially
    like a band piece but bends too little on its own (median |k| sqrt(area) under 1): the curvature
    ramp of a G2 or G3 blend (a clothoid or smooth-step spiral, whose curvature grows from zero), fitted
    by a cylinder of a larger radius than the blend's arc. Next to a band it is part of that band; on
    its own (a gently curved face) it stays a face.
    """
    pieces = pieces.copy()
    while True:
        joined = np.zeros_like(pieces)
        joined[la[pieces[lb]]] = True
        joined[lb[pieces[la]]] = True
        grown = ramps & joined & ~pieces
        if not grown.any():
            return pieces
        pieces |= grown


def _jet_steepest(mesh: ScanMesh) -> np.ndarray:
    """(m,3) per face, the jets' principal direction of largest |curvature| (sign-aligned average)."""
    shape = mesh.shape
    d = np.where((np.abs(shape.k1) >= np.abs(shape.k2))[:, None], shape.d1, shape.d2)[mesh.F]
    d = d * np.sign(np.einsum("fki,fi->fk", d, d[:, 0]))[..., None]
    d = d.sum(axis=1)
    return d / np.maximum(np.linalg.norm(d, axis=1, keepdims=True), 1e-300)


def _border_direction(mesh: ScanMesh, fa: np.ndarray, fb: np.ndarray, label: np.ndarray, k: int = 12) -> np.ndarray:
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


def _smoothed(mesh: ScanMesh, values: np.ndarray, inside: np.ndarray, steps: int) -> np.ndarray:
    """``values`` averaged over face neighbourhoods ``steps`` times, within the faces ``inside``."""
    keep = sp.diags(inside.astype(np.float64))
    step = keep @ (mesh.adjacency + sp.identity(len(values), format="csr")) @ keep
    weight = np.maximum(np.asarray(step.sum(axis=1)).ravel(), 1.0)
    out = np.where(inside, values, 0.0)
    for _ in range(steps):
        out = (step @ out) / weight
    return out


def refine_band_borders(mesh: ScanMesh, groups_faces: list) -> list:
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
        near_band = np.asarray(nearby_labels(mesh, (label == b).astype(np.int64) - 1, 1, 3 * BORDER_STEPS)[:, 0].todense()).ravel()
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
            label = _straightened_border(mesh, label, b, n, groups_faces[n][2] if band_model is None else None)
    label = _absorbed_fragments(mesh, label)
    out = []
    for j, (kind, _, model) in enumerate(groups_faces):
        faces = np.flatnonzero(label == j)
        if len(faces):
            out.append((kind, faces, model))
    return out


def _straightened_border(mesh: ScanMesh, label: np.ndarray, band: int, side: int,
                         side_model: Primitive | None = None) -> np.ndarray:
    """Straighten the border between ``band`` and ``side`` station by station.

    Stations every two scales along the border each get a reference point (the mean of their border
    vertices) and a direction across the border in the surface; faces of either group within
    STRAIGHTEN_REACH scales get an across coordinate s from their station. At each station the
    threshold on s that disagrees with the fewest current labels is taken (a one-dimensional
    classification), the thresholds get a running median of STRAIGHTEN_WINDOW stations along the border
    and are moved onto the nearest vertex's coordinate (so that on a structured triangulation the
    border follows a row of edges instead of zigzagging through it), and the faces are relabelled by
    them: the border keeps its place but loses the staircase that noise leaves in per-face decisions.
    Given the face's ``side_model`` (a freeform band: a G2 or G3 blend, whose current border sits
    inside the blend where its rise leaves the noise), the border is moved instead to where the band
    departs from the face (_departure_crossings) and faces are cut by the nearest station's crossing.
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
    zone = np.unique(mesh.F[cand])
    dist, j = cKDTree(P).query(mesh.centroids[cand], distance_upper_bound=STRAIGHTEN_REACH * mesh.scale)
    near = np.isfinite(dist)
    cand, j = cand[near], j[near]
    stations = stations_along(P, 2.0 * mesh.scale)
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
    flip = np.where(vote < 0, -1.0, 1.0)  # so that s > 0 on the band's side at every station
    s *= flip[station_of]
    across *= flip[:, None]
    threshold = np.zeros(len(stations))
    for k in range(len(stations)):
        mine = station_of == k
        order = np.argsort(s[mine])
        ys, ss = in_band[cand[mine]][order], s[mine][order]
        # wrong labels if the cut is before position i: band faces below plus side faces above
        wrong = np.concatenate([[0], np.cumsum(ys)]) + np.concatenate([np.cumsum((~ys)[::-1])[::-1], [0]])
        i = int(np.argmin(wrong))
        threshold[k] = 0.0 if not len(ss) else (ss[i - 1] + ss[i]) / 2 if 0 < i < len(ss) else ss[min(i, len(ss) - 1)]
    half = STRAIGHTEN_WINDOW // 2
    window = np.lib.stride_tricks.sliding_window_view(np.pad(np.arange(len(stations)), half, mode="edge"), 2 * half + 1)
    out = label.copy()
    if side_model is None:
        threshold = _on_vertices(mesh, cand, station_of, centre, across, np.median(threshold[window], axis=1))
        out[cand] = np.where(s < threshold[station_of], side, band)
        return out
    frames = (centre + threshold[:, None] * across, tangent, across)
    half_width = 0.5 * mesh.areas[in_band].sum() / (2.0 * mesh.scale * len(stations))
    crossing, across = _departure_crossings(mesh, zone, side_model, centre, frames, window, half_width)
    nearest = cKDTree(crossing).query(mesh.centroids[cand])[1]
    beyond = np.einsum("ij,ij->i", mesh.centroids[cand] - crossing[nearest], across[nearest])
    out[cand] = np.where(beyond < 0, side, band)
    return out


def _departure_crossings(mesh: ScanMesh, zone: np.ndarray, model: Primitive, centre: np.ndarray, frames,
                         window: np.ndarray, half_width: float) -> tuple[np.ndarray, np.ndarray]:
    """Where the band leaves the face ``model`` at each station, and the direction across there.

    ``frames``: each station's current crossing, tangent and across direction (kept where the fit
    finds no departure). Each station's crossing is then the median of its ``window`` of neighbours'
    crossings measured along its own across direction (a stray one does not move it), moved onto
    the nearest vertex within a scale (so that on a structured triangulation the border follows a
    row of edges).
    """
    crossing, tangent, across = (a.copy() for a in frames)
    for k in range(len(crossing)):
        found = _departure_at(mesh, zone, model, centre[k], tangent[k], across[k], half_width)
        if found is not None:
            crossing[k], across[k] = found
    offset = np.median(np.einsum("kwi,ki->kw", crossing[window] - centre[:, None], across), axis=1)
    crossing = centre + offset[:, None] * across
    near = cKDTree(mesh.V).query_ball_point(crossing, mesh.scale)
    for k in range(len(crossing)):
        at = (mesh.V[np.asarray(near[k], dtype=np.int64)] - crossing[k]) @ across[k]
        crossing[k] += at[np.argmin(np.abs(at))] * across[k] if len(at) else 0.0
    return crossing, across


def _on_vertices(mesh: ScanMesh, cand: np.ndarray, station_of: np.ndarray, centre: np.ndarray,
                 across: np.ndarray, threshold: np.ndarray) -> np.ndarray:
    """Each station's threshold moved onto the nearest vertex's across coordinate, so that the border
    runs along mesh edges there."""
    threshold = threshold.copy()
    for k in range(len(threshold)):
        corners = np.unique(mesh.F[cand[station_of == k]])
        if len(corners):
            at = (mesh.V[corners] - centre[k]) @ across[k]
            threshold[k] = at[np.argmin(np.abs(at - threshold[k]))]
    return threshold


def _departure_at(mesh: ScanMesh, vertices: np.ndarray, model: Primitive, centre: np.ndarray,
                  tangent: np.ndarray, across: np.ndarray,
                  band_reach: float) -> tuple[np.ndarray, np.ndarray] | None:
    """Where the band leaves the face ``model`` at one station: _departure on the ``vertices`` within
    DEPARTURE_REACH scales of ``centre`` on the face's side of the border and ``band_reach`` (half the
    band's width: the part of the band nearer this face) on the band's, and within DEPARTURE_LENGTH
    scales along it, with the across direction turned to the band's steepest rise (the old border may
    run askew). Returns the crossing point and that direction."""
    q = mesh.V[vertices] - centre
    s, t = q @ across, q @ tangent
    reach = min(band_reach, DEPARTURE_REACH * mesh.scale)
    inside = (s > -DEPARTURE_REACH * mesh.scale) & (s < reach) & (np.abs(t) < DEPARTURE_LENGTH * mesh.scale)
    s, t, height = s[inside], t[inside], model.signed_distance(mesh.V[vertices[inside]])
    rising = s > 0
    if rising.sum() < 10:
        return None
    height = height * np.sign(np.sum(height[rising]))
    # the border as the blend's contour lines run: turn s to the direction of steepest rise
    slope = np.linalg.lstsq(np.column_stack([np.ones(rising.sum()), s[rising], t[rising]]), height[rising], rcond=None)[0]
    turn = np.arctan2(slope[2], slope[1])
    knot = _departure(np.cos(turn) * s + np.sin(turn) * t, height, mesh.scale)
    rise = np.cos(turn) * across + np.sin(turn) * tangent
    return None if knot is None else (centre + knot * rise, rise)


def _departure(s: np.ndarray, height: np.ndarray, scale: float) -> float | None:
    """Where a smooth blend leaves a face, from points at across coordinate ``s`` (band side s > 0)
    and height ``height`` above the face's primitive (positive on the band's side).

    A blend that leaves a face with G2 contact (a clothoid: curvature linear in arc length) rises from
    it as c3 w^3 + ..., one with G3 contact (a smooth-step curvature ramp) as c4 w^4 + ..., with
    w = max(s - s0, 0): truncated-power splines with one knot at s0 (de Boor, A Practical Guide to
    Splines). Its first tenths of a millimetre lie within the noise of the face, but the rise beyond
    them fixes s0. Each knot on a grid of scale / 20 is scored by the better of the two rises
    (_rise_rss); the knots whose residuals the data cannot tell from the least (the knot is the join
    point of a segmented regression, Hudson 1966; the interval is the usual F-test one for a single
    parameter at 95 %) form an interval, and its middle is taken: a G3 start rises so slowly that
    the interval reaches well into the blend, so its least-squares knot lies late. None when the
    points do not reach across the border.
    """
    if len(s) < 20 or s.min() > -scale or s.max() < scale:
        return None
    knots = np.arange(s.min() + scale, s.max() - scale, scale / 20.0)
    if not len(knots):
        return None
    rss = np.array([_rise_rss(np.maximum(s - knot, 0.0) / scale, height) for knot in knots])
    best = int(np.argmin(rss))
    # the knots the data cannot tell from the best (F test, one parameter at 95 %), in one run
    inside = rss <= rss[best] * (1.0 + KNOT_F / max(len(s) - 5, 1))
    first, last = best, best
    while first > 0 and inside[first - 1]:
        first -= 1
    while last < len(knots) - 1 and inside[last + 1]:
        last += 1
    return float(0.5 * (knots[first] + knots[last]))


def _rise_rss(w: np.ndarray, height: np.ndarray) -> float:
    """Residual sum of squares of the better of the two rises over the face's level c0: height ~
    c0 + w^3 (c3 + c4 w + c5 w^2) (G2 start) and c0 + w^4 (c4 + c5 w + c6 w^2) (G3 start), each with
    its leading coefficient held non-negative (a blend does not first bend back towards the face it
    leaves; without this a G3 start is taken for a G2 start an edge or two earlier). The coefficients
    are linear least squares; when the leading one comes out negative the constrained optimum has it
    at zero."""
    best = np.inf
    for first in (3, 4):
        X = np.column_stack([np.ones_like(w), w ** first, w ** (first + 1), w ** (first + 2)])
        coef = np.linalg.lstsq(X, height, rcond=None)[0]
        if coef[1] < 0:  # the optimum with the leading coefficient held non-negative lies on 0
            X = X[:, [0, 2, 3]]
            coef = np.linalg.lstsq(X, height, rcond=None)[0]
        best = min(best, float(np.sum((height - X @ coef) ** 2)))
    return best


def _absorbed_fragments(mesh: ScanMesh, label: np.ndarray, rounds: int = 3) -> np.ndarray:
    """Give every piece of a group other than its largest to the group it shares most edges with
    (straight cuts through a triangulation leave single triangles joined to their group by a corner)."""
    label = label.copy()
    A = mesh.adjacency.tocoo()
    for _ in range(rounds):
        piece = mesh.label_components(label)
        area = np.bincount(piece, weights=mesh.areas)
        piece_label = np.empty(len(area), dtype=label.dtype)
        piece_label[piece] = label
        # per group its piece of largest area (the lowest-numbered of equal ones): the last in this order
        order = np.lexsort((-np.arange(len(area)), area, piece_label))
        last = np.append(piece_label[order][1:] != piece_label[order][:-1], True)
        main = np.zeros(len(area), dtype=bool)
        main[order[last]] = True
        stray = ~main[piece]
        if not stray.any():
            break
        # a triangle left out of every group (label -1) gives no vote
        cross = stray[A.row] & (label[A.row] != label[A.col]) & (label[A.col] >= 0)
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
