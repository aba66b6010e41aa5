"""Sections across a seam: stations along it and, at each, both sides' data in the section plane.

At a station the section plane is normal to the seam tangent T. Its frame is (x, y): y along the
surface's outward normal N at the seam (area-weighted face normals there, made normal to T), x = N x T
oriented from side A into side B. Instead of one plane cut, each side contributes the strip of its
own vertices within ``strip`` of the station along the seam (tens of times more samples on a noisy
scan). Each strip vertex is carried into the station's plane along the seam: it is projected onto a
local polynomial fit of the seam curve (foot point and tangent), and its offset from the foot is
rotated by the minimal rotation taking the foot's tangent to the station's. Along a straight seam
this is the orthogonal projection; along a circular one (a revolved part) it is the exact rotation
about the axis, so a strip of a surface of revolution lands on its meridian section.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse.csgraph import dijkstra
from scipy.spatial import cKDTree
from scipy.stats import f as f_dist

from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.progress import track
from surfcheck.seams import Curve
from surfcheck.polyline import cumulative_arc_length, ring
from surfcheck.grading import nearby
from surfcheck.grading.surface_cut import SPLINE_POINTS, SurfaceCut, cut_side, spline_through

STRIP_EDGES = 10.0  # default half-width of the strip along the seam, in typical edge lengths
REACH_EDGES = 40.0  # default reach of the section data from the seam, in typical edge lengths
MAX_STATIONS = 48  # default number of stations on a long seam
SEAM_FIT_EDGES = 20.0  # the seam is fitted over the strip and this many edge lengths beyond
MAX_STRIP_TURN = 0.2  # radians the seam may turn across a strip
GEODESIC_SLACK = 1.3  # a side's point lies at most this many times farther along the mesh than in space
MAX_SEAM_TURN = 0.5  # radians the seam may turn over its local fit (the fit narrows until it does not)
FINER_SIDE = 0.5  # a side sampled across the seam closer than this many typical edge lengths is fitted on
# its own scale (common practice, no published source)
SEAM_BORDER_ANGLE = np.radians(45.0)  # a border edge within this of the seam's tangent runs along it (common
# practice, no published source)
CUT_CONTEXT = 2.0  # a station's cut reads the triangles within this many section radii (its polyline's
# pieces that leave the section's ball and come back stay joined)
SPARSE_SIDE = 40  # a side whose strip gives fewer distinct section points is read from its surface
_SEAM_FIT_DEGREE = 5


@dataclass(frozen=True, eq=False)
class Section:
    """Both sides' data at one station, in the section frame (x from A into B, y along the normal).

    ``side_a``/``side_b`` are (n, 2) section coordinates of the strip vertices ``ids_a``/``ids_b``;
    ``end_a``/``end_b`` where each side's data meets the seam (the same point on a welded seam).
    ``edge`` is the typical edge length near the seam, ``scales`` each side's scale for its one-sided
    fit (see side_spacings), ``floors`` the least standard deviation of its points (non-zero where a
    sparse side was read from its surface, surface_cut.py), ``end_floors`` the least standard
    uncertainty of each side's four quantities at the seam (SurfaceCut.end_floor) and ``deflection`` the largest chordal
    deflection of the polygons such sides were read from (None where no side was).
    """

    index: int
    s: float
    origin: np.ndarray
    tangent: np.ndarray
    normal: np.ndarray
    cross: np.ndarray
    side_a: np.ndarray
    side_b: np.ndarray
    ids_a: np.ndarray
    ids_b: np.ndarray
    end_a: np.ndarray
    end_b: np.ndarray
    welded: bool
    edge: float
    scales: tuple[float, float]
    floors: tuple[float, float] = (0.0, 0.0)
    deflection: float | None = None
    end_floors: tuple[tuple[float, ...], tuple[float, ...]] = ((0.0,) * 4, (0.0,) * 4)

    def to_world(self, xy: np.ndarray) -> np.ndarray:
        """3D positions of section coordinates (n, 2) or (2,)."""
        xy = np.asarray(xy, dtype=float)
        return self.origin + xy[..., :1] * self.cross + xy[..., 1:2] * self.normal


def station_positions(length: float, closed: bool, count: int | None = None, spacing: float | None = None,
                      default_spacing: float | None = None) -> np.ndarray:
    """Arc lengths of the stations: ``count`` of them, or about ``spacing`` apart, else about
    ``default_spacing`` apart with at most MAX_STATIONS. Open seams get stations at the centres of
    equal intervals, closed seams at their starts."""
    if count is not None and spacing is not None:
        raise InputError("give either a station count or a station spacing, not both")
    if count is not None:
        if int(count) != count or count < 1:
            raise InputError("the station count must be a positive integer")
        n = int(count)
    else:
        step = spacing if spacing is not None else max(default_spacing or length, length / MAX_STATIONS)
        if not step > 0:
            raise InputError("the station spacing must be positive")
        n = max(1, int(round(length / step)))
    offset = 0.0 if closed else 0.5
    return length * (np.arange(n) + offset) / n


def _seam_border(part: Part, edges: np.ndarray, tangent: np.ndarray) -> np.ndarray:
    """Vertices of the border ``edges`` that run along the seam (within SEAM_BORDER_ANGLE of its
    ``tangent``): the border that faces the other side, not the cap across the part's end."""
    direction = part.vertices[edges[:, 1]] - part.vertices[edges[:, 0]]
    along = np.abs(direction @ tangent) >= np.cos(SEAM_BORDER_ANGLE) * np.linalg.norm(direction, axis=1)
    return np.unique(edges[along])


def typical_edge_length(part: Part, vertices: np.ndarray) -> float:
    """Median length of the edges that touch the given vertices."""
    edges = nearby.edges_touching(part, np.unique(vertices))
    if len(edges) == 0:
        raise InputError("the seam's vertices have no edges")
    return float(np.median(np.linalg.norm(part.vertices[edges[:, 1]] - part.vertices[edges[:, 0]], axis=1)))


def side_spacings(part: Part, seam: Curve, groups: tuple[int, int], h: float) -> tuple[float, float]:
    """Each side's sampling step across the seam, the scale of its one-sided fit: the median distance
    from the seam of that side's first ring of vertices off it, where that is under FINER_SIDE * ``h``
    (on an even mesh it is about 0.9 h), else ``h``. A patch whose rows are much closer than the part's
    edges is then fitted over windows of its own rows, not of the coarse side's edges (its curvature may
    change within a few of those)."""
    seam_vertices = np.unique(seam.vertices)
    faces = nearby.faces_around(part, seam_vertices)
    seam_samples = _SeamLocator(seam.points, seam.closed, 0.05 * h).tree
    scales = []
    for group in groups:
        # every corner of a face of the side at a seam vertex is joined to that vertex by an edge of it
        ring = np.setdiff1d(part.faces[faces[part.face_group[faces] == group]], seam_vertices)
        own = float(np.median(seam_samples.query(part.vertices[ring])[0])) if len(ring) else h
        scales.append(own if own < FINER_SIDE * h else h)
    return scales[0], scales[1]


def cut_sections(
    part: Part,
    seam: Curve,
    stations: int | None = None,
    spacing: float | None = None,
    strip: float | None = None,
    reach: float | None = None,
) -> list[Section]:
    """Sections of the seam's two sides at stations along it (see the module docstring).

    ``strip`` (half-width along the seam) and ``reach`` (distance from the seam in the section) default
    to STRIP_EDGES and REACH_EDGES typical edge lengths. Stations where a side has no data are left out.
    """
    if len(seam.groups) != 2:
        raise InputError(f"{seam.id}: a seam needs two groups, got {len(seam.groups)}")
    if len(seam.points) < 2:
        raise InputError(f"{seam.id}: a seam needs at least two points")
    group_a, group_b = seam.groups
    groups = (part.group_index(group_a), part.group_index(group_b))
    for name, group in zip(seam.groups, groups):
        if part.group_sizes[group] == 0:
            raise InputError(f"{seam.id}: group {name!r} has no faces")
    h = typical_edge_length(part, seam.vertices)
    strip = STRIP_EDGES * h if strip is None else float(strip)
    reach = REACH_EDGES * h if reach is None else float(reach)
    if not (np.isfinite(strip) and strip > 0 and np.isfinite(reach) and reach > 0):
        raise InputError("the strip width and the reach must be positive lengths")
    # welded: the seam's vertices are shared by both sides (a seam between separate shells lists one
    # side's vertices, whichever side the request names first, so membership of both is the test)
    welded = bool((part.touches_group(seam.vertices, groups[0])
                   & part.touches_group(seam.vertices, groups[1])).mean() > 0.5)
    polyline = _SeamPolyline(seam.points, seam.closed)
    positions = station_positions(polyline.length, seam.closed, stations, spacing, 2.0 * strip)
    V = part.vertices
    nearest_seam = _SeamLocator(seam.points, seam.closed, 0.25 * h)
    scales = side_spacings(part, seam, groups, h)
    widest = CUT_CONTEXT * np.hypot(reach, strip) * 1.05
    group_faces = [nearby.FacesNear(part, g, seam.points, widest) for g in groups]
    sections = []
    for index, s in enumerate(track(positions, f"{seam.id}: cutting sections")):
        # along a tightly curved seam the strip narrows until the seam turns by MAX_STRIP_TURN over it
        turn = polyline.turn_near(s, strip)
        width = max(h, strip * min(1.0, MAX_STRIP_TURN / turn)) if turn > 0 else strip
        frame = polyline.local_fit(s, width + SEAM_FIT_EDGES * h, width + 2.0 * h)
        radius = np.hypot(reach, width) * 1.05
        mapped = []
        ball = nearby.vertices_near(part, frame.origin, radius)
        for group in groups:
            near = ball[part.touches_group(ball, group)]
            path = _path_lengths(part, near, frame.origin, GEODESIC_SLACK * radius)
            coords, along, beside = frame.carry(V[near])
            inside = beside & polyline.within(s, along, 0.5 * h) & (np.abs(along) <= width)
            # along the mesh a point of this side is about as far as in space; the far side of a
            # small loop (or another sheet) that enters the ball is much farther
            inside &= path <= GEODESIC_SLACK * np.linalg.norm(coords + along[:, None] * frame.tangent, axis=1) + 3.0 * h
            # and a point belongs to this station only if the seam point nearest to it does (on a
            # small loop the far side projects onto the station's tangent line, too)
            inside[inside] = nearest_seam.offset(V[near[inside]], s) <= width + h
            mapped.append((near[inside], coords[inside]))
        border_data = mapped[1]  # side B's own vertices: its border is where its data meets the seam
        scale_of, floor_of, end_floor_of, deflection = list(scales), [0.0, 0.0], [(0.0,) * 4] * 2, None
        step_b = h  # side B's sampling step across the seam
        for side, faces in enumerate(group_faces):
            cut = _sparse_side(part, faces, frame, *mapped[side], h, radius)
            if cut is not None:
                mapped[side] = (cut.vertices, cut.points)
                scale_of[side], floor_of[side], end_floor_of[side] = cut.scale, cut.floor, cut.end_floor
                deflection = max(deflection or 0.0, cut.deflection)
                step_b = cut.step if side == 1 else step_b
        (near_a, rel_a), (near_b, rel_b) = mapped
        if len(near_a) == 0 or len(near_b) == 0:
            continue
        normal = _seam_normal(part, np.concatenate([near_a, near_b]), frame, groups, 3.0 * h)
        cross = np.cross(normal, frame.tangent)
        xy_a = np.stack([rel_a @ cross, rel_a @ normal], axis=1)
        xy_b = np.stack([rel_b @ cross, rel_b @ normal], axis=1)
        if xy_b[:, 0].mean() < xy_a[:, 0].mean():
            cross = -cross
            xy_a[:, 0] *= -1
            xy_b[:, 0] *= -1
        keep_a = np.hypot(*xy_a.T) <= reach
        keep_b = np.hypot(*xy_b.T) <= reach
        end_a = np.zeros(2)
        if welded:
            end_b = end_a
        else:
            ids, rel = border_data
            on_border = np.isin(ids, _seam_border(part, nearby.group_border(part, ids, groups[1]), frame.tangent))
            pts = np.stack([rel[on_border] @ cross, rel[on_border] @ normal], axis=1)
            pts = pts[np.hypot(*pts.T) <= reach]
            if len(pts) == 0:
                continue
            # the nearest of side B's border points and those within half its step across the seam
            # (the far border of a band one or two triangles wide is not its seam's end)
            dist = np.hypot(*pts.T)
            end_b = pts[dist <= dist.min() + 0.5 * min(h, step_b)].mean(axis=0)
        sections.append(Section(index, float(s), frame.origin, frame.tangent, normal, cross,
                                xy_a[keep_a], xy_b[keep_b], near_a[keep_a], near_b[keep_b],
                                end_a, end_b, welded, h, (scale_of[0], scale_of[1]),
                                (floor_of[0], floor_of[1]), deflection, tuple(end_floor_of)))
    return sections


@dataclass(frozen=True)
class _SeamFrame:
    """A local polynomial fit c(tau) of the seam around a station; tau in units of ``scale``."""

    coef: np.ndarray  # (deg+1, 3) in tau / scale
    scale: float
    origin: np.ndarray
    tangent: np.ndarray
    span: tuple[float, float]

    def _eval(self, tau: np.ndarray, derivative: int) -> np.ndarray:
        c = np.polynomial.polynomial.polyder(self.coef, derivative) / self.scale**derivative if derivative else self.coef
        return np.polynomial.polynomial.polyval(tau / self.scale, c).T

    def carry(self, points: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Points carried along the seam into the station's plane, relative to the origin (n, 3), their
        signed arc length from the station along the seam (n,), and whether their foot point lies
        inside the fitted stretch of the seam (n,) (the others are not beside it)."""
        tau = (points - self.origin) @ self.tangent
        for _ in range(4):  # Newton on (c(tau) - p) . c'(tau) = 0: the foot point on the seam
            c, d1, d2 = (self._eval(tau, k) for k in range(3))
            gap = c - points
            step = np.einsum("ij,ij->i", gap, d1) / (np.einsum("ij,ij->i", d1, d1) + np.einsum("ij,ij->i", gap, d2))
            tau = np.clip(tau - step, *self.span)
        foot = self._eval(tau, 0)
        t = self._eval(tau, 1)
        speed = np.linalg.norm(t, axis=1)
        t = t / speed[:, None]
        offset = points - foot
        w = np.cross(t, self.tangent)
        cw = np.cross(w, offset)
        carried = offset + cw + np.cross(w, cw) / (1.0 + t @ self.tangent)[:, None]
        lo, hi = self.span
        # a foot clipped to the span's end is no foot (its offset is not normal to the seam) unless the
        # point lies beside the end itself, as the vertices of a CAD strip's long triangles do
        beside = (tau >= lo) & (tau <= hi) & (np.abs(np.einsum("ij,ij->i", offset, t)) <= 1e-6 * self.scale)
        return carried, tau * speed, beside


class _SeamPolyline:
    """The seam's points with arc length, and local fits of the seam curve around a station."""

    def __init__(self, points: np.ndarray, closed: bool) -> None:
        self.points = np.asarray(points, dtype=float)
        self.arc = cumulative_arc_length(self.points, closed)
        self.length = float(self.arc[-1])
        self.closed = closed
        if not self.length > 0:
            raise InputError("the seam has zero length")

    def local_fit(self, s: float, half_width: float, least: float) -> _SeamFrame:
        """A polynomial fit of the seam within ``half_width`` of arc length s, narrowed (not below
        ``least``) until the seam turns by at most MAX_SEAM_TURN over it."""
        arc = self.arc[: len(self.points)]
        rel = arc - s
        if self.closed:
            rel = (rel + 0.5 * self.length) % self.length - 0.5 * self.length
        while half_width > least and self._turn(rel, half_width) > MAX_SEAM_TURN:
            half_width = max(least, 0.7 * half_width)
        near = np.abs(rel) <= half_width
        if near.sum() < 3:
            near = np.argsort(np.abs(rel))[: min(3, len(rel))]
        pts, rel = self.points[near], rel[near]
        order = np.argsort(rel)
        pts, rel = pts[order], rel[order]
        scale = max(float(np.abs(rel).max()), 1e-300)
        coef = _smooth_fit(rel / scale, pts)
        origin = np.polynomial.polynomial.polyval(0.0, coef)
        tangent = coef[1] / np.linalg.norm(coef[1])
        return _SeamFrame(coef, scale, origin, tangent, (float(rel[0]), float(rel[-1])))

    def turn_near(self, s: float, half_width: float) -> float:
        """How far the seam turns (radians) within half_width of arc length s."""
        rel = self.arc[: len(self.points)] - s
        if self.closed:
            rel = (rel + 0.5 * self.length) % self.length - 0.5 * self.length
        return self._turn(rel, half_width)

    def _turn(self, rel: np.ndarray, half_width: float) -> float:
        """How far the seam turns over the stretch |rel| <= half_width: twice the angle between the
        chords of its two halves (long chords, so that a noisy seam does not seem to turn)."""
        idx = np.flatnonzero(np.abs(rel) <= half_width)
        if len(idx) < 3:
            return 0.0
        idx = idx[np.argsort(rel[idx])]
        start, middle, end = self.points[idx[0]], self.points[idx[len(idx) // 2]], self.points[idx[-1]]
        first, last = middle - start, end - middle
        cos = first @ last / (np.linalg.norm(first) * np.linalg.norm(last))
        return 2.0 * float(np.arccos(np.clip(cos, -1.0, 1.0)))

    def within(self, s: float, along: np.ndarray, margin: float) -> np.ndarray:
        """Which points, at arc length ``along`` from the station at s, lie beside the seam (an open
        seam ends; data beyond its ends, within ``margin``, belongs to something else)."""
        if self.closed:
            return np.ones(len(along), dtype=bool)
        return (s + along >= -margin) & (s + along <= self.length + margin)


class _SeamLocator:
    """Arc length of the seam point nearest to given points, from the seam sampled ``spacing`` apart."""

    def __init__(self, points: np.ndarray, closed: bool, spacing: float) -> None:
        closing = ring(points, closed)
        steps = np.linalg.norm(np.diff(closing, axis=0), axis=1)
        start = np.concatenate([[0.0], np.cumsum(steps)])
        count = np.maximum(1, np.ceil(steps / max(spacing, 1e-300)).astype(int))
        t = np.concatenate([np.arange(c) / c for c in count] + [[1.0]])
        segment = np.concatenate([np.full(c, i) for i, c in enumerate(count)] + [[len(steps) - 1]])
        self.arc = start[segment] + t * steps[segment]
        self.tree = cKDTree(closing[segment] + t[:, None] * (closing[segment + 1] - closing[segment]))
        self.length = float(start[-1])
        self.closed = closed

    def offset(self, points: np.ndarray, s: float) -> np.ndarray:
        """|arc length of the nearest seam point - s| (around the loop on a closed seam)."""
        if len(points) == 0:
            return np.zeros(0)
        delta = np.abs(self.arc[self.tree.query(points)[1]] - s)
        return np.minimum(delta, self.length - delta) if self.closed else delta


def _sparse_side(part: Part, faces: nearby.FacesNear, frame: "_SeamFrame", ids: np.ndarray, rel: np.ndarray, h: float,
                 radius: float) -> SurfaceCut | None:
    """A side's data read from the surface where its carried strip (vertices ``ids`` at ``rel``) has
    fewer than SPARSE_SIDE distinct section points: where they line up along one curve (the rows of a CAD
    strip of long triangles), the spline through them; where there are too few for that (a plane
    without interior vertices), the cut of the side's triangles near the station (``faces``, those whose
    boxes lie within CUT_CONTEXT radii). None where the strip serves."""
    resolution = 1e-3 * h
    in_plane = np.abs(rel @ frame.tangent) <= resolution
    ids, rel = ids[in_plane], rel[in_plane]
    distinct = len(np.unique(np.round(rel / resolution), axis=0)) if len(rel) else 0
    if distinct >= SPARSE_SIDE:
        return None
    if distinct >= SPLINE_POINTS:  # None for scattered vertices (an irregular or noisy mesh): the fit takes them
        return spline_through(ids, rel, resolution, frame.tangent)
    return cut_side(part, faces.within(frame.origin, CUT_CONTEXT * radius), frame.origin, frame.tangent, radius)


def _path_lengths(part: Part, vertices: np.ndarray, origin: np.ndarray, limit: float) -> np.ndarray:
    """Shortest path lengths along the mesh's edges among the sorted vertices (Dijkstra on the induced
    subgraph) from the one nearest ``origin``; inf beyond ``limit`` or where not connected."""
    if len(vertices) == 0:
        return np.zeros(0)
    graph = nearby.half_edges_among(part, vertices)
    V = part.vertices
    row = np.repeat(np.arange(len(vertices)), np.diff(graph.indptr))
    graph.data = np.linalg.norm(V[vertices[row]] - V[vertices[graph.indices]], axis=1)
    start = int(np.argmin(np.linalg.norm(V[vertices] - origin, axis=1)))
    return dijkstra(graph, directed=False, indices=start, limit=limit)


def _smooth_fit(x: np.ndarray, pts: np.ndarray) -> np.ndarray:
    """Polynomial coefficients (deg+1, 3) of the seam's points against x: the lowest degree up to
    _SEAM_FIT_DEGREE that the data support (an F-test against the highest degree at the 1 % level),
    so that the noise of a scanned seam does not make its fit wiggle."""
    top = int(min(_SEAM_FIT_DEGREE, len(x) - 2))
    if top < 1:
        return np.polynomial.polynomial.polyfit(x, pts, min(1, len(x) - 1))
    fits = [np.polynomial.polynomial.polyfit(x, pts, d) for d in range(1, top + 1)]
    rss = [float(((np.polynomial.polynomial.polyval(x, c).T - pts) ** 2).sum()) for c in fits]
    dof_top = 3 * (len(x) - top - 1)
    if dof_top <= 0:
        return fits[-1]
    sigma2 = max(rss[-1] / dof_top, 1e-300)
    for d in range(1, top):
        extra = 3 * (top - d)
        if (rss[d - 1] - rss[-1]) / extra <= f_dist.ppf(0.99, extra, dof_top) * sigma2:
            return fits[d - 1]
    return fits[-1]


def _seam_normal(part: Part, vertices: np.ndarray, frame: _SeamFrame, groups: tuple[int, int], radius: float) -> np.ndarray:
    """Unit outward normal at the station: area-weighted normals of the two sides' faces within
    ``radius`` of it, made normal to the seam tangent."""
    V = part.vertices
    close = vertices[np.linalg.norm(V[vertices] - frame.origin, axis=1) <= radius]
    if len(close) == 0:
        close = vertices[np.argsort(np.linalg.norm(V[vertices] - frame.origin, axis=1))[:8]]
    faces = np.unique(part.vertex_faces[close].indices)
    faces = faces[np.isin(part.face_group[faces], groups)]
    a, b, c = (V[part.faces[faces, k]] for k in range(3))
    n = np.cross(b - a, c - a).sum(axis=0)
    n -= (n @ frame.tangent) * frame.tangent
    norm = np.linalg.norm(n)
    if not norm > 0:
        raise InputError("cannot find the surface normal at a seam station (degenerate faces?)")
    return n / norm

