"""Least-squares fits of planes, spheres, cylinders, cones and 2-D circles to point sets.

Each fit starts from an algebraic (linear) estimate and, where the algebraic estimate is not already the
geometric optimum, refines the orthogonal distances with ``scipy.optimize.least_squares``:

- plane: total least squares through the centroid, the normal is the smallest singular vector
  (Eberly, "Least Squares Fitting of Data by Linear or Quadratic Structures", Geometric Tools);
- sphere and circle: the linear fit of |p|^2 = 2 c.p + (r^2 - |c|^2) (Kasa 1976, "A circle fitting
  procedure and its error analysis"; Eberly, "Least Squares Fitting of Data"), then the geometric fit;
- cylinder and cone: the axis from the normals (a cylinder's normals are perpendicular to its axis, a
  cone's make a constant angle with it; every tangent plane of a cone passes through its apex), then the
  geometric fit of the distance function (Lukacs, Martin and Marshall 1998, "Faithful least-squares
  fitting of spheres, cylinders, cones and tori for reliable segmentation", ECCV).

``Primitive.rms`` is the root-mean-square orthogonal distance of the fitted points.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares
from scipy.spatial import cKDTree

from surfcheck.errors import InputError

KINDS = ("plane", "cylinder", "sphere", "cone")
_MAX_REFINE_POINTS = 1500  # refinement runs on a fixed random subset of large point sets


@dataclass(frozen=True, eq=False)
class Primitive:
    """A fitted analytic surface.

    ``point``: plane: the centroid; sphere: the centre; cylinder: a point on the axis; cone: the apex.
    ``axis``: plane: unit normal; cylinder and cone: unit axis (cone: pointing into the opening);
    sphere: zeros. ``radius``: sphere and cylinder radius. ``half_angle``: cone half-angle (radians).
    """

    kind: str
    point: np.ndarray
    axis: np.ndarray
    radius: float = 0.0
    half_angle: float = 0.0
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
        return np.cos(self.half_angle) * radial - np.sin(self.half_angle) * self.axis

    def parameters(self) -> dict:
        """The fitted parameters as plain numbers (lengths in part units, angles in degrees)."""
        p, a = [round(float(x), 6) for x in self.point], [round(float(x), 6) for x in self.axis]
        if self.kind == "plane":
            return {"normal": a, "offset": float(self.axis @ self.point)}
        if self.kind == "sphere":
            return {"centre": p, "radius": self.radius}
        if self.kind == "cylinder":
            return {"axis": a, "axis_point": p, "radius": self.radius}
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


def _cylinder_residual(S: np.ndarray, a0: np.ndarray, c0: np.ndarray):
    e1, e2 = _perpendicular_basis(a0)

    def unpack(x):
        a = _unit(a0 + x[0] * e1 + x[1] * e2)
        return a, c0 + x[2] * e1 + x[3] * e2, x[4]

    def residual(x):
        a, c, r = unpack(x)
        q = S - c
        return np.linalg.norm(q - np.outer(q @ a, a), axis=1) - r

    return residual, unpack


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
        residual, unpack = _cylinder_residual(S, a0, c0)
        res = least_squares(residual, np.array([0, 0, 0, 0, r0]), method="lm", max_nfev=400)
        if best is None or res.cost < best[0]:
            best = (res.cost, unpack(res.x))
        if np.sqrt(2 * best[0] / len(S)) < 0.05 * abs(best[1][2]):
            break
    a, c, r = best[1]
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
    e1, e2 = _perpendicular_basis(a0)
    S, = _subset(P)

    def unpack(x):
        return _unit(a0 + x[0] * e1 + x[1] * e2), apex + x[2:5], x[5]

    def residual(x):
        a, c, alpha = unpack(x)
        s = S - c
        hh = s @ a
        rr = np.linalg.norm(s - np.outer(hh, a), axis=1)
        return rr * np.cos(alpha) - hh * np.sin(alpha)

    res = least_squares(residual, np.array([0, 0, 0, 0, 0, alpha0]), method="lm", max_nfev=150)
    a, c, alpha = unpack(res.x)
    return _finish("cone", P, point=c, axis=a, half_angle=float(alpha))


_FITTERS = {
    "plane": lambda P, N: fit_plane(P),
    "sphere": lambda P, N: fit_sphere(P),
    "cylinder": fit_cylinder,
    "cone": fit_cone,
}


def fit_primitive(kind: str, points: np.ndarray, normals: np.ndarray | None = None) -> Primitive:
    """Fit one kind of primitive ("plane", "cylinder", "sphere" or "cone")."""
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
