"""Boundary loops, boundary chains and group seams of a Part, as ordered polylines with stable ids."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class Curve:
    """An ordered polyline on a part: a boundary loop, a boundary chain or a seam between two groups.

    ``vertices`` are part vertex indices in order (for a seam between separate shells, those of the
    first group's side); ``points`` their positions. ``groups`` names the group(s) beside it: one for a
    loop or chain, the two groups (A, B) for a seam.
    """

    id: str
    kind: str  # "loop", "chain" or "seam"
    vertices: np.ndarray
    points: np.ndarray
    closed: bool
    groups: tuple[str, ...]

    @property
    def length(self) -> float:
        pts = np.vstack([self.points, self.points[:1]]) if self.closed else self.points
        return float(np.linalg.norm(np.diff(pts, axis=0), axis=1).sum())
