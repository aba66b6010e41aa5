"""Analytic test surfaces as triangle meshes, with their exact normals and principal curvatures.

Curvatures of the sphere, cylinder and torus are textbook values (do Carmo, Differential Geometry of
Curves and Surfaces, 1976, sections 3-2 and 3-3). All meshes are wound outward.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import trimesh


@dataclass(frozen=True)
class Analytic:
    """A mesh of a known surface: vertices, faces, exact unit normals and principal curvatures k1 >= k2."""

    V: np.ndarray
    F: np.ndarray
    normals: np.ndarray
    k1: np.ndarray
    k2: np.ndarray

    def with_noise(self, sigma: float, seed: int = 7) -> "Analytic":
        """Vertices moved along the exact normal by Gaussian noise of standard deviation ``sigma``."""
        shift = np.random.default_rng(seed).normal(0.0, sigma, len(self.V))
        return Analytic(self.V + shift[:, None] * self.normals, self.F, self.normals, self.k1, self.k2)


def grid_faces(nu: int, nv: int, wrap_u: bool, wrap_v: bool) -> np.ndarray:
    """Two triangles per cell of an nu x nv vertex grid (index i * nv + j), optionally periodic."""
    cu, cv = (nu if wrap_u else nu - 1), (nv if wrap_v else nv - 1)
    i, j = np.meshgrid(np.arange(cu), np.arange(cv), indexing="ij")
    i, j = i.ravel(), j.ravel()
    a, b = i * nv + j, ((i + 1) % nu) * nv + j
    c, d = ((i + 1) % nu) * nv + (j + 1) % nv, i * nv + (j + 1) % nv
    return np.concatenate([np.stack([a, b, c], 1), np.stack([a, c, d], 1)]).astype(np.int64)


def _parameters(nu: int, nv: int, jitter: float, warp: float, seed: int, v_closed: bool):
    """Grid parameters in [0, 2 pi) x [0, 2 pi) (or [0, 1] for v), jittered and warped in u."""
    rng = np.random.default_rng(seed)
    u = np.linspace(0.0, 2.0 * np.pi, nu, endpoint=False)
    v = np.linspace(0.0, 2.0 * np.pi, nv, endpoint=False) if v_closed else np.linspace(0.0, 1.0, nv)
    U, W = np.meshgrid(u, v, indexing="ij")
    du, dv = 2.0 * np.pi / nu, (v[1] - v[0])
    U = U + jitter * du * rng.uniform(-1.0, 1.0, U.shape)
    inner = slice(None) if v_closed else slice(1, -1)  # open edges stay straight
    W[:, inner] += jitter * dv * rng.uniform(-1.0, 1.0, W[:, inner].shape)
    # warp: triangles ~3x longer on one side than the other (mixed sizes) for warp = 0.5
    return (U + warp * np.sin(U)).ravel(), W.ravel()


def torus(
    R: float, r: float, nu: int, nv: int, jitter: float = 0.0, warp: float = 0.0, seed: int = 1
) -> Analytic:
    """Torus of centre radius R and tube radius r. k1 = 1/r, k2 = cos v / (R + r cos v) (do Carmo 3-3)."""
    u, v = _parameters(nu, nv, jitter, warp, seed, v_closed=True)
    normal = np.stack([np.cos(v) * np.cos(u), np.cos(v) * np.sin(u), np.sin(v)], axis=1)
    centre = np.stack([R * np.cos(u), R * np.sin(u), np.zeros_like(u)], axis=1)
    k2 = np.cos(v) / (R + r * np.cos(v))
    return Analytic(centre + r * normal, grid_faces(nu, nv, True, True), normal, np.full_like(u, 1.0 / r), k2)


def cylinder(R: float, length: float, nu: int, nv: int, jitter: float = 0.0, seed: int = 1) -> Analytic:
    """Open cylinder of radius R around z (two boundary circles). k1 = 1/R, k2 = 0."""
    u, t = _parameters(nu, nv, jitter, 0.0, seed, v_closed=False)
    normal = np.stack([np.cos(u), np.sin(u), np.zeros_like(u)], axis=1)
    V = R * normal + np.outer(t * length, [0.0, 0.0, 1.0])
    return Analytic(V, grid_faces(nu, nv, True, False), normal, np.full_like(u, 1.0 / R), np.zeros_like(u))


def sphere(R: float, subdivisions: int, jitter: float = 0.0, seed: int = 1) -> Analytic:
    """Icosphere of radius R; ``jitter`` moves vertices along the surface by that fraction of an edge."""
    mesh = trimesh.creation.icosphere(subdivisions=subdivisions, radius=1.0)
    V = np.array(mesh.vertices, dtype=np.float64)
    if jitter:
        edge = float(mesh.edges_unique_length.mean())
        V = V + jitter * edge * np.random.default_rng(seed).uniform(-1.0, 1.0, V.shape)
    normal = V / np.linalg.norm(V, axis=1, keepdims=True)
    k = np.full(len(V), 1.0 / R)
    return Analytic(R * normal, np.array(mesh.faces, dtype=np.int64), normal, k, k)


def extruded_profile(curvature, length: float, width: float, n_s: int, n_w: int, oversample: int = 40):
    """A plane curve of prescribed curvature ``curvature(s)`` over arc length [0, length], extruded along z.

    The curve is integrated from its curvature (theta' = kappa, x' = cos theta, y' = sin theta, the
    natural equation of a plane curve). Faces are wound so that the normal is T x z: a positive
    curvature bends away from the normal (outward, as on a convex part). Returns V, F and the arc
    length s of each vertex.
    """
    fine = np.linspace(0.0, length, (n_s - 1) * oversample + 1)
    turn = _cumulative(curvature(fine), fine)
    x, y = _cumulative(np.cos(turn), fine), _cumulative(np.sin(turn), fine)
    s = fine[::oversample]
    z = np.linspace(0.0, width, n_w)
    V = np.stack(
        [np.repeat(x[::oversample], n_w), np.repeat(y[::oversample], n_w), np.tile(z, n_s)], axis=1
    )
    return V, grid_faces(n_s, n_w, False, False), np.repeat(s, n_w)


def _cumulative(f: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Trapezoidal running integral of f over s, starting at 0."""
    return np.concatenate([[0.0], np.cumsum(0.5 * (f[1:] + f[:-1]) * np.diff(s))])


def smooth_step(t: np.ndarray) -> np.ndarray:
    """Cubic Hermite smooth step 3t^2 - 2t^3 on [0, 1], clamped: C^1 at both ends."""
    t = np.clip(t, 0.0, 1.0)
    return t * t * (3.0 - 2.0 * t)


def random_rotation(seed: int) -> np.ndarray:
    """A random proper rotation matrix (QR of a Gaussian matrix, sign-fixed)."""
    q, r = np.linalg.qr(np.random.default_rng(seed).normal(size=(3, 3)))
    q = q * np.sign(np.diag(r))
    return q if np.linalg.det(q) > 0 else -q
