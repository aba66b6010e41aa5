"""Fillet radius along a blend band: circle fits to cross-sections at stations along its seam.

At each station on the seam between the band and one of its faces, the band's vertices within a slab
normal to the seam tangent are projected into the section plane and fitted by a circle (Kasa 1976, then
geometric least squares; surfcheck.geometry.primitives.fit_circle_2d). The outer tenth of the section on each side
is dropped and the circle refitted, so a band edge that is off by an edge or two does not bend the
radius. On a non-circular blend (a G2 or G3 step blend) the radius is that of the best circle and the
section residual says how far from circular the section is.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.spatial import cKDTree

from surfcheck.part import Part
from surfcheck.geometry.primitives import fit_circle_2d

TRIM = 0.1  # fraction of the section's arc dropped at each end before the final circle fit
MIN_SECTION_POINTS = 10
ACROSS_PIECES = 3  # equal turns of a section fitted by a circle each: middle and two ends of a blend


@dataclass(frozen=True, eq=False)
class FilletRadius:
    """Per-station radius of a band: stations (s,3) seam points in order, radius (s,), rms (s,) circle
    residual, across (s,2) the smallest and largest radius of the ACROSS_PIECES circles fitted to
    equal turns of each section (equal on a circular fillet; on a G2 or G3 blend the arc's radius and
    the larger radii of its curvature ramps), and the nominal radius it is compared with (None when
    not given)."""

    stations: np.ndarray
    radius: np.ndarray
    rms: np.ndarray
    nominal: float | None
    across: np.ndarray = field(default_factory=lambda: np.empty((0, 2)))

    @property
    def mean(self) -> float:
        return float(np.mean(self.radius)) if len(self.radius) else float("nan")

    @property
    def spread(self) -> float:
        """Standard deviation of the station radii."""
        return float(np.std(self.radius)) if len(self.radius) else float("nan")

    @property
    def section_rms(self) -> float:
        return float(np.median(self.rms)) if len(self.rms) else float("nan")

    @property
    def deviation(self) -> float | None:
        """Largest |radius - nominal| over the stations, None without a nominal."""
        if self.nominal is None or not len(self.radius):
            return None
        return float(np.max(np.abs(self.radius - self.nominal)))

    def to_json(self) -> dict:
        r = self.radius
        out = {
            "stations": int(len(r)),
            "mean": _round(self.mean),
            "min": _round(float(r.min())) if len(r) else None,
            "max": _round(float(r.max())) if len(r) else None,
            "spread": _round(self.spread),
            "section_rms": _round(self.section_rms),
            "per_station": [_round(float(x)) for x in r],
            "across_min": _round(float(np.median(self.across[:, 0]))) if len(self.across) else None,
            "across_max": _round(float(np.median(self.across[:, 1]))) if len(self.across) else None,
        }
        if self.nominal is not None:
            out["nominal"] = self.nominal
            out["max_deviation"] = _round(self.deviation) if self.deviation is not None else None
        return out


def _round(x: float) -> float | None:
    return None if x is None or not np.isfinite(x) else round(x, 6)


def seam_vertices(part: Part, group_a: int, group_b: int) -> np.ndarray:
    """Vertices that are corners of faces of both groups."""
    in_a = np.zeros(part.n_vertices, dtype=bool)
    in_b = np.zeros(part.n_vertices, dtype=bool)
    in_a[part.faces[part.face_group == group_a].ravel()] = True
    in_b[part.faces[part.face_group == group_b].ravel()] = True
    return np.flatnonzero(in_a & in_b)


def stations_along(points: np.ndarray, spacing: float) -> np.ndarray:
    """Indices of seam points at least ``spacing`` apart, chained from one end to the other."""
    tree = cKDTree(points)
    taken = np.zeros(len(points), dtype=bool)
    far = np.argmax(np.linalg.norm(points - points.mean(axis=0), axis=1))  # an end of an open seam
    chosen, current = [], int(far)
    while True:
        chosen.append(current)
        taken[tree.query_ball_point(points[current], spacing)] = True
        left = np.flatnonzero(~taken)
        if not len(left):
            return np.asarray(chosen)
        current = int(left[np.argmin(np.linalg.norm(points[left] - points[current], axis=1))])


def measure_fillet(
    part: Part, band: int, normals: np.ndarray, scale: float, nominal: float | None = None
) -> FilletRadius:
    """Radius of band group ``band`` at stations along its longest seam (see module docstring)."""
    V = part.vertices
    band_faces = part.face_group == band
    band_vertices = np.unique(part.faces[band_faces])
    others = np.unique(part.face_group[~band_faces])
    seams = [seam_vertices(part, band, int(g)) for g in others]
    seam = max(seams, key=len) if seams else np.empty(0, dtype=np.int64)
    if len(seam) < 2:
        return FilletRadius(np.empty((0, 3)), np.empty(0), np.empty(0), nominal)
    S = V[seam]
    width = part.face_areas[band_faces].sum() / max(_polyline_length(S), scale)
    spacing = max(2.0 * scale, 0.5 * width)
    tree = cKDTree(V[band_vertices])
    stations, radii, rms, across = [], [], [], []
    for i in stations_along(S, spacing):
        near = S[np.linalg.norm(S - S[i], axis=1) < spacing]
        if len(near) < 2:
            continue
        t = np.linalg.svd(near - near.mean(axis=0), full_matrices=False)[2][0]
        cand = band_vertices[tree.query_ball_point(S[i], 1.5 * width + 2 * scale)]
        q = V[cand] - S[i]
        q = q[np.abs(q @ t) < scale]
        if len(q) < MIN_SECTION_POINTS:
            continue
        n = normals[seam[i]] - (normals[seam[i]] @ t) * t
        e1 = n / max(np.linalg.norm(n), 1e-300)
        e2 = np.cross(t, e1)
        flat = np.column_stack([q @ e1, q @ e2])
        centre, radius, residual = _trimmed_circle(flat)
        stations.append(S[i])
        radii.append(radius)
        rms.append(residual)
        across.append(_piece_radii(flat, centre))
    return FilletRadius(np.asarray(stations).reshape(-1, 3), np.asarray(radii), np.asarray(rms), nominal,
                        np.asarray(across).reshape(-1, 2))


def _piece_radii(flat: np.ndarray, centre: np.ndarray) -> tuple[float, float]:
    """Smallest and largest radius of circles fitted to ACROSS_PIECES equal turns of a section
    (angles about the section's best circle ``centre``); NaN where a piece has too few points."""
    angle = np.arctan2(*(flat - centre).T[::-1])
    rel = np.angle(np.exp(1j * (angle - np.angle(np.mean(np.exp(1j * angle))))))
    edges = np.linspace(rel.min(), rel.max(), ACROSS_PIECES + 1)
    piece = np.clip(np.searchsorted(edges, rel, side="right") - 1, 0, ACROSS_PIECES - 1)
    radii = [fit_circle_2d(flat[piece == k])[1] for k in range(ACROSS_PIECES) if (piece == k).sum() >= MIN_SECTION_POINTS]
    return (min(radii), max(radii)) if radii else (np.nan, np.nan)


def _trimmed_circle(flat: np.ndarray) -> tuple[np.ndarray, float, float]:
    centre, radius, residual = fit_circle_2d(flat)
    angle = np.arctan2(*(flat - centre).T[::-1])
    ref = np.angle(np.mean(np.exp(1j * angle)))
    rel = np.angle(np.exp(1j * (angle - ref)))
    lo, hi = np.quantile(rel, [TRIM, 1 - TRIM])
    inner = flat[(rel >= lo) & (rel <= hi)]
    if len(inner) >= MIN_SECTION_POINTS:
        centre, radius, residual = fit_circle_2d(inner)
    return centre, radius, residual


def _polyline_length(points: np.ndarray) -> float:
    """Seam length estimate: the sum of each seam vertex's distance to its nearest other seam vertex."""
    if len(points) < 2:
        return 0.0
    d, _ = cKDTree(points).query(points, k=2)
    return float(d[:, 1].sum())
