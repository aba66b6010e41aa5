"""Exact grading of the seams of a part read from STEP: the two B-rep faces are evaluated along their
shared edges (cad.edges) instead of fitting the triangles.

Per station: G0 the distance between the two faces' points, G1 the angle between their unit outward
normals, G2 the jump in the curvature of the normal sections across the edge, G3 the jump in that
curvature's rate per arc length (travelled from A into B), all from the surfaces' derivatives up to
third order (geometry.normalsection). The decisions are those of the mesh grader (continuity.decide_orders)
against the same profile. The values are evaluations of the exact geometry in double precision: their
stated standard uncertainty is the rounding floor EVALUATION_RELATIVE of the larger of the value and
its scale (the edge length, one radian, 1/length, 1/length^2), numerically about 0.
"""

from __future__ import annotations

import numpy as np

from surfcheck.cad.edges import SharedEdge, evaluate_edge, shared_edges
from surfcheck.cad.step import Brep
from surfcheck.errors import InputError
from surfcheck.grading.continuity import StationResult, decide_orders, seam_grade
from surfcheck.grading.run import GradeOptions, GradeRun, SeamRun
from surfcheck.grading.sections import station_positions
from surfcheck.grading.tolerances import ToleranceProfile
from surfcheck.part import Part
from surfcheck.seams import Curve

EXACT = "exact B-rep"
EVALUATION_RELATIVE = 1e-9  # rounding floor of a double-precision evaluation; common practice, no published source
DEFAULT_STATIONS = 24  # stations on a seam unless a count or spacing is given; common practice, no published source
ON_SEAM_RELATIVE = 0.05  # a B-rep edge belongs to a seam polyline when its midpoint lies within this
# fraction of its length of it (the polyline is the edge's discretisation); common practice, no published source


def grade_brep(part: Part, brep: Brep, seams: list[Curve], profile: ToleranceProfile,
               options: GradeOptions | None = None, progress=iter) -> GradeRun:
    """Grade G0..G3 of seams of a tessellated B-rep exactly, on the B-rep faces either side.

    Parameters
    ----------
    part : Part
        The tessellation of ``brep`` (io.read_part of a STEP file): one group per B-rep face.
    brep : Brep
        The B-rep the part was tessellated from.
    seams : list of Curve
        Seams between two groups (faces) each, sides in the order they are to be named.
    profile : ToleranceProfile
        Tolerances and coverage factor; converted to the part's units.
    options : GradeOptions, optional
        ``stations`` or ``spacing`` place the stations (default DEFAULT_STATIONS per seam); strip, reach
        and search concern mesh sections and do not apply.
    progress : callable, optional
        Wraps the list of seams for iteration; ``iter`` by default.

    Returns
    -------
    GradeRun
        Every seam's grade (``method`` "exact B-rep"; no mesh sections), or why it could not be graded.

    Notes
    -----
    Normal curvature from the first and second fundamental forms (do Carmo, Differential Geometry of
    Curves and Surfaces, 1976, sections 3-2 and 3-3); decisions with the guard bands of ISO 14253-1 and
    U = k u of JCGM 100:2008 (continuity.py).
    """
    if tuple(part.group_names) != tuple(brep.names):
        raise InputError(f"{part.source or 'part'}: its groups are not the B-rep's faces; grade it with --method mesh")
    profile = profile.in_units(part.units)
    options = options or GradeOptions()
    edges = shared_edges(brep)
    runs = tuple(exact_seam_run(part, brep, edges, seam, profile, options) for seam in progress(seams))
    return GradeRun(part, profile, options, runs)


def seam_edges(part: Part, edges: list[SharedEdge], seam: Curve) -> list[SharedEdge]:
    """The B-rep edges between the seam's two faces that its polyline follows, faces in its order."""
    a, b = (part.group_index(name) for name in seam.groups)
    between = [e.between(a, b) for e in edges if set(e.faces) == {a, b}]
    if len(between) <= 1:
        return between
    return [e for e in between if _distance_to_polyline(e.midpoint(), seam) <= ON_SEAM_RELATIVE * e.length]


def _distance_to_polyline(point: np.ndarray, seam: Curve) -> float:
    p = seam.points
    start, end = (p, np.roll(p, -1, axis=0)) if seam.closed else (p[:-1], p[1:])
    step = end - start
    t = np.clip(np.einsum("ij,ij->i", point - start, step) / np.maximum(np.einsum("ij,ij->i", step, step), 1e-300), 0, 1)
    return float(np.min(np.linalg.norm(start + t[:, None] * step - point, axis=1)))


def exact_seam_run(part: Part, brep: Brep, edges: list[SharedEdge], seam: Curve, profile: ToleranceProfile,
                   options: GradeOptions) -> SeamRun:
    """One seam graded on its B-rep edges (profile in part units)."""
    if seam.kind != "seam":
        raise InputError(f"{seam.id} is a {seam.kind}, not a seam between two groups")
    chosen = seam_edges(part, edges, seam)
    if not chosen:
        return SeamRun(seam, (), None, f"no B-rep edge joins {' | '.join(seam.groups)} along {seam.id}")
    lengths = np.array([e.length for e in chosen])
    total = float(lengths.sum())
    closed = len(chosen) == 1 and seam.closed
    s = station_positions(total, closed, options.stations, options.spacing, total / DEFAULT_STATIONS)
    starts = np.concatenate([[0.0], np.cumsum(lengths)[:-1]])
    owner = np.clip(np.searchsorted(starts, s, side="right") - 1, 0, len(chosen) - 1)
    results = []
    for k, edge in enumerate(chosen):
        here = np.flatnonzero(owner == k)
        if len(here):
            stations = evaluate_edge(brep, edge, s[here] - starts[k])
            results += [_station(int(i), float(s[i]), stations, j, float(lengths[k]), profile)
                        for j, i in enumerate(here)]
    return SeamRun(seam, (), seam_grade(seam, True, results, profile, part.units, EXACT, total))


def _rounding(value: float, scale: float) -> float:
    """The stated standard uncertainty of an exact evaluation: EVALUATION_RELATIVE of max(|value|, scale)."""
    return EVALUATION_RELATIVE * max(abs(value), scale)


def _station(index: int, s: float, stations, j: int, length: float, profile: ToleranceProfile) -> StationResult:
    """G0..G3 at station ``j`` of an edge's evaluation."""
    gap = float(stations.gap[j])
    angle = float(np.degrees(stations.angle[j]))
    curvature = tuple((float(c), _rounding(c, 1 / length)) for c in stations.curvature[:, j])
    rate = tuple((float(r), _rounding(r, 1 / length**2)) for r in stations.rate[:, j])
    orders = decide_orders(profile, (gap, _rounding(gap, length)), (angle, _rounding(angle, np.degrees(1.0))),
                           curvature, rate)
    return StationResult(index, s, stations.position[j], 0.0, orders, (curvature[0][0], curvature[1][0]),
                         (rate[0][0], rate[1][0]), (0, 0), (0.0, 0.0))
