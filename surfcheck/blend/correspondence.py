"""Correspondence of two boundary chains by normalised arc length, with the orientation and start that
minimise the twist (the summed squared length of the rungs joining corresponding points).

Arc-length correspondence with a least-squares alignment of the start is the usual choice for lofting
between contours (Fuchs, Kedem and Uselton, "Optimal surface reconstruction from planar contours",
CACM 1977, use the rung lengths as their cost); here the rungs join points at equal arc-length
fraction, so chains of different length and vertex count correspond.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize_scalar

from surfcheck.errors import InputError
from surfcheck.polyline import cumulative_arc_length

SAMPLES = 256


@dataclass(frozen=True)
class ChainMap:
    """s_B = offset + sign * s_A (modulo 1 on closed chains), both normalised arc length in [0, 1]."""

    sign: int
    offset: float
    closed: bool

    def __call__(self, s: np.ndarray) -> np.ndarray:
        s_b = self.offset + self.sign * np.asarray(s, dtype=np.float64)
        return np.mod(s_b, 1.0) if self.closed else s_b

    def inverse(self, s_b: np.ndarray) -> np.ndarray:
        s_a = self.sign * (np.asarray(s_b, dtype=np.float64) - self.offset)
        return np.mod(s_a, 1.0) if self.closed else s_a


def arc_parameters(points: np.ndarray, closed: bool) -> np.ndarray:
    """Normalised arc length of each vertex: 0 at the first, 1 at the last (open) or at the return to
    the first (closed)."""
    cumulative = cumulative_arc_length(points, closed)
    if cumulative[-1] <= 0.0:
        raise InputError("a chain has zero length; pick a boundary chain with at least two distinct points")
    s = cumulative / cumulative[-1]
    return s[:-1] if closed else s


def point_at(points: np.ndarray, closed: bool, s: np.ndarray) -> np.ndarray:
    """Points of the polyline at normalised arc length s (linear between vertices)."""
    params = arc_parameters(points, closed)
    pts = points
    if closed:
        params = np.append(params, 1.0)
        pts = np.vstack([points, points[:1]])
        s = np.mod(s, 1.0)
    return np.stack([np.interp(s, params, pts[:, i]) for i in range(3)], axis=-1)


def match_chains(points_a: np.ndarray, closed_a: bool, points_b: np.ndarray, closed_b: bool) -> ChainMap:
    """The arc-length map from chain A to chain B with the least twist."""
    if closed_a != closed_b:
        raise InputError("cannot bridge a closed loop to an open chain; pick two loops or two chains")
    s = (np.arange(SAMPLES) + 0.5) / SAMPLES
    on_a = point_at(points_a, closed_a, s)

    def twist(sign: int, offset: float) -> float:
        mapping = ChainMap(sign, offset, closed_a)
        return float(np.mean(np.sum((point_at(points_b, closed_b, mapping(s)) - on_a) ** 2, axis=1)))

    if not closed_a:
        candidates = [(1, 0.0), (-1, 1.0)]
        sign, offset = min(candidates, key=lambda c: twist(*c))
        return ChainMap(sign, offset, False)
    best = None
    for sign in (1, -1):
        coarse = s - 0.5 / SAMPLES
        costs = [twist(sign, o) for o in coarse]
        start = coarse[int(np.argmin(costs))]
        found = minimize_scalar(lambda o: twist(sign, o), bounds=(start - 1.0 / SAMPLES, start + 1.0 / SAMPLES),
                                method="bounded", options={"xatol": 1e-7})
        if best is None or found.fun < best[0]:
            best = (found.fun, sign, float(np.mod(found.x, 1.0)))
    return ChainMap(best[1], best[2], True)
