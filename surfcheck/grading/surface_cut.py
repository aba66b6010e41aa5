"""A side's section read from its triangles: the cut of the side's surface by the section plane.

A CAD mesher leaves a plane without interior vertices and a fillet as one strip of long triangles, so
a strip of a side's vertices holds a handful of distinct section points, too few for a one-sided fit.
The triangles themselves describe the surface: the section plane (through the station, normal to the
seam tangent) cuts each triangle it crosses in a segment whose ends lie on two of its edges, and the
segments chain, through the edges they share, into the section polyline of the side (the classical
plane-mesh intersection, e.g. Botsch et al. 2010, Polygon Mesh Processing, ch. 1). Its component
through the seam is sampled evenly. On a planar triangle the polyline is exact; on a curved surface a
segment is a chord, off the surface by at most its sagitta c^2 kappa / 8 (chord c, curvature kappa),
the chordal deflection a CAD mesher bounds.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from surfcheck.part import Part

SAMPLES_PER_SEGMENT = 8  # even samples along a typical cut segment (common practice, no published source)
MIN_SAMPLES = 64  # samples of one side's cut at least (a plane is one long segment)
MAX_SAMPLES = 2000  # ... and at most
END_FLOOR_INTERVALS = 5  # the spline's first intervals whose rates give the curvature's second derivative
SPLINE_POINTS = 4  # distinct vertices a side needs to be interpolated rather than cut
SLIVER = 1e-6  # a cut segment this much shorter than the longest has no direction (rounding)
ZIGZAG_TURN = 0.02  # radians; a turn of the node polygon smaller than this has no direction
CUT_WINDOW_SEGMENTS = 2.0  # fit scale of a cut side, in mean segments: its windows (3 scales) average
# over the chords' kinks
SPLINE_WINDOW_NODES = 0.5  # fit scale of an interpolated side, in node spacings (the spline is smooth)
# (both common practice, no published source: chosen on kernel tessellations of rolling-ball fillets)


@dataclass(frozen=True)
class SurfaceCut:
    """Samples of a side's section curve (relative to the seam point), the nearest vertex of each
    sample, the scale of the side's one-sided fit (its smallest window is three of them), the
    floor of its points' standard deviation about the curve (sidefit.fit_side's ``floor``) and the
    chordal deflection of the polygon it was read from.

    Samples interpolated between mesh points show no residual of their own, and many of them come
    from one mesh point's worth of information, so the floor is that of the mesh points times the
    square root of the samples per mesh point."""

    points: np.ndarray  # (n, 3)
    vertices: np.ndarray  # (n,) int
    scale: float
    floor: float
    deflection: float  # the largest sagitta of the polygon the side was read from (chordal deflection)
    step: float  # the sampling step across the seam it was read from: the mean cut segment or node spacing
    end_floor: tuple[float, float, float, float] = (0.0, 0.0, 0.0, 0.0)  # least standard uncertainty of
    # offset, heading, curvature and rate at the seam (an interpolated side's unobserved first interval)


def cut_side(part: Part, faces: np.ndarray, origin: np.ndarray, plane_normal: np.ndarray,
             reach: float) -> SurfaceCut | None:
    """The cut of the triangles ``faces`` by the plane through ``origin`` normal to ``plane_normal``:
    its connected polyline through the point nearest ``origin``, within ``reach`` of it, sampled
    about SAMPLES_PER_SEGMENT times per typical segment. None where the plane misses the faces."""
    V, F = part.vertices, part.faces[faces]
    d = (V[F] - origin) @ plane_normal  # (m, 3) signed distances of the corners
    above = d >= 0.0  # a corner on the plane counts as above: each crossing is on one edge
    crossed = above.any(axis=1) & ~above.all(axis=1)
    if not crossed.any():
        return None
    F, d, above = F[crossed], d[crossed], above[crossed]
    edge_ids = part.half_edge_edge.reshape(-1, 3)[faces[crossed]]  # edges (0-1, 1-2, 2-0)
    changes = above != np.roll(above, -1, axis=1)  # exactly two per crossed triangle
    segment_edges = edge_ids[changes].reshape(-1, 2)
    corner = np.nonzero(changes)[1].reshape(-1, 2)
    rows = np.arange(len(F))[:, None]
    start, end = F[rows, corner], F[rows, (corner + 1) % 3]
    t = d[rows, corner] / (d[rows, corner] - d[rows, (corner + 1) % 3])
    ends = V[start] + t[..., None] * (V[end] - V[start])  # (k, 2, 3) segment end points
    nodes, links = np.unique(segment_edges, return_inverse=True)
    links = links.reshape(-1, 2)
    node_point = np.empty((len(nodes), 3))
    node_point[links.ravel()] = ends.reshape(-1, 3)
    graph = sp.coo_matrix((np.ones(len(links)), (links[:, 0], links[:, 1])), shape=(len(nodes),) * 2)
    _, component = connected_components(graph, directed=False)
    seed = int(np.argmin(np.linalg.norm(node_point - origin, axis=1)))
    keep = component[links[:, 0]] == component[seed]
    keep &= (np.linalg.norm(ends - origin, axis=2) <= reach).any(axis=1)
    if not keep.any():
        return None
    ends, F, links = ends[keep], F[keep], links[keep]
    lengths = np.linalg.norm(ends[:, 1] - ends[:, 0], axis=1)
    scale = float(lengths.mean())  # the mean: a plane through a vertex leaves slivers of segments
    total = min(float(lengths.sum()), reach)
    spacing = max(min(scale / SAMPLES_PER_SEGMENT, total / MIN_SAMPLES), total / MAX_SAMPLES, 1e-12)
    counts = np.maximum(np.ceil(lengths / spacing).astype(int), 1)
    owner = np.repeat(np.arange(len(ends)), counts)
    fraction = (np.arange(len(owner)) - np.repeat(np.cumsum(counts) - counts, counts)) / counts[owner]
    points = ends[owner, 0] + fraction[:, None] * (ends[owner, 1] - ends[owner, 0])
    points = np.concatenate([points, ends[:, 1]])
    owner = np.concatenate([owner, np.arange(len(ends))])
    points, first = np.unique(np.round(points, 12), axis=0, return_index=True)
    owner = owner[first]
    inside = np.linalg.norm(points - origin, axis=1) <= reach
    corners = V[F[owner]]  # (n, 3, 3)
    nearest = np.argmin(np.linalg.norm(corners - points[:, None], axis=2), axis=1)
    vertices = F[owner, nearest]
    # a chord's points lie within its sagitta of the surface: a rectangular distribution of that
    # half-width (JCGM 100:2008, 4.3.7), inflated for the samples that share one chord
    sagitta = _largest_sagitta(ends, links)
    floor = sagitta / np.sqrt(3.0) * np.sqrt(SAMPLES_PER_SEGMENT)
    return SurfaceCut(points[inside] - origin, vertices[inside], CUT_WINDOW_SEGMENTS * scale, floor, sagitta, scale)


def _largest_sagitta(ends: np.ndarray, links: np.ndarray) -> float:
    """Largest c^2 kappa / 8 over the segments ``ends`` (k, 2, 3), kappa the turning between two
    segments that share a node (``links``: (k, 2) node of each end) divided by their mean length (the
    discrete curvature of a polygon)."""
    ends, links = _without_slivers(ends, links)
    if len(ends) < 2:
        return 0.0
    lengths = np.linalg.norm(ends[:, 1] - ends[:, 0], axis=1)
    k = len(ends)
    incidence = sp.csr_matrix((np.ones(2 * k), (np.repeat(np.arange(k), 2), links.ravel())))
    pairs = sp.triu(incidence @ incidence.T, k=1).tocoo()  # segments sharing a node
    i, j = pairs.row, pairs.col
    if len(i) == 0:
        return 0.0
    direction = (ends[:, 1] - ends[:, 0]) / np.maximum(lengths, 1e-300)[:, None]
    cos = np.abs(np.einsum("ij,ij->i", direction[i], direction[j]))
    kappa = np.arccos(np.clip(cos, -1.0, 1.0)) / (0.5 * (lengths[i] + lengths[j]))
    return float((np.maximum(lengths[i], lengths[j]) ** 2 * kappa).max() / 8.0)


def _without_slivers(ends: np.ndarray, links: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The segments ``ends`` (k, 2, 3) and their node ``links`` (k, 2) with every sliver (a segment
    shorter than SLIVER of the longest, left where the plane passes through a mesh vertex) collapsed
    into one node: its direction is rounding error, and its neighbours then share that node, so the
    polygon's turn there is read between them."""
    lengths = np.linalg.norm(ends[:, 1] - ends[:, 0], axis=1)
    sliver = lengths <= SLIVER * lengths.max(initial=0.0)
    if not sliver.any():
        return ends, links
    nodes = int(links.max()) + 1
    merged = sp.coo_matrix((np.ones(int(sliver.sum())), (links[sliver, 0], links[sliver, 1])), shape=(nodes, nodes))
    _, node = connected_components(merged, directed=False)
    return ends[~sliver], node[links[~sliver]]


def spline_through(ids: np.ndarray, rel: np.ndarray, resolution: float, axis: np.ndarray) -> SurfaceCut | None:
    """A side given by few distinct vertices (a CAD strip: every row of a long-triangle fillet carried
    into the section lands on the same few points, each on the surface): the interpolating cubic
    spline through its distinct points (to ``resolution``), ordered by distance from the seam point and
    parametrised by chord length (de Boor 1978, A Practical Guide to Splines, ch. IV, not-a-knot ends),
    sampled evenly. ``rel``: (n, 3) positions relative to the seam point in the plane normal to
    ``axis``. None below SPLINE_POINTS distinct points, where the points start farther from the seam
    point than two of their spacings, or where they zigzag (the polygon through them turns to and fro
    more than once by over ZIGZAG_TURN: scattered points, not one curve)."""
    from scipy.interpolate import CubicSpline

    _, first, bin_of = np.unique(np.round(rel / resolution), axis=0, return_index=True, return_inverse=True)
    bin_of = bin_of.reshape(-1)
    scatter = rel - rel[first][bin_of]  # points carried onto one place differ by the carry's error and noise
    order = first[np.argsort(np.linalg.norm(rel[first], axis=1))]
    nodes = rel[order]
    gaps = np.linalg.norm(np.diff(nodes, axis=0), axis=1)
    if np.linalg.norm(nodes[0]) > resolution:  # the seam point itself is a node of the section
        if len(gaps) == 0 or np.linalg.norm(nodes[0]) > 2.0 * np.median(gaps):
            return None
        nodes = np.concatenate([np.zeros((1, 3)), nodes])
    if len(nodes) < SPLINE_POINTS or _zigzags(nodes, axis):
        return None
    chord = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(nodes, axis=0), axis=1))])
    spline = CubicSpline(chord, nodes, axis=0, bc_type="not-a-knot")
    samples = min(max(MIN_SAMPLES, SAMPLES_PER_SEGMENT * (len(nodes) - 1)), MAX_SAMPLES)
    points = spline(np.linspace(0.0, chord[-1], samples))
    nearest = np.argmin(np.linalg.norm(points[:, None] - rel[None, order], axis=2), axis=1)
    spread = float(np.sqrt((scatter**2).sum(axis=1).mean()))
    # the interpolation error, from the spline through every other node: a cubic spline's error goes
    # as the fourth power of the spacing, so the coarser one's is about 15 times the finer one's
    # (Richardson's estimate; de Boor 1978, ch. V, the error of complete cubic spline interpolation)
    coarse = np.r_[0:len(nodes):2, len(nodes) - 1] if len(nodes) % 2 == 0 else np.r_[0:len(nodes):2]
    coarse_spline = None
    if len(coarse) >= 4:
        coarse_spline = CubicSpline(chord[coarse], nodes[coarse], axis=0, bc_type="not-a-knot")
        spread = max(spread, float(np.sqrt(((spline(chord) - coarse_spline(chord)) ** 2).sum(axis=1).mean())) / 15.0)
    chords = np.stack([nodes[:-1], nodes[1:]], axis=1)
    consecutive = np.stack([np.arange(len(nodes) - 1), np.arange(1, len(nodes))], axis=1)
    step = float(chord[-1] / (len(nodes) - 1))
    return SurfaceCut(points, ids[order][nearest], SPLINE_WINDOW_NODES * step,
                      spread * np.sqrt(samples / len(nodes)), _largest_sagitta(chords, consecutive), step,
                      _end_floor(spline, coarse_spline, chord, axis))


def _end_floor(spline, coarse, chord: np.ndarray, axis: np.ndarray) -> tuple[float, float, float, float]:
    """The interpolation's uncertainty of heading, curvature and rate at the seam end (chord 0).

    Heading and curvature first get Richardson's estimate of the end values' interpolation error
    (``coarse``, the spline through every other node, or None): the error of a cubic spline's
    derivative of order r goes as the spacing to the power 4 - r (de Boor 1978, ch. V), so the fine
    spline's is about |fine - coarse| / (2^(4 - r) - 1): / 7 for the tangent, / 3 for the curvature.
    On an arc fillet sampled at 1.1 mm this is what is left of the end tangent's error (a G1
    reading of 0.016 degrees with u = 1e-5 before).

    Between the seam and the first node the mesh holds no vertex, and a cubic spline's curvature is
    piecewise linear, so at the end (not-a-knot: one cubic over the first two intervals) it
    extrapolates the curvature linearly from the nodes t1, t2: a curvature that builds up as s^2
    from the seam (a G3 blend, whose first row a CAD mesher puts far out because the surface is
    nearly flat there) reads as a jump. Two bounds of that error, the smaller taken:

    - the Lagrange remainder of linear interpolation at 0, k'' t1 t2 / 2 for the curvature and
      k'' (t1 + t2) / 2 for the rate, with k'' the largest change of the spline's rate (constant on
      each interval) between its first END_FLOOR_INTERVALS intervals per distance between their
      middles; it vanishes where the curvature is linear along the section (a clothoid), but uneven
      nodes make a spline's rate zigzag and this bound large on an arc;
    - the curvature's change over the unobserved interval, |k(t1) - k(0)|, and that change per t1
      for the rate (the extrapolated end value differs from the true one by at most that where the
      curvature is monotone over the interval); it vanishes on an arc, but not on a clothoid.

    Both vanish on an arc, so a fillet still grades exactly; on the housing's lip blend (truth 0) the
    floor is 0.03 /mm beside a reading of 0.02."""
    pieces = min(len(chord) - 1, END_FLOOR_INTERVALS)
    if pieces < 3:
        return (0.0, 0.0, 0.0, 0.0)
    middles = 0.5 * (chord[1:pieces + 1] + chord[:pieces])
    _, rate = _curvature_and_rate(spline, middles, axis)
    second = float(np.max(np.abs(np.diff(rate) / np.diff(middles))))
    kappa, _ = _curvature_and_rate(spline, chord[:2], axis)
    change = float(abs(kappa[1] - kappa[0]))
    t1, t2 = float(chord[1]), float(chord[2])
    heading, curvature = _richardson_end(spline, coarse, float(kappa[0]), axis)
    if coarse is None:  # too few nodes for Richardson's estimate of the heading
        heading = _circle_end_turn(spline, spline(chord[:3]), axis)
    return (0.0, heading, max(min(second * t1 * t2 / 2.0, change), curvature),
            min(second * (t1 + t2) / 2.0, change / t1))


def _richardson_end(spline, coarse, fine_kappa: float, axis: np.ndarray) -> tuple[float, float]:
    """Richardson's estimate of the fine spline's error in the end tangent's direction (radians) and
    the end curvature (``fine_kappa``, the fine spline's), from the spline through every other node
    (``coarse``; zeros without it)."""
    if coarse is None:
        return 0.0, 0.0
    fine_tangent, coarse_tangent = spline(0.0, 1), coarse(0.0, 1)
    turn = np.arctan2(np.cross(fine_tangent, coarse_tangent) @ axis, fine_tangent @ coarse_tangent)
    (coarse_kappa,), _ = _curvature_and_rate(coarse, np.zeros(1), axis)
    return float(abs(turn)) / 7.0, float(abs(fine_kappa - coarse_kappa)) / 3.0


def _circle_end_turn(spline, first: np.ndarray, axis: np.ndarray) -> float:
    """The angle (radians) between the spline's end tangent and that of the circle through its first
    three nodes ``first`` (3, 3): a second estimate of the end heading, exact on an arc and of lower
    order than the spline elsewhere, so their difference bounds the spline's error where there are
    too few nodes for Richardson's estimate (on an arc fillet of four intervals over 30 degrees it is
    the error itself: 0.022 degrees read as u = 0.0006 before)."""
    a, b = first[1] - first[0], first[2] - first[0]
    normal = np.cross(a, b)
    area2 = float(normal @ normal)
    if area2 <= (1e-12 * float(a @ a)) ** 2:
        tangent = a
    else:
        centre = first[0] + np.cross((a @ a) * b - (b @ b) * a, normal) / (2.0 * area2)
        tangent = np.cross(normal, first[0] - centre)
        tangent *= np.sign(tangent @ a)
    end = spline(0.0, 1)
    return float(abs(np.arctan2(np.cross(end, tangent) @ axis, end @ tangent)))


def _curvature_and_rate(spline, t: np.ndarray, axis: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Signed curvature (about ``axis``) of a space curve and its derivative per unit arc length, at
    parameters ``t`` (the Frenet formulas for a curve of any parametrisation)."""
    d1, d2, d3 = spline(t, 1), spline(t, 2), spline(t, 3)
    speed = np.linalg.norm(d1, axis=1)
    c12, c13 = np.cross(d1, d2) @ axis, np.cross(d1, d3) @ axis
    kappa = c12 / speed**3
    rate = (c13 * speed**2 - 3.0 * c12 * np.einsum("ij,ij->i", d1, d2)) / speed**6
    return kappa, rate


def _zigzags(nodes: np.ndarray, axis: np.ndarray) -> bool:
    """Whether the polygon through ``nodes`` (in the plane normal to ``axis``) changes its turning
    direction more than once (a section curve has at most one inflection near a seam)."""
    chords = np.diff(nodes, axis=0)
    chords /= np.maximum(np.linalg.norm(chords, axis=1), 1e-300)[:, None]
    turn = np.arctan2(np.cross(chords[:-1], chords[1:]) @ axis, np.einsum("ij,ij->i", chords[:-1], chords[1:]))
    signs = np.sign(turn[np.abs(turn) > ZIGZAG_TURN])
    return int((signs[1:] != signs[:-1]).sum()) > 1
