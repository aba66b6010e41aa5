"""Per-vertex shape over a metric neighbourhood for segmentation: smoothed normal, principal curvatures
and directions, the fit residual and the normal's standard error.

A degree-2 jet (height function over the tangent plane) is fitted to the vertices within ``radius`` of
each vertex (Cazals and Pouget 2003, "Estimating differential quantities using polynomial fitting of
osculating jets"), all vertices at once with batched normal equations. The residual gives the noise
level; the least-squares covariance of the slope terms gives each normal's standard error. Curvature
sign: positive where the surface bends away from its outward normal; k1 >= k2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import trimesh
from scipy.spatial import cKDTree

MIN_NEIGHBOURS = 10  # a degree-2 jet has 6 coefficients; fewer than 10 samples leave its residual unsure


@dataclass(frozen=True, eq=False)
class LocalShape:
    """Per-vertex fields: normals (n,3), k1, k2 (n,), d1, d2 (n,3), rms (n,) jet residual, slope_sd (n,)
    standard error of the normal (radians) per unit noise, count (n,) neighbours used."""

    normals: np.ndarray
    k1: np.ndarray
    k2: np.ndarray
    d1: np.ndarray
    d2: np.ndarray
    rms: np.ndarray
    slope_sd: np.ndarray
    count: np.ndarray


def _neighbours(V: np.ndarray, radius: float, area_per_vertex: float) -> tuple[np.ndarray, np.ndarray]:
    """(n,k) indices of the vertices within ``radius`` (at least MIN_NEIGHBOURS nearest), with a mask."""
    expected = np.pi * radius**2 / max(area_per_vertex, 1e-300)
    k = int(np.clip(2.0 * expected, MIN_NEIGHBOURS + 2, 96))
    k = min(k, len(V))
    dist, idx = cKDTree(V).query(V, k=k)
    mask = dist <= radius
    mask[:, : min(MIN_NEIGHBOURS, k)] = True
    return idx, mask


def local_shape(V: np.ndarray, F: np.ndarray, radius: float) -> LocalShape:
    """Jet fits of degree 2 over the ball of ``radius`` around every vertex (see module docstring)."""
    mesh = trimesh.Trimesh(V, F, process=False)
    outward = mesh.vertex_normals  # angle-weighted (Thurmer and Wuthrich 1998), orients the fits
    idx, mask = _neighbours(V, radius, mesh.area / len(V))
    w = mask.astype(np.float64)
    Q = V[idx] - V[:, None, :]
    cov = np.einsum("nk,nki,nkj->nij", w, Q - _wmean(Q, w), Q - _wmean(Q, w))
    _, vecs = np.linalg.eigh(cov)
    n0 = vecs[:, :, 0] * np.sign(np.einsum("ni,ni->n", vecs[:, :, 0], outward) + 1e-300)[:, None]
    e1 = vecs[:, :, 2]
    e2 = np.cross(n0, e1)
    u, v, h = (np.einsum("nki,ni->nk", Q, e) for e in (e1, e2, n0))
    A = np.stack([np.ones_like(u), u, v, u * u, u * v, v * v], axis=2) * w[:, :, None]
    AtA = np.einsum("nki,nkj->nij", A, A) + 1e-12 * np.eye(6) * radius**4
    coef = np.linalg.solve(AtA, np.einsum("nki,nk->ni", A, h * w)[..., None])[..., 0]
    count = w.sum(axis=1)
    resid = (h - np.einsum("nki,ni->nk", A, coef)) * w
    rms = np.sqrt((resid**2).sum(axis=1) / np.maximum(count - 6, 1))
    cov_coef = np.linalg.inv(AtA)
    slope_sd = np.sqrt(cov_coef[:, 1, 1] + cov_coef[:, 2, 2])
    g1, g2 = coef[:, 1], coef[:, 2]
    normals = _unit(n0 - g1[:, None] * e1 - g2[:, None] * e2)
    # shape operator of the graph h(u, v): I^-1 II with I = 1 + grad grad^T, II = Hessian / |(1, grad)|
    first = np.stack([np.stack([1 + g1 * g1, g1 * g2], -1), np.stack([g1 * g2, 1 + g2 * g2], -1)], -2)
    hess = np.stack([np.stack([2 * coef[:, 3], coef[:, 4]], -1), np.stack([coef[:, 4], 2 * coef[:, 5]], -1)], -2)
    second = -hess / np.sqrt(1 + g1 * g1 + g2 * g2)[:, None, None]
    shape = np.linalg.solve(first, second)
    sym = 0.5 * (shape + np.swapaxes(shape, 1, 2))
    vals, dirs = np.linalg.eigh(sym)
    d1 = _unit(dirs[:, 0, 1, None] * e1 + dirs[:, 1, 1, None] * e2)
    d2 = _unit(dirs[:, 0, 0, None] * e1 + dirs[:, 1, 0, None] * e2)
    return LocalShape(normals, vals[:, 1], vals[:, 0], d1, d2, rms, slope_sd, count)


def _wmean(Q: np.ndarray, w: np.ndarray) -> np.ndarray:
    return (np.einsum("nk,nki->ni", w, Q) / w.sum(axis=1, keepdims=True))[:, None, :]


def _unit(v: np.ndarray) -> np.ndarray:
    n = np.linalg.norm(v, axis=-1, keepdims=True)
    return v / np.where(n > 0, n, 1.0)
