"""Test surfaces of our own with a gap between them, as meshes with their boundary chains and the exact
cross-boundary section jets (tangent, normal, curvature, curvature rate) at the boundary.

Each side is a sheet X(a, w): a runs along the boundary, w across it. Side A covers w <= 0 and side B
covers w >= gap; both are triangulated with the same (a, w) orientation (normal along X_a x X_w) so
their normals agree across the gap. Every sheet is an extrusion along x (a = x) or a surface of
revolution about z (a = angle), so its w-curves are normal sections of the boundary and their jets are
the same all along it. Exact values: a line has curvature 0, a circle of radius R curvature 1/R; the
graph z = f(y) has kappa = f'' / (1 + f'^2)^(3/2) (do Carmo, Differential Geometry of Curves and
Surfaces, 1976, sec. 1-5), its rate d kappa / ds differentiated exactly by sympy.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp
from scipy.spatial.transform import Rotation

from surfcheck.blend import BlendResult
from surfcheck.part import Part
from surfcheck.seams import Curve
from surfcheck.tolerances import load_profile


@dataclass(frozen=True)
class Section:
    """Exact jet of a sheet's w-curve at the boundary: unit tangent d (increasing w), unit normal n,
    signed curvature about n and its arc-length rate, in the sheet's own (unrotated) frame."""

    d: np.ndarray
    n: np.ndarray
    curvature: float
    rate: float


class Profile:
    """An extrusion along x of the planar curve (y(w), z(w)); sympy gives its exact jet."""

    def __init__(self, y: sp.Expr, z: sp.Expr, w: sp.Symbol, w_edge: float):
        self._yz = sp.lambdify(w, [y, z], "numpy")
        dy, dz = sp.diff(y, w), sp.diff(z, w)
        speed = sp.sqrt(dy**2 + dz**2)
        kappa = (dy * sp.diff(z, w, 2) - dz * sp.diff(y, w, 2)) / speed**3
        values = [float(e.subs(w, w_edge)) for e in (dy, dz, speed, kappa, sp.diff(kappa, w) / speed)]
        d = np.array([0.0, values[0], values[1]]) / values[2]
        self.section = Section(d, np.array([0.0, -d[2], d[1]]), values[3], values[4])

    def points(self, a: np.ndarray, w: np.ndarray) -> np.ndarray:
        y, z = self._yz(w)
        return np.stack([a, y + 0 * w, z + 0 * w], axis=-1)

    def section_at(self, p: np.ndarray) -> Section:
        return self.section


class Revolved:
    """A cylinder of ``radius`` about z; a is the angle, w the height shifted by ``z_shift``."""

    def __init__(self, radius: float, z_shift: float):
        self.radius, self.z_shift = radius, z_shift

    def points(self, a: np.ndarray, w: np.ndarray) -> np.ndarray:
        return np.stack([self.radius * np.cos(a), self.radius * np.sin(a), w + self.z_shift], axis=-1)

    def section_at(self, p: np.ndarray) -> Section:
        radial = np.array([p[0], p[1], 0.0]) / np.hypot(p[0], p[1])
        return Section(np.array([0.0, 0.0, 1.0]), radial, 0.0, 0.0)


W = sp.Symbol("w", real=True)


def plane_a() -> Profile:
    """z = 0, side A (w <= 0), boundary on the x axis."""
    return Profile(W, sp.Integer(0), W, 0.0)


def corner_b(turn_deg: float, leg: float, gap: float, radius: float | None = None) -> Profile:
    """Side B leaving the point ``leg`` beyond the corner (0, leg, 0) of side A's plane at ``turn_deg``
    from A's cross direction; straight (radius None) or bending on along a circle of ``radius``."""
    theta = sp.pi * sp.Rational(turn_deg) / 180
    py, pz = leg + leg * sp.cos(theta), leg * sp.sin(theta)
    s = W - gap
    if radius is None:
        return Profile(py + s * sp.cos(theta), pz + s * sp.sin(theta), W, gap)
    phi = theta + s / radius
    cy, cz = py - radius * sp.sin(theta), pz + radius * sp.cos(theta)
    return Profile(cy + radius * sp.sin(phi), cz - radius * sp.cos(phi), W, gap)


def parabola_b(y0: float, z0: float, q: float, shift: float, gap: float) -> Profile:
    """z = z0 + q ((y - y0 + shift)^2 - shift^2): its curvature changes along the cross direction."""
    y = W - gap
    return Profile(y0 + y, z0 + q * ((y + shift) ** 2 - shift**2), W, gap)


def offset_b(height: float, gap: float) -> Profile:
    """The plane z = height beyond y = gap, parallel to side A's: an offset step."""
    return Profile(W, sp.Float(height), W, gap)


@dataclass(frozen=True)
class Side:
    part: Part
    chain: Curve
    sheet: object
    rotation: Rotation

    def section_at(self, p_world: np.ndarray) -> Section:
        """The exact section jet at a boundary point, rotated into the mesh's frame."""
        s = self.sheet.section_at(self.rotation.inv().apply(p_world))
        return Section(self.rotation.apply(s.d), self.rotation.apply(s.n), s.curvature, s.rate)


def sheet_side(sheet, a_values: np.ndarray, w_values: np.ndarray, closed: bool, name: str, edge_row: int,
               rotation: Rotation) -> Side:
    """Triangulate a sheet on the (a, w) grid; the chain is the row w = w_values[edge_row]."""
    A, Wg = np.meshgrid(a_values, w_values, indexing="ij")
    V = rotation.apply(sheet.points(A, Wg).reshape(-1, 3))
    na, nw = len(a_values), len(w_values)
    i, j = np.meshgrid(np.arange(na if closed else na - 1), np.arange(nw - 1), indexing="ij")
    i1 = (i + 1) % na
    a, b, c, d = i * nw + j, i1 * nw + j, i1 * nw + j + 1, i * nw + j + 1
    F = np.concatenate([np.stack([a, b, c], -1).reshape(-1, 3), np.stack([a, c, d], -1).reshape(-1, 3)])
    part = Part(V, F, np.zeros(len(F), dtype=np.int64), (name,), "mm", f"{name}.obj")
    ids = np.arange(na) * nw + edge_row
    chain = Curve(f"{name}-edge", "loop" if closed else "chain", ids, V[ids], closed, (name,))
    return Side(part, chain, sheet, rotation)


def pair(sheet_a, sheet_b, gap: float, n_a: int = 61, n_b: int = 73, closed: bool = False,
         length: float = 20.0, width: float = 6.0, rows: int = 19, seed: int | None = None):
    """Side A on w in [-width, 0] and side B on w in [gap, gap + width], with n_a and n_b vertices
    along their chains, rotated at random when seeded. Closed sides start at different angles."""
    rotation = Rotation.random(random_state=seed) if seed is not None else Rotation.identity()
    if closed:
        a_a = np.arange(n_a) * 2 * np.pi / n_a
        a_b = (np.arange(n_b) + 0.37) * 2 * np.pi / n_b
    else:
        a_a, a_b = np.linspace(0.0, length, n_a), np.linspace(0.0, length, n_b)
    side_a = sheet_side(sheet_a, a_a, np.linspace(-width, 0.0, rows), closed, "side_a", rows - 1, rotation)
    side_b = sheet_side(sheet_b, a_b, np.linspace(gap, gap + width, rows), closed, "side_b", 0, rotation)
    return side_a, side_b


CASES = {
    # name: (side A sheet, side B sheet, gap, closed)
    "planes at 40 degrees": (plane_a(), corner_b(40, 5.0, 10.0), 10.0, False),
    "plane and cylinder": (plane_a(), corner_b(30, 5.0, 10.0, radius=12.0), 10.0, False),
    "plane and parabolic sheet": (plane_a(), parabola_b(8.0, 1.0, 0.06, 3.0, 8.0), 8.0, False),
    "cylinders of radius 5 and 7": (Revolved(5.0, 0.0), Revolved(7.0, 0.0), 10.0, True),
}

# Blends wide enough for the mesh grader: each leg some 45 chain edges, so that one-sided fits over a
# few edge lengths see the patch's curvature change as a polynomial ramp.
GRADED_CASES = {
    "planes at 40 degrees": (plane_a(), corner_b(40, 15.0, 30.0), 30.0, False),
    "plane and cylinder": (plane_a(), corner_b(30, 15.0, 30.0, radius=36.0), 30.0, False),
    "plane and parabolic sheet": (plane_a(), parabola_b(24.0, 3.0, 0.02, 9.0, 24.0), 24.0, False),
    "cylinders of radius 5 and 7": (Revolved(5.0, 0.0), Revolved(7.0, 0.0), 30.0, True),
}


PROFILE = load_profile("general")  # the default profile's figures (common practice, from memory)


def section_jet(derivatives: np.ndarray, d: np.ndarray, n: np.ndarray):
    """Tangent angle off the plane (d, n)'s tangent line (degrees), signed curvature about n and its
    arc-length rate, of a curve given by its first three derivatives (3, 3), in the plane (d, n)."""
    x1, x2, x3 = derivatives @ d
    z1, z2, z3 = derivatives @ n
    speed2 = x1 * x1 + z1 * z1
    cross = x1 * z2 - z1 * x2
    kappa = cross / speed2**1.5
    rate = ((x1 * z3 - z1 * x3) * speed2 - 3.0 * cross * (x1 * x2 + z1 * z2)) / speed2**3
    angle = np.degrees(np.arcsin(abs(z1) / np.sqrt(speed2)))
    return angle, kappa, rate


def achieved_order(blend: BlendResult, side_a, side_b) -> tuple[int, int]:
    """The highest k <= 3 with G1..Gk within the general profile at every column, for each seam."""
    s = blend.surface
    grades = []
    for t, side, ext in ((0.0, side_a, s.side_a), (1.0, side_b, s.side_b)):
        derivatives = np.stack([s.derivative(np.array(t), n) for n in (1, 2, 3)], axis=1)  # (columns, 3, 3)
        worst = 3
        for c in range(len(ext.p)):
            exact = side.section_at(ext.p[c])
            angle, kappa, rate = section_jet(derivatives[c], exact.d, exact.n)
            g2_tol = max(PROFILE.g2_abs, PROFILE.g2_rel * max(abs(kappa), abs(exact.curvature)))
            g3_tol = max(PROFILE.g3_abs, PROFILE.g3_rel * max(abs(rate), abs(exact.rate)))
            holds = [angle <= PROFILE.g1_angle, abs(kappa - exact.curvature) <= g2_tol,
                     abs(rate - exact.rate) <= g3_tol]
            worst = min(worst, holds.index(False) if False in holds else 3)
        grades.append(worst)
    return grades[0], grades[1]
