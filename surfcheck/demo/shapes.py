"""Synthetic parts of known continuity class: planar profiles built from a prescribed curvature along
arc length, extruded or revolved into triangle meshes with one face group per profile piece.

A profile is a chain of pieces, each giving the curvature kappa(u) for u in [0, length] of its own:
a line (0), a circular arc (1/r), a clothoid or Euler spiral (kappa linear in u; the transition curve
of road and rail design), a smooth-step ramp (kappa = k0 + (k1 - k0) phi(u / length) with phi a smooth
step: the Hermite smoothstep polynomial of degree 2k + 1, C^k, or the C-infinity step
phi(x) = psi(x) / (psi(x) + psi(1 - x)), psi(x) = exp(-1/x)), and a sharp corner (a heading jump, no
length). The heading is the integral of the curvature (analytic for every piece but the C-infinity
ramp) and the position the integral of (cos, sin) of the heading (analytic for lines and arcs,
composite Gauss-Legendre quadrature otherwise), so the sampled vertices lie on the exact curve to
rounding. Positive curvature turns the profile to the left; the surface's outward normal is the
profile's right-hand normal, so a left-turning piece is convex (positive curvature in surfcheck's sign
convention).

Where two pieces meet, the profile is exactly as continuous as their curvatures allow: a corner is G0,
an arc after a line G1, a clothoid after a line or into an arc of its end curvature G2, and a ramp
whose step has phi' = 0 at its ends (Hermite k >= 1, or C-infinity) G3.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from surfcheck.errors import InputError
from surfcheck.blend.steps import hermite_polynomial, smooth_step

_GAUSS_NODES, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(16)
_MAX_TURN_PER_PANEL = 0.02  # radians of heading change per quadrature panel: error at rounding level


@dataclass(frozen=True)
class Piece:
    """One piece of a profile. ``kind`` is "line", "arc", "clothoid", "ramp" or "corner".

    Curvature runs from ``k_start`` to ``k_end`` over ``length``; ``order`` is the ramp's smoothness
    (k of the Hermite C^k step, None for the C-infinity step); ``turn`` is a corner's heading jump in
    radians. Build pieces with line(), arc(), clothoid(), ramp() and corner().
    """

    kind: str
    name: str
    length: float = 0.0
    k_start: float = 0.0
    k_end: float = 0.0
    order: int | None = None
    turn: float = 0.0

    def curvature(self, u: np.ndarray) -> np.ndarray:
        """kappa at local arc length u (array), in 1/unit."""
        u = np.asarray(u, dtype=float)
        if self.kind in ("line", "arc", "corner"):
            return np.full_like(u, self.k_start)
        x = u / self.length
        if self.kind == "clothoid":
            return self.k_start + (self.k_end - self.k_start) * x
        return self.k_start + (self.k_end - self.k_start) * _step(x, self.order)

    def turning(self, u: np.ndarray) -> np.ndarray:
        """Heading change from the piece's start to local arc length u: the integral of kappa."""
        u = np.asarray(u, dtype=float)
        dk = self.k_end - self.k_start
        if self.kind in ("line", "arc", "corner"):
            return self.k_start * u
        if self.kind == "clothoid":
            return self.k_start * u + dk * u * u / (2.0 * self.length)
        if self.order is not None:
            return self.k_start * u + dk * self.length * hermite_polynomial(self.order).integ()(u / self.length)
        return self.k_start * u + dk * _cumulative_integral(lambda v: _step(v / self.length, None), u, self._panels())

    def displacement(self, u: np.ndarray, heading: float) -> np.ndarray:
        """(n, 2) position at local arc length u relative to the piece's start, starting at ``heading``."""
        u = np.asarray(u, dtype=float)
        if self.kind in ("line", "corner") or (self.kind == "arc" and self.k_start == 0.0):
            return np.outer(u, [np.cos(heading), np.sin(heading)])
        if self.kind == "arc":
            k = self.k_start
            end = heading + k * u
            return np.stack([(np.sin(end) - np.sin(heading)) / k, (np.cos(heading) - np.cos(end)) / k], axis=1)
        z = _cumulative_integral(lambda v: np.exp(1j * (heading + self.turning(v))), u, self._panels())
        return np.stack([z.real, z.imag], axis=1)

    def _panels(self) -> int:
        turn = max(abs(self.k_start), abs(self.k_end)) * self.length
        return int(np.clip(np.ceil(turn / _MAX_TURN_PER_PANEL), 32, 20000))


def line(length: float, name: str) -> Piece:
    """A straight piece."""
    return Piece("line", name, _positive(length, "line length"))


def arc(radius: float, name: str, angle_deg: float | None = None, length: float | None = None) -> Piece:
    """A circular arc of radius |radius| (positive turns left, negative right), given its swept angle
    in degrees or its length."""
    if radius == 0 or not np.isfinite(radius):
        raise InputError("arc radius must be a non-zero number")
    if (angle_deg is None) == (length is None):
        raise InputError("give an arc either its angle or its length")
    arc_length = abs(radius) * np.radians(angle_deg) if angle_deg is not None else length
    return Piece("arc", name, _positive(arc_length, "arc length"), 1.0 / radius, 1.0 / radius)


def clothoid(length: float, k_start: float, k_end: float, name: str) -> Piece:
    """An Euler spiral: curvature linear in arc length from k_start to k_end (1/unit)."""
    return Piece("clothoid", name, _positive(length, "clothoid length"), float(k_start), float(k_end))


def ramp(length: float, k_start: float, k_end: float, name: str, order: int | None = None) -> Piece:
    """Curvature following a smooth step from k_start to k_end: the Hermite smoothstep of degree
    2 order + 1 (C^order) or, with order None, the C-infinity exp-based step."""
    if order is not None and (int(order) != order or order < 0):
        raise InputError("ramp order must be a non-negative integer or None (C-infinity)")
    return Piece("ramp", name, _positive(length, "ramp length"), float(k_start), float(k_end),
                 None if order is None else int(order))


def corner(angle_deg: float) -> Piece:
    """A sharp corner: the heading jumps by angle_deg (positive turns left). It has no faces."""
    if not np.isfinite(angle_deg) or abs(angle_deg) >= 180:
        raise InputError("corner angle must lie strictly between -180 and 180 degrees")
    return Piece("corner", "", turn=float(np.radians(angle_deg)))


@dataclass(frozen=True)
class Profile:
    """A planar curve from pieces, starting at ``start`` with heading ``heading_deg``.

    ``points(s)``, ``heading(s)`` and ``curvature(s)`` evaluate it exactly at global arc lengths s;
    at a piece boundary they take the following piece's value.
    """

    pieces: tuple[Piece, ...]
    start: tuple[float, float] = (0.0, 0.0)
    heading_deg: float = 0.0
    _starts: tuple = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        pieces = tuple(self.pieces)
        object.__setattr__(self, "pieces", pieces)
        body = [p for p in pieces if p.kind != "corner"]
        if not body:
            raise InputError("a profile needs at least one piece with length")
        names = [p.name for p in body]
        if any(not n for n in names) or len(set(names)) != len(names):
            raise InputError("every profile piece needs its own non-empty name")
        if pieces[0].kind == "corner" or pieces[-1].kind == "corner":
            raise InputError("a corner must lie between two pieces")
        s, heading, point = 0.0, np.radians(self.heading_deg), np.asarray(self.start, dtype=float)
        starts = []
        for p in pieces:
            if p.kind == "corner":
                heading += p.turn
                continue
            starts.append((s, heading, point.copy()))
            point = point + p.displacement(np.array([p.length]), heading)[0]
            heading += float(p.turning(np.array([p.length]))[0])
            s += p.length
        object.__setattr__(self, "_starts", tuple(starts))

    @property
    def body(self) -> tuple[Piece, ...]:
        """The pieces that have length (and faces), in order."""
        return tuple(p for p in self.pieces if p.kind != "corner")

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(p.name for p in self.body)

    @property
    def length(self) -> float:
        return float(sum(p.length for p in self.body))

    @property
    def boundaries(self) -> np.ndarray:
        """Global arc length of each piece's start, and the profile's end."""
        return np.array([st[0] for st in self._starts] + [self.length])

    def _locate(self, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        s = np.asarray(s, dtype=float)
        if np.any(s < -1e-12 * self.length) or np.any(s > self.length * (1 + 1e-12)):
            raise InputError("arc length outside the profile")
        index = np.clip(np.searchsorted(self.boundaries, s, side="right") - 1, 0, len(self.body) - 1)
        return index, s - self.boundaries[index]

    def _each_piece(self, s: np.ndarray, evaluate) -> np.ndarray:
        index, u = self._locate(s)
        out = None
        for i, piece in enumerate(self.body):
            sel = index == i
            if not sel.any():
                continue
            value = evaluate(i, piece, np.clip(u[sel], 0.0, piece.length))
            if out is None:
                out = np.zeros((len(index),) + value.shape[1:])
            out[sel] = value
        return out

    def curvature(self, s: np.ndarray) -> np.ndarray:
        return self._each_piece(np.atleast_1d(s), lambda i, p, u: p.curvature(u))

    def heading(self, s: np.ndarray) -> np.ndarray:
        """Heading in radians."""
        return self._each_piece(np.atleast_1d(s), lambda i, p, u: self._starts[i][1] + p.turning(u))

    def points(self, s: np.ndarray) -> np.ndarray:
        """(n, 2) positions at global arc lengths s."""
        return self._each_piece(
            np.atleast_1d(s), lambda i, p, u: self._starts[i][2] + p.displacement(u, self._starts[i][1])
        )

    def piece_stations(self, edge_length: float, shift: float = 0.0) -> list[np.ndarray]:
        """Per piece, the global arc lengths of its samples (both ends included), about edge_length
        apart; ``shift`` (fraction of a spacing, |shift| < 0.5) moves the interior samples."""
        if not edge_length > 0:
            raise InputError("edge length must be positive")
        out = []
        for (s0, _, _), piece in zip(self._starts, self.body):
            n = max(1, int(np.ceil(piece.length / edge_length - 1e-9)))
            x = np.arange(n + 1, dtype=float)
            x[1:-1] += shift
            out.append(s0 + piece.length * x / n)
        return out


@dataclass(frozen=True)
class SeamTruth:
    """Where two pieces of a synthetic part meet: the ordered vertices of each side along the seam
    (the same indices when welded)."""

    group_a: str
    group_b: str
    vertices_a: np.ndarray
    vertices_b: np.ndarray
    closed: bool
    profile_s: float  # arc length along the profile at which the seam lies


@dataclass(frozen=True)
class SyntheticMesh:
    """A synthetic part as arrays: V (n,3), F (m,3), face_group (m,), group names, its seams, and the
    rotation applied (x_world = rotation @ x_built)."""

    vertices: np.ndarray
    faces: np.ndarray
    face_group: np.ndarray
    group_names: tuple[str, ...]
    seams: tuple[SeamTruth, ...]
    rotation: np.ndarray

    def seam(self, group_a: str, group_b: str) -> SeamTruth:
        for s in self.seams:
            if (s.group_a, s.group_b) == (group_a, group_b):
                return s
        raise InputError(f"no seam between {group_a!r} and {group_b!r}")


def extrude(
    profile: Profile,
    depth: float,
    edge_length: float,
    *,
    separate_shells: bool = False,
    offsets: dict[str, tuple[float, float, float]] | None = None,
    rotation: int | np.ndarray | None = None,
    skew: float = 0.0,
) -> SyntheticMesh:
    """Sweep the profile (in the x-y plane) along z over ``depth``: a cylinder-like surface.

    Samples are about ``edge_length`` apart; ``skew`` (|skew| < 0.5) shifts the interior profile
    samples of every other row by that fraction of a spacing, so rows do not line up (vertices stay on
    the exact surface). See _sweep for the other options.
    """
    depth = _positive(depth, "depth")
    rows = max(1, int(np.ceil(depth / edge_length - 1e-9)))
    z = np.linspace(0.0, depth, rows + 1)

    def place(points: np.ndarray, row: int) -> np.ndarray:
        return np.column_stack([points, np.full(len(points), z[row])])

    return _sweep(profile, edge_length, len(z), False, place, separate_shells, offsets, rotation, skew,
                  flip=False)


def revolve(
    profile: Profile,
    edge_length: float,
    *,
    sweep_deg: float = 360.0,
    separate_shells: bool = False,
    offsets: dict[str, tuple[float, float, float]] | None = None,
    rotation: int | np.ndarray | None = None,
    skew: float = 0.0,
) -> SyntheticMesh:
    """Revolve the profile about the z axis: profile x is the radius (must stay positive), profile y
    the height. A full turn closes the surface around; ``sweep_deg`` < 360 leaves it open."""
    if not 0 < sweep_deg <= 360:
        raise InputError("sweep angle must lie in (0, 360] degrees")
    all_s = np.concatenate(profile.piece_stations(edge_length))
    radius = profile.points(all_s)[:, 0]
    if radius.min() <= 0:
        raise InputError("a revolved profile must stay at positive radius (profile x > 0)")
    closed = sweep_deg == 360.0
    segments = max(3, int(np.ceil(np.radians(sweep_deg) * radius.max() / edge_length - 1e-9)))
    phi = np.radians(sweep_deg) * np.arange(segments + (0 if closed else 1)) / segments

    def place(points: np.ndarray, row: int) -> np.ndarray:
        c, s = np.cos(phi[row]), np.sin(phi[row])
        return np.column_stack([points[:, 0] * c, points[:, 0] * s, points[:, 1]])

    return _sweep(profile, edge_length, len(phi), closed, place, separate_shells, offsets, rotation, skew,
                  flip=True)


def _sweep(profile, edge_length, rows, closed, place, separate_shells, offsets, rotation, skew, flip):
    """Grid of (profile sample, row) vertices, two triangles per cell, outward-facing.

    ``separate_shells`` gives each piece its own copy of its end samples (a seam of coincident but
    unshared vertices), ``offsets`` moves named pieces' shells rigidly (needs separate shells),
    ``rotation`` is a seed for a random rotation (scipy's uniform random rotation) or a (3, 3) matrix.
    """
    if not abs(skew) < 0.5:
        raise InputError("skew must lie in (-0.5, 0.5)")
    offsets = dict(offsets or {})
    unknown = set(offsets) - set(profile.names)
    if unknown:
        raise InputError(f"offset for unknown piece(s): {', '.join(sorted(unknown))}")
    if offsets and not separate_shells:
        raise InputError("offsetting a piece needs separate shells")
    stations = [profile.piece_stations(edge_length, shift=skew * parity) for parity in (0, 1)]
    cells = np.array([len(s) - 1 for s in stations[0]])
    n_pieces = len(cells)
    blocks = [[i] for i in range(n_pieces)] if separate_shells else [list(range(n_pieces))]
    V_parts, F_parts, G_parts = [], [], []
    first_col, last_col = {}, {}  # piece -> vertex ids of its first / last sample column, by row
    base = 0
    for block in blocks:
        samples = [
            profile.points(np.concatenate([st[block[0]]] + [st[j][1:] for j in block[1:]])) for st in stations
        ]
        grid = np.stack([place(samples[r % 2], r) for r in range(rows)])
        for name in {profile.names[j] for j in block} & set(offsets):
            grid += np.asarray(offsets[name], dtype=float)
        cols = grid.shape[1]
        ids = base + np.arange(rows * cols).reshape(rows, cols)
        starts = np.concatenate([[0], np.cumsum(cells[block])])
        for k, j in enumerate(block):
            first_col[j], last_col[j] = ids[:, starts[k]], ids[:, starts[k + 1]]
        here = np.arange(rows) if closed else np.arange(rows - 1)
        there = (here + 1) % rows
        a, b, c, d = ids[here][:, :-1], ids[here][:, 1:], ids[there][:, :-1], ids[there][:, 1:]
        tri = np.concatenate([np.stack([a, b, c], -1).reshape(-1, 3), np.stack([b, d, c], -1).reshape(-1, 3)])
        if flip:
            tri = tri[:, [0, 2, 1]]
        group = np.broadcast_to(np.repeat(block, cells[block]), a.shape).reshape(-1)
        V_parts.append(grid.reshape(-1, 3))
        F_parts.append(tri)
        G_parts.append(np.concatenate([group, group]))
        base += rows * cols
    seams = tuple(
        SeamTruth(profile.names[i], profile.names[i + 1], last_col[i], first_col[i + 1], closed,
                  float(profile.boundaries[i + 1]))
        for i in range(n_pieces - 1)
    )
    R = _rotation(rotation)
    V = np.concatenate(V_parts) @ R.T
    return SyntheticMesh(V, np.concatenate(F_parts).astype(np.int64), np.concatenate(G_parts).astype(np.int64),
                         profile.names, seams, R)


def add_normal_noise(V: np.ndarray, F: np.ndarray, sigma: float, seed: int) -> np.ndarray:
    """A copy of V with each vertex moved along its vertex normal by Gaussian noise of standard
    deviation sigma (normals from trimesh, area weighted). Separate shells get independent noise."""
    import trimesh

    if sigma < 0:
        raise InputError("noise sigma must not be negative")
    normals = trimesh.Trimesh(V, F, process=False).vertex_normals
    rng = np.random.default_rng(seed)
    return V + normals * rng.normal(0.0, sigma, len(V))[:, None]


def _rotation(rotation: int | np.ndarray | None) -> np.ndarray:
    if rotation is None:
        return np.eye(3)
    if isinstance(rotation, (int, np.integer)):
        from scipy.spatial.transform import Rotation

        return Rotation.random(random_state=int(rotation)).as_matrix()
    R = np.asarray(rotation, dtype=float)
    if R.shape != (3, 3) or not np.allclose(R @ R.T, np.eye(3), atol=1e-9) or np.linalg.det(R) < 0:
        raise InputError("rotation must be a seed or a proper 3x3 rotation matrix")
    return R


def _step(x: np.ndarray, order: int | None) -> np.ndarray:
    """Smooth step on [0, 1]: Hermite smoothstep of order k, or the C-infinity exp-based step."""
    return smooth_step(x, "exp") if order is None else smooth_step(x, "hermite", order)


def _cumulative_integral(f, q: np.ndarray, panels: int) -> np.ndarray:
    """The integral of f from 0 to each q (q >= 0), by 16-point Gauss-Legendre on a panel grid of
    max(q) refined with the query points; exact to rounding for the smooth integrands used here."""
    q = np.asarray(q, dtype=float)
    if q.size == 0:
        return np.zeros(0, dtype=complex)
    top = float(q.max())
    if top <= 0:
        return np.zeros(q.shape, dtype=complex if np.iscomplexobj(f(np.zeros(1))) else float)
    breaks = np.unique(np.concatenate([np.linspace(0.0, top, panels + 1), np.clip(q, 0.0, top)]))
    lo, hi = breaks[:-1], breaks[1:]
    half = 0.5 * (hi - lo)
    nodes = (0.5 * (hi + lo))[:, None] + half[:, None] * _GAUSS_NODES[None, :]
    values = f(nodes.reshape(-1)).reshape(nodes.shape)
    panel_sums = (values * _GAUSS_WEIGHTS[None, :]).sum(axis=1) * half
    cumulative = np.concatenate([[0.0], np.cumsum(panel_sums)])
    return cumulative[np.searchsorted(breaks, np.clip(q, 0.0, top))]


def _positive(value: float, what: str) -> float:
    value = float(value)
    if not value > 0 or not np.isfinite(value):
        raise InputError(f"{what} must be a positive number")
    return value
