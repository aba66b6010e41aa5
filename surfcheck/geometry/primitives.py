"""Least-squares fits of planes, spheres, cylinders, cones, tori and 2-D circles to point sets.

Each fit starts from an algebraic (linear) estimate and, where the algebraic estimate is not already the
geometric optimum, refines the orthogonal distances with ``scipy.optimize.least_squares``:

- plane: total least squares through the centroid, the normal is the smallest singular vector
  (Eberly, "Least Squares Fitting of Data by Linear or Quadratic Structures", Geometric Tools);
- sphere and circle: the linear fit of |p|^2 = 2 c.p + (r^2 - |c|^2) (Kasa 1976, "A circle fitting
  procedure and its error analysis"; Eberly, "Least Squares Fitting of Data"), then the geometric fit;
- cylinder, cone and torus: a start from the normals (a cylinder's normals are perpendicular to its
  axis; a cone's make a constant angle with it and its tangent planes pass through the apex; a torus's
  tube centres p - r n lie on a circle), then the geometric fit of the distance function (Lukacs,
  Martin and Marshall 1998, "Faithful least-squares fitting of spheres, cylinders, cones and tori for
  reliable segmentation", ECCV).

``Primitive.rms`` is the root-mean-square orthogonal distance of the fitted points.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares, minimize_scalar
from scipy.spatial import cKDTree

from surfcheck.errors import InputError

KINDS = ("plane", "cylinder", "sphere", "cone", "torus")
_MAX_REFINE_POINTS = 800  # refinement runs on a fixed random subset of large point sets


@dataclass(frozen=True, eq=False)
class Primitive:
    """A fitted analytic surface.

    ``point``: plane: the centroid; sphere: the centre; cylinder: a point on the axis; cone: the apex.
    ``axis``: plane: unit normal; cylinder and cone: unit axis (cone: pointing into the opening);
    sphere: zeros; torus: the centre and the unit axis. ``radius``: sphere, cylinder and torus tube
    (minor) radius. ``major``: torus major radius. ``half_angle``: cone half-angle (radians).
    """

    kind: str
    point: np.ndarray
    axis: np.ndarray
    radius: float = 0.0
    half_angle: float = 0.0
    major: float = 0.0
    rms: float = float("nan")
    n_points: int = 0

    def signed_distance(self, P: np.ndarray) -> np.ndarray:
        """Orthogonal signed distance of points (n,3) to the surface (positive outside / along the normal)."""
        q = np.asarray(P, dtype=np.float64) - self.point
        if self.kind == "plane":
            return q @ self.axis
        if self.kind == "sphere":
            return np.linalg.norm(q, axis=1) - self.radius
        h = q @ self.axis
        rho = np.linalg.norm(q - h[:, None] * self.axis, axis=1)
        if self.kind == "cylinder":
            return rho - self.radius
        if self.kind == "torus":
            return np.hypot(rho - self.major, h) - self.radius
        return rho * np.cos(self.half_angle) - h * np.sin(self.half_angle)

    def normals(self, P: np.ndarray) -> np.ndarray:
        """Unit normal of the surface at the foot point of each point (n,3); sign as in signed_distance."""
        q = np.asarray(P, dtype=np.float64) - self.point
        if self.kind == "plane":
            return np.broadcast_to(self.axis, q.shape).copy()
        if self.kind == "sphere":
            return _unit(q)
        h = q @ self.axis
        radial = _unit(q - h[:, None] * self.axis)
        if self.kind == "cylinder":
            return radial
        if self.kind == "torus":
            return _unit(q - self.major * radial)
        return np.cos(self.half_angle) * radial - np.sin(self.half_angle) * self.axis

    def steepest_directions(self, P: np.ndarray) -> np.ndarray | None:
        """Unit tangent of largest |curvature| at the foot points (n,3); None where every direction
        bends alike (plane, sphere). Cylinder and cone: around the axis; torus: along the tube's
        cross-section circle (its curvature 1/r exceeds the other whenever r < R)."""
        if self.kind in ("plane", "sphere"):
            return None
        around = _unit(np.cross(self.axis, self.normals(P)))
        if self.kind == "torus":
            return _unit(np.cross(self.normals(P), around))
        return around

    def parameters(self) -> dict:
        """The fitted parameters as plain numbers (lengths in part units, angles in degrees)."""
        p, a = [round(float(x), 6) for x in self.point], [round(float(x), 6) for x in self.axis]
        if self.kind == "plane":
            return {"normal": a, "offset": float(self.axis @ self.point)}
        if self.kind == "sphere":
            return {"centre": p, "radius": self.radius}
        if self.kind == "cylinder":
            return {"axis": a, "axis_point": p, "radius": self.radius}
        if self.kind == "torus":
            return {"axis": a, "centre": p, "major_radius": self.major, "minor_radius": self.radius}
        return {"axis": a, "apex": p, "half_angle_deg": float(np.degrees(self.half_angle))}


def _unit(v: np.ndarray) -> np.ndarray:
    n = np.linalg.norm(v, axis=-1, keepdims=True)
    return v / np.where(n > 0, n, 1.0)


def _perpendicular_basis(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two unit vectors completing ``a`` to a right-handed orthonormal frame."""
    helper = np.eye(3)[int(np.argmin(np.abs(a)))]
    e1 = _unit(np.cross(a, helper))
    return e1, np.cross(a, e1)


def _checked(points: np.ndarray, at_least: int) -> np.ndarray:
    P = np.asarray(points, dtype=np.float64)
    if P.ndim != 2 or P.shape[1] != 3 or len(P) < at_least:
        raise InputError(f"a fit needs at least {at_least} points (n, 3); got shape {P.shape}")
    return P


def _subset(P: np.ndarray, *others: np.ndarray):
    """A fixed random subset of at most _MAX_REFINE_POINTS rows (same rows of every array)."""
    if len(P) <= _MAX_REFINE_POINTS:
        return (P, *others)
    rows = np.random.default_rng(0).choice(len(P), _MAX_REFINE_POINTS, replace=False)
    return (P[rows], *(o[rows] for o in others))


def _finish(kind: str, P: np.ndarray, **fields) -> Primitive:
    draft = Primitive(kind, **fields)
    rms = float(np.sqrt(np.mean(draft.signed_distance(P) ** 2)))
    return Primitive(kind, rms=rms, n_points=len(P), **fields)


def estimate_normals(points: np.ndarray, k: int = 12) -> np.ndarray:
    """Unit normals of a point set from the principal axes of each point's k nearest neighbours."""
    P = _checked(points, 3)
    k = min(k, len(P))
    _, idx = cKDTree(P).query(P, k=k)
    Q = P[idx] - P[idx].mean(axis=1, keepdims=True)
    _, vecs = np.linalg.eigh(np.einsum("nki,nkj->nij", Q, Q))
    return vecs[:, :, 0]


def fit_plane(points: np.ndarray) -> Primitive:
    """Total-least-squares plane (Eberly, "Least Squares Fitting of Data", orthogonal regression)."""
    P = _checked(points, 3)
    c = P.mean(axis=0)
    _, _, vt = np.linalg.svd(P - c, full_matrices=False)
    return _finish("plane", P, point=c, axis=vt[2])


def fit_sphere(points: np.ndarray) -> Primitive:
    """Sphere: linear fit of |p|^2 = 2 c.p + d (Kasa 1976), then geometric least squares."""
    P = _checked(points, 4)
    A = np.column_stack([2 * P, np.ones(len(P))])
    sol, *_ = np.linalg.lstsq(A, (P**2).sum(axis=1), rcond=None)
    c0 = sol[:3]
    r0 = float(np.sqrt(max(sol[3] + c0 @ c0, 0.0)))
    S = _subset(P)[0]
    res = least_squares(lambda x: np.linalg.norm(S - x[:3], axis=1) - x[3], np.r_[c0, r0], method="lm")
    return _finish("sphere", P, point=res.x[:3], axis=np.zeros(3), radius=float(abs(res.x[3])))


def fit_circle_2d(points: np.ndarray) -> tuple[np.ndarray, float, float]:
    """Circle through 2-D points: Kasa's linear fit, then geometric least squares.

    Returns (centre (2,), radius, rms orthogonal distance).
    """
    Q = np.asarray(points, dtype=np.float64)
    if Q.ndim != 2 or Q.shape[1] != 2 or len(Q) < 3:
        raise InputError(f"a circle fit needs at least 3 points (n, 2); got shape {Q.shape}")
    A = np.column_stack([2 * Q, np.ones(len(Q))])
    sol, *_ = np.linalg.lstsq(A, (Q**2).sum(axis=1), rcond=None)
    c0 = sol[:2]
    r0 = float(np.sqrt(max(sol[2] + c0 @ c0, 0.0)))
    res = least_squares(lambda x: np.linalg.norm(Q - x[:2], axis=1) - x[2], np.r_[c0, r0], method="lm")
    rms = float(np.sqrt(np.mean(res.fun**2)))
    return res.x[:2], float(abs(res.x[2])), rms


def _circle_in_plane(P: np.ndarray, a: np.ndarray) -> tuple[np.ndarray, float]:
    """Axis point and radius of the circle fitted to P projected along the unit axis ``a``."""
    e1, e2 = _perpendicular_basis(a)
    centre, radius, _ = fit_circle_2d(np.column_stack([P @ e1, P @ e2]))
    return centre[0] * e1 + centre[1] * e2 + (P @ a).mean() * a, radius


def _cylinder_distance(rho, h, shape):
    (r,) = shape
    return rho - r, np.ones_like(rho), np.zeros_like(h), -np.ones((len(rho), 1))


def _cone_distance(rho, h, shape):
    (alpha,) = shape
    ca, sa = np.cos(alpha), np.sin(alpha)
    return rho * ca - h * sa, np.full_like(rho, ca), np.full_like(h, -sa), (-rho * sa - h * ca)[:, None]


def _torus_distance(rho, h, shape):
    major, r = shape
    D = np.maximum(np.hypot(rho - major, h), 1e-300)
    return D - r, (rho - major) / D, h / D, np.column_stack([-(rho - major) / D, -np.ones_like(rho)])


def _refine_axial(S, a0, c0, shape0, distance, free_centre: int):
    """Geometric least squares of a surface of revolution about an axis, with an analytic Jacobian.

    ``distance(rho, h, shape)`` gives the signed distance of points at radial distance rho and axial
    height h and its derivatives in rho, h and the shape parameters. The axis is a0 tilted by two
    parameters; the centre moves in 2 (perpendicular to a0, for a cylinder) or 3 directions.
    Returns (axis, centre, shape parameters, rms over S).
    """
    e1, e2 = _perpendicular_basis(a0)
    move = np.column_stack([e1, e2]) if free_centre == 2 else np.eye(3)
    k = move.shape[1]

    def unpack(x):
        b = a0 + x[0] * e1 + x[1] * e2
        return b / np.linalg.norm(b), c0 + move @ x[2 : 2 + k], x[2 + k :], np.linalg.norm(b)

    def geometry(x):
        a, c, shape, nb = unpack(x)
        q = S - c
        h = q @ a
        w = q - np.outer(h, a)
        rho = np.linalg.norm(w, axis=1)
        return a, q, h, w / np.maximum(rho, 1e-300)[:, None], rho, shape, nb

    def residual(x):
        _, _, h, _, rho, shape, _ = geometry(x)
        return distance(rho, h, shape)[0]

    def jacobian(x):
        a, q, h, w_hat, rho, shape, nb = geometry(x)
        _, d_rho, d_h, d_shape = distance(rho, h, shape)
        d_c = -d_rho[:, None] * w_hat - d_h[:, None] * a
        d_a = -(d_rho * h)[:, None] * w_hat + d_h[:, None] * q
        tilt = (np.eye(3) - np.outer(a, a)) @ np.column_stack([e1, e2]) / nb
        return np.hstack([d_a @ tilt, d_c @ move, d_shape])

    x0 = np.concatenate([[0.0, 0.0], np.zeros(k), shape0])
    res = least_squares(residual, x0, jac=jacobian, method="lm", max_nfev=60)
    a, c, shape, _ = unpack(res.x)
    return a, c, shape, float(np.sqrt(np.mean(res.fun**2)))


def fit_cylinder(points: np.ndarray, normals: np.ndarray | None = None) -> Primitive:
    """Cylinder (Lukacs, Martin and Marshall 1998): axis start from the normals, then geometric fit.

    The axis start is the direction least aligned with the normals (smallest eigenvector of sum n n^T).
    If that refinement leaves a residual above 5 % of the radius, the principal axes of the points are
    tried as starts too and the lowest-residual refinement is kept.
    """
    P = _checked(points, 6)
    N = estimate_normals(P) if normals is None else _unit(np.asarray(normals, dtype=np.float64))
    S, = _subset(P)
    _, vecs = np.linalg.eigh(N.T @ N)
    _, _, pca = np.linalg.svd(P - P.mean(axis=0), full_matrices=False)
    best = None
    for a0 in (vecs[:, 0], *pca):
        c0, r0 = _circle_in_plane(P, a0)
        a, c, (r,), rms = _refine_axial(S, a0, c0, [r0], _cylinder_distance, free_centre=2)
        if best is None or rms < best[0]:
            best = (rms, a, c, r)
        if best[0] < 0.05 * abs(best[3]):
            break
    _, a, c, r = best
    c = c + ((P - c) @ a).mean() * a  # the axis point nearest the points' centre
    return _finish("cylinder", P, point=c, axis=a, radius=float(abs(r)))


def fit_cone(points: np.ndarray, normals: np.ndarray | None = None) -> Primitive:
    """Cone (Lukacs, Martin and Marshall 1998): axis and angle from the normals, apex from the tangent
    planes, then the geometric fit of (apex, axis, half-angle).

    A cone's unit normals satisfy n.a = -sin(half-angle): their tips lie on a plane whose normal is the
    axis. Every tangent plane n.(x - p) = 0 passes through the apex, a linear least-squares problem.
    """
    P = _checked(points, 7)
    N = estimate_normals(P) if normals is None else _unit(np.asarray(normals, dtype=np.float64))
    tips = fit_plane(N)
    a0 = tips.axis
    apex, *_ = np.linalg.lstsq(N, np.einsum("ij,ij->i", N, P), rcond=None)
    if ((P - apex) @ a0).mean() < 0:
        a0 = -a0
    q = P - apex
    h = q @ a0
    rho = np.linalg.norm(q - np.outer(h, a0), axis=1)
    alpha0 = float(np.arctan2(rho.mean(), max(h.mean(), 1e-12)))
    S, = _subset(P)
    a, c, (alpha,), _ = _refine_axial(S, a0, apex, [alpha0], _cone_distance, free_centre=3)
    return _finish("cone", P, point=c, axis=a, half_angle=float(alpha))


def _spine_misfit(P: np.ndarray, N: np.ndarray, r: float) -> tuple[float, np.ndarray, np.ndarray, float]:
    """How far the tube centres P - r N are from a circle: (rms, centre, axis, circle radius)."""
    spine = P - r * N
    plane = fit_plane(spine)
    e1, e2 = _perpendicular_basis(plane.axis)
    flat = np.column_stack([(spine - plane.point) @ e1, (spine - plane.point) @ e2])
    A = np.column_stack([2 * flat, np.ones(len(flat))])
    sol, *_ = np.linalg.lstsq(A, (flat**2).sum(axis=1), rcond=None)
    R = float(np.sqrt(max(sol[2] + sol[:2] @ sol[:2], 0.0)))
    off = np.linalg.norm(flat - sol[:2], axis=1) - R
    rms = float(np.sqrt(np.mean(off**2) + plane.rms**2))
    return rms, plane.point + sol[0] * e1 + sol[1] * e2, plane.axis, R


def fit_torus(points: np.ndarray, normals: np.ndarray | None = None) -> Primitive:
    """Torus (Lukacs, Martin and Marshall 1998): the tube centres p - r n lie on a circle (the spine)
    for the right tube radius r, found by a bounded scalar search; then the geometric fit of (centre,
    axis, major radius, tube radius) to the distance sqrt((rho - R)^2 + h^2) - r.
    """
    P = _checked(points, 8)
    N = estimate_normals(P) if normals is None else _unit(np.asarray(normals, dtype=np.float64))
    S, NS = _subset(P, N)
    extent = float(np.linalg.norm(S.max(axis=0) - S.min(axis=0)))
    best = None
    for sign in (1.0, -1.0):
        found = minimize_scalar(lambda r: _spine_misfit(S, NS, sign * r)[0], bounds=(1e-3 * extent, 2 * extent),
                                method="bounded", options={"xatol": 1e-4 * extent})
        if best is None or found.fun < best[0]:
            best = (found.fun, sign * found.x)
    r0 = best[1]
    _, c0, a0, R0 = _spine_misfit(S, NS, r0)
    a, c, (R, r), _ = _refine_axial(S, a0, c0, [R0, abs(r0)], _torus_distance, free_centre=3)
    return _finish("torus", P, point=c, axis=a, radius=float(abs(r)), major=float(R))


_FITTERS = {
    "plane": lambda P, N: fit_plane(P),
    "sphere": lambda P, N: fit_sphere(P),
    "cylinder": fit_cylinder,
    "cone": fit_cone,
    "torus": fit_torus,
}


def fit_primitive(kind: str, points: np.ndarray, normals: np.ndarray | None = None) -> Primitive:
    """Fit one kind of primitive ("plane", "cylinder", "sphere", "cone" or "torus")."""
    if kind not in _FITTERS:
        raise InputError(f"unknown primitive kind {kind!r}; choose one of {', '.join(KINDS)}")
    return _FITTERS[kind](points, normals)


def fit_simplest(
    points: np.ndarray,
    normals: np.ndarray | None,
    tolerance: float,
    kinds: tuple[str, ...] = KINDS,
    good_enough: float | None = None,
) -> Primitive:
    """The simplest primitive (in the order of ``kinds``) whose rms is within ``tolerance`` of the best.

    Simpler kinds win ties so that a plane is not reported as a huge cylinder or a cone as a cylinder
    unless the data say so by more than ``tolerance`` (an rms distance in part units). A kind whose rms
    is already ``good_enough`` is returned at once without trying the more complex ones.
    """
    fits = []
    for kind in kinds:
        try:
            fit = fit_primitive(kind, points, normals)
        except (np.linalg.LinAlgError, ValueError, InputError):
            continue
        if not np.isfinite(fit.rms):
            continue
        if good_enough is not None and fit.rms <= good_enough:
            return fit
        fits.append(fit)
    if not fits:
        raise InputError("no primitive could be fitted to these points")
    best = min(f.rms for f in fits)
    return next(f for f in fits if f.rms <= best + tolerance)
