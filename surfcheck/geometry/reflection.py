"""Reflection lines and isophotes of a surface from its per-vertex normals.

Isophotes (Poeschl 1984, "Detecting surface irregularities using isophotes", CAGD 1(2)) are the level
lines of the brightness I = n . L of a surface lit from the direction L; reflection lines (Klass 1980,
"Correction of local surface irregularities using reflection lines", CAD 12(2)) are the mirror images,
seen by an eye, of a family of parallel straight light lines. Both follow the normals, so they are one
order less continuous than the surface: across a G0 seam (the normals jump) a stripe breaks, across a
G1 seam (the curvature jumps) it runs on but kinks, across a G2 or smoother seam it bends smoothly.

The light lines lie in a plane {y : m . y = c} with direction ``a`` and are ``spacing`` apart in the
direction b = m x a. The eye looks along -e from infinitely far (a parallel view). The viewing ray
meets the surface at x, is mirrored to r = d - 2 (d . n) n (d = -e), and meets the light plane at
x + mu r, mu = (c - m . x) / (m . r); the reflection-line parameter is t = b . (x + mu r - p) (p a
point of the plane), so the light line of index j is seen where t = j spacing, and t / spacing is the
stripe phase. Where the mirrored ray runs away from the plane or grazes it (mu <= 0 or m . r <=
GRAZING) the surface reflects none of these lines: t is NaN there. With the eye along m, that is
where the surface turns more than about 45 deg from m: the two faces of a right-angled crease mirror
no common light line.

The normals should be the jet-fit normals (differential.principal_curvatures): the faceted triangle
normals would make every facet a stripe of its own.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.errors import InputError

LINE_ANGLE_DEG = 45.0  # light lines turned this far from the seam, so their images cross it; common practice
LIGHT_TILT_DEG = 30.0  # the isophotes' light tilted this far from the mean normal, across the seam; common practice
STRIPES_PER_REACH = 3.0  # light-line spacing: the reach (the plane's height) / this; no published source
ISOPHOTE_BANDS = 8.0  # isophote step: the brightness range near the seam / this; no published source
PART_STRIPES = 24.0  # light lines over a whole part's diagonal; no published source
GRAZING = 0.05  # a mirrored ray within about 3 deg of the light plane reaches it far off: no value; no published source
MIN_FACING = 0.3  # below this |mean normal|, the normals cancel (a closed part): use the flattest axis


@dataclass(frozen=True)
class Lights:
    """A light set-up: parallel light lines in a plane and a light direction for isophotes.

    ``plane_normal`` m (unit, from the surface towards the plane; also the direction towards the eye),
    ``plane_point`` p on it, ``line_direction`` a (unit, in the plane), ``spacing`` between the lines
    (part units), ``light`` L (unit) for the isophotes and ``isophote_step`` between their levels.
    """

    plane_normal: np.ndarray
    plane_point: np.ndarray
    line_direction: np.ndarray
    spacing: float
    light: np.ndarray
    isophote_step: float

    @property
    def across(self) -> np.ndarray:
        """b = m x a: the direction in the plane in which the light lines follow each other."""
        return np.cross(self.plane_normal, self.line_direction)


def _unit(v, what: str) -> np.ndarray:
    v = np.asarray(v, dtype=float).reshape(3)
    length = float(np.linalg.norm(v))
    if not np.isfinite(length) or length == 0.0:
        raise InputError(f"{what} must be a finite non-zero vector")
    return v / length


def facing_normal(points: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """The direction the surface near ``points`` faces: the mean of its unit normals, or, where they
    nearly cancel (|mean| < MIN_FACING), the axis of least spread of the points signed like most normals."""
    finite = normals[np.isfinite(normals).all(axis=1)]
    mean = finite.mean(axis=0) if len(finite) else np.zeros(3)
    if np.linalg.norm(mean) >= MIN_FACING:
        return mean / np.linalg.norm(mean)
    centred = points - points.mean(axis=0)
    axis = np.linalg.svd(centred[:: max(1, len(centred) // 20000)], full_matrices=False)[2][-1]
    return axis if np.sum(np.sign(finite @ axis)) >= 0 else -axis


def choose_lights(points: np.ndarray, normals: np.ndarray, along: np.ndarray, centre: np.ndarray,
                  reach: float, line_direction=None, spacing: float | None = None, light=None,
                  bands: float = ISOPHOTE_BANDS) -> Lights:
    """Lights for looking at the surface near ``centre``: the light plane at height ``reach`` above it,
    facing the mean normal N of ``points`` (with their unit ``normals``), the eye along N; the light
    lines turned LINE_ANGLE_DEG from ``along`` (a seam's direction) towards C = N x along, so their
    images cross the seam, reach / STRIPES_PER_REACH apart; the isophotes' light turned
    LIGHT_TILT_DEG from N towards C, ``bands`` levels over the brightness range of ``points``.

    Parameters
    ----------
    points, normals : (k, 3) float
        The surface near the seam (or the whole part) and its unit normals.
    along : (3,) float
        The seam's direction (or the part's longest axis).
    centre : (3,) float
        Where to look.
    reach : float
        The light plane's height above ``centre`` (part units).
    line_direction : (3,) float, optional
        The light lines' direction, given; projected into the plane.
    spacing : float, optional
        The light lines' spacing, given (part units).
    light : (3,) float, optional
        The isophotes' light direction, given.
    bands : float
        Isophote levels over the brightness range of ``points``.

    Returns
    -------
    Lights
    """
    if not np.isfinite(reach) or reach <= 0:
        raise InputError(f"the light plane's height must be positive, not {reach}")
    if spacing is not None and (not np.isfinite(spacing) or spacing <= 0):
        raise InputError(f"the stripe spacing must be positive, not {spacing}")
    n = facing_normal(points, normals)
    t = np.asarray(along, float) - (np.asarray(along, float) @ n) * n
    if np.linalg.norm(t) < 1e-9:  # looking along the seam: any direction in the plane
        t = np.cross(n, np.eye(3)[int(np.argmin(np.abs(n)))])
    t = t / np.linalg.norm(t)
    c = np.cross(n, t)
    if line_direction is None:
        angle = np.radians(LINE_ANGLE_DEG)
        a = np.cos(angle) * t + np.sin(angle) * c
    else:
        a = _unit(line_direction, "the light lines' direction")
        a = a - (a @ n) * n
        if np.linalg.norm(a) < 1e-6:
            raise InputError("the light lines' direction runs towards the eye; give one across the view")
        a = a / np.linalg.norm(a)
    tilt = np.radians(LIGHT_TILT_DEG)
    light = np.cos(tilt) * n + np.sin(tilt) * c if light is None else _unit(light, "the light direction")
    brightness = normals @ light
    brightness = brightness[np.isfinite(brightness)]
    span = float(np.ptp(brightness)) if brightness.size else 0.0
    return Lights(n, np.asarray(centre, float) + reach * n, a, float(spacing or reach / STRIPES_PER_REACH), light,
                  max(span / bands, 1e-3))


def part_lights(vertices: np.ndarray, normals: np.ndarray, line_direction=None, spacing: float | None = None,
                light=None) -> Lights:
    """choose_lights for a whole part: looking at its bounding-box centre along the mean normal (or its
    flattest axis), the light plane one bounding-box diagonal above it, the light lines turned from
    the part's longest axis, PART_STRIPES of them over the diagonal unless ``spacing`` is given, and
    PART_STRIPES isophote levels over the part's brightness range."""
    V = np.asarray(vertices, float)
    used = np.isfinite(normals).all(axis=1) & (np.linalg.norm(normals, axis=1) > 0.5)
    if not used.any():
        raise InputError("no vertex has a normal: the part has no faces to reflect light")
    centred = V[used] - V[used].mean(axis=0)
    longest = np.linalg.svd(centred[:: max(1, len(centred) // 20000)], full_matrices=False)[2][0]
    low, high = V[used].min(axis=0), V[used].max(axis=0)
    diagonal = float(np.linalg.norm(high - low)) or 1.0
    return choose_lights(V[used], normals[used], longest, 0.5 * (low + high), diagonal, line_direction,
                         spacing or diagonal / PART_STRIPES, light, PART_STRIPES)


def isophote_value(normals: np.ndarray, light: np.ndarray) -> np.ndarray:
    """(n,) brightness n . L per vertex (Poeschl 1984); NaN where a normal is missing.

    Parameters
    ----------
    normals : (n, 3) float
        Unit normals (jet fits).
    light : (3,) float
        Unit light direction.

    Returns
    -------
    (n,) float
    """
    values = np.asarray(normals, float) @ np.asarray(light, float)
    return np.where(np.linalg.norm(normals, axis=1) > 0.5, values, np.nan)


def reflection_parameter(vertices: np.ndarray, normals: np.ndarray, lights: Lights) -> np.ndarray:
    """(n,) the reflection-line parameter t per vertex (Klass 1980; module docstring): the position,
    across the light lines, of the line the eye sees mirrored at the vertex, in part units; the line of
    index j is seen where t = j lights.spacing. NaN where the mirrored ray misses the light plane.

    Parameters
    ----------
    vertices, normals : (n, 3) float
        Positions and unit normals (jet fits).
    lights : Lights
        The light plane, its lines and the eye (along the plane's normal).

    Returns
    -------
    (n,) float
    """
    x, n = np.asarray(vertices, float), np.asarray(normals, float)
    m = lights.plane_normal
    d = -m  # the viewing direction, from the eye towards the surface
    r = d[None, :] - 2.0 * (n @ d)[:, None] * n
    towards = r @ m
    height = (lights.plane_point - x) @ m
    with np.errstate(divide="ignore", invalid="ignore"):
        mu = np.where(towards > GRAZING, height / towards, np.nan)
    hit = x + mu[:, None] * r
    t = (hit - lights.plane_point) @ lights.across
    valid = (mu > 0) & (np.linalg.norm(n, axis=1) > 0.5)
    return np.where(valid, t, np.nan)
