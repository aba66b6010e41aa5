"""Calibration of the grader's stated uncertainties against truth by construction.

A randomised family of seams is built with the product's shape builder (surfcheck.demo.shapes): planar
profiles of lines, circular arcs, clothoids (Euler spirals) and smooth-step curvature ramps (Hermite
smoothstep of order 1 or 2, so the curvature is C^1 or C^2), extruded or revolved, so every jump
across every seam is known exactly from the profile's curvature kappa(s) and its rate d kappa / ds at
the two pieces' ends. Each seam is graded with ``grade_seam`` and every station value is compared with
the true jump:

- coverage: the share of stations with |value - truth| <= U, U = k u as reported, k = 2 (JCGM 100:2008,
  GUM, section 6: about 95 % for a normal distribution). A station whose uncertainty is infinite (the
  order reads "not resolved" without a number) is not covered; its share is reported beside;
- false fail: a seam that fails an order its true jump meets (true jump <= the tolerance computed from
  the true curvatures and rates); false ok: a seam holding an order its true jump breaks;
- exact: ``achieved`` equals the designed class (the highest k whose true jumps G0..Gk all meet the
  tolerance) on clean seams; per order, the seam's status is "ok" where the truth meets the
  tolerance and "fail" where it does not;
- k for 95 %: the 95th percentile of |value - truth| / u, the coverage factor the stated u would need;
- resolution: the smallest jump a station tells from zero at k = 2 is U (a jump of U reads value - U > 0
  about half the time), as the median U per order against edge / radius and noise; and the share of
  stations with a non-zero true jump that do tell it from zero (value - U > 0).

Draws per case (one part, two to four seams), all from one numpy Generator seeded per case (the case
seed replays it: --case SEED): the family (corner: a kink of 0.1 to 20 degrees before an arc; arc;
compound; clothoid; smooth-step; variable); radius 2 to 8 mm; convex or concave; extruded, or revolved
with the seam at 3 to 10 radii from the axis; edge r/30 to r/5 (log-uniform); mesh "regular" (the
builder's grid, rows staggered or not), "jittered" (every vertex moved along the surface by up to 0.2
to 0.4 spacings in both directions) or "cad" (a CAD mesher's strip: rows 4 to 12 times farther apart
along the seam than across it and one to three triangles across a plane); welded or separate shells;
noise 0 (graded with the general profile) or 0.001 to 0.02 mm along the normals (scan profile); a
uniformly random rotation (scipy) and placement. The builder has no fillet whose radius varies along
the seam; "compound" (two arcs of different radii) and "variable" (two arcs joined by a clothoid or a
curvature ramp) vary the radius across it. Issue 13's acceptance cell (noise 0.01 mm, edge 0.2 mm,
r = 4, curvature-continuous families) is graded beside the random set.

    PYTHONPATH=. python benchmarks/calibration.py [--quick] [--stations N] [--seed S] [--json FILE]
        [--plot FILE] [--report FILE] [--processes 1|2] [--cell PARTS] [--rows FILE] [--case SEED]
        [--compare DUMP DUMP ...]
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from dataclasses import dataclass
from pathlib import Path

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")  # two processes share two cores: no threads inside each

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.blend.mesh import grid_triangles  # noqa: E402
from surfcheck.blend.steps import hermite_polynomial  # noqa: E402
from surfcheck.demo import shapes as S  # noqa: E402
from surfcheck.errors import InputError  # noqa: E402
from surfcheck.grading.run import grade_seam  # noqa: E402
from surfcheck.grading.sections import STRIP_EDGES  # noqa: E402
from surfcheck.grading.tolerances import GENERAL, SCAN, ToleranceProfile  # noqa: E402
from tests.fixtures.synthetic import part_and_seams  # noqa: E402

ORDERS = ("G0", "G1", "G2", "G3")
FAMILIES = ("corner", "arc", "compound", "clothoid", "smoothstep", "variable")
MESHES = ("regular", "jittered", "cad")
COVERAGE_FACTOR = 2.0  # k of U = k u, as the profiles state it (GUM section 6)
STATIONS_PER_SEAM = 6  # the seam is made this many default station spacings (two strips) long


# ---------------------------------------------------------------- the draws


def draw_case(seed: int, **fixed) -> dict:
    """The parameters of one randomised part, drawn from ``np.random.default_rng(seed)``.

    Parameters
    ----------
    seed : int
        The case seed; the same seed (and the same ``fixed``) gives the same part.
    **fixed
        Values to use in place of the drawn ones: ``family``, ``radius`` (mm), ``edge`` (mm) and
        ``noise`` (standard deviation, mm; 0 for a clean part). The other draws stay as they are.

    Returns
    -------
    dict
        JSON-able parameters: family, radius, the profile's pieces, sweep, mesh kind and spacing,
        noise, shells, placement; ``fixed`` lists the names given.
    """
    unknown = set(fixed) - {"family", "radius", "edge", "noise"}
    if unknown:
        raise ValueError(f"cannot fix {', '.join(sorted(unknown))}")
    rng = np.random.default_rng(seed)
    family = fixed.get("family", str(rng.choice(FAMILIES)))
    radius = float(fixed.get("radius", rng.uniform(2.0, 8.0)))
    edge = float(fixed.get("edge", radius * np.exp(rng.uniform(np.log(1 / 30), np.log(1 / 5)))))
    sign = float(rng.choice([1.0, -1.0]))  # +1 convex, -1 concave
    mesh = str(rng.choice(MESHES))
    noise = float(fixed.get("noise", rng.choice([0.0, rng.uniform(0.001, 0.02)])))
    case = {
        "seed": int(seed), "family": family, "radius": radius, "edge": edge, "edge_over_r": edge / radius,
        "convex": sign > 0, "mesh": mesh, "sweep": str(rng.choice(["extrude", "revolve"])),
        "welded": bool(rng.random() < 0.75),
        "noise": noise, "fixed": sorted(fixed),
        "skew": float(rng.choice([0.0, 0.3])) if mesh == "regular" else 0.0,
        "jitter": float(rng.uniform(0.2, 0.4)) if mesh == "jittered" else 0.0,
        "aspect": float(np.exp(rng.uniform(np.log(4), np.log(12)))) if mesh == "cad" else 1.0,
        "plane_cells": int(rng.integers(1, 4)) if mesh == "cad" else 0,
        "axis_radii": float(rng.uniform(3.0, 10.0)),
        "heading_deg": float(rng.choice([90.0, -90.0])),
        "rotation": [float(x) for x in _random_rotation(rng).ravel()],
        "offset": [float(x) for x in rng.uniform(-50.0, 50.0, 3)],
        "noise_seed": int(rng.integers(2**31)),
    }
    case["pieces"] = _draw_pieces(rng, family, radius, edge, sign)
    if case["sweep"] == "revolve" and _nearest_axis(case) < 0.25 * case["axis_radii"] * radius:
        case["heading_deg"] = -case["heading_deg"]  # then the profile turns away from the axis
    return case


def _nearest_axis(case: dict) -> float:
    profile = build_profile(case)
    return float(profile.points(np.linspace(0.0, profile.length, 400))[:, 0].min())


def _draw_pieces(rng, family: str, r: float, edge: float, sign: float) -> list[list]:
    """The profile as [kind, name, *arguments] lists (lengths mm, curvatures 1/mm)."""
    line = max(rng.uniform(2.5, 4.0) * r, 20.0 * edge)
    k = sign / r
    if family == "arc":
        return [["line", "a", line], ["arc", "b", sign * r, rng.uniform(40, 90)], ["line", "c", line]]
    if family == "corner":  # a kink of 0.1 to 20 degrees (log-uniform), both sides of the G1 tolerances
        kink = sign * np.exp(rng.uniform(np.log(0.1), np.log(20.0)))
        return [["line", "a", line], ["corner", "", kink], ["line", "b", line],
                ["arc", "c", sign * r, rng.uniform(40, 90)], ["line", "d", line]]
    if family == "compound":
        r2 = rng.uniform(1.4 * r, max(1.5 * r, 8.0)) if r < 5.5 else rng.uniform(r / 2.5, r / 1.4)
        return [["line", "a", line], ["arc", "b", sign * r, rng.uniform(25, 45)],
                ["arc", "c", sign * r2, rng.uniform(25, 45)], ["line", "d", line]]
    ramp = rng.uniform(0.8, 1.6) * r
    if family in ("clothoid", "smoothstep"):
        order = int(rng.choice([1, 1, 2]))
        kind = "clothoid" if family == "clothoid" else "ramp"
        return [["line", "a", line], [kind, "b", ramp, 0.0, k, order], ["arc", "c", sign * r, rng.uniform(20, 40)],
                [kind, "d", ramp, k, 0.0, order], ["line", "e", line]]
    r2 = rng.uniform(1.5 * r, 2.5 * r)
    kind = str(rng.choice(["clothoid", "ramp"]))
    return [["line", "a", line], ["arc", "b", sign * r, rng.uniform(20, 40)],
            [kind, "c", ramp, k, sign / r2, int(rng.choice([1, 2]))], ["arc", "d", sign * r2, rng.uniform(20, 40)],
            ["line", "e", line]]


def _random_rotation(rng) -> np.ndarray:
    from scipy.spatial.transform import Rotation

    return Rotation.random(random_state=int(rng.integers(2**31))).as_matrix()


# ---------------------------------------------------------------- the part


def build_profile(case: dict) -> S.Profile:
    """The case's profile from the shape builder; revolved profiles start where the first curved
    piece lies ``axis_radii`` radii from the axis."""
    pieces = tuple(_piece(spec) for spec in case["pieces"])
    profile = S.Profile(pieces, start=(0.0, 0.0), heading_deg=case["heading_deg"])
    if case["sweep"] == "extrude":
        return profile
    seam_x = profile.points(profile.boundaries[1:2])[0, 0]
    start = case["axis_radii"] * case["radius"] - seam_x
    return S.Profile(pieces, start=(float(start), 0.0), heading_deg=case["heading_deg"])


def _piece(spec: list) -> S.Piece:
    kind, name, *args = spec
    if kind == "line":
        return S.line(args[0], name)
    if kind == "arc":
        return S.arc(args[0], name, angle_deg=args[1])
    if kind == "corner":
        return S.corner(args[0])
    if kind == "clothoid":
        return S.clothoid(args[0], args[1], args[2], name)
    return S.ramp(args[0], args[1], args[2], name, order=args[3])


def build_mesh(case: dict, profile: S.Profile) -> tuple[S.SyntheticMesh, np.ndarray]:
    """The case's mesh (seams with their vertices) and its vertices after placement and noise."""
    rotation = np.asarray(case["rotation"]).reshape(3, 3)
    seam_length = STATIONS_PER_SEAM * 2.0 * STRIP_EDGES * case["edge"] * case["aspect"]
    if case["mesh"] == "regular":
        common = dict(separate_shells=not case["welded"], rotation=rotation, skew=case["skew"])
        if case["sweep"] == "extrude":
            mesh = S.extrude(profile, seam_length, case["edge"], **common)
        else:
            mesh = S.revolve(profile, case["edge"], sweep_deg=_sweep_deg(case, seam_length), **common)
    else:
        mesh = _grid_mesh(case, profile, seam_length, rotation)
    V = mesh.vertices + np.asarray(case["offset"])
    if case["noise"] > 0:
        V = S.add_normal_noise(V, mesh.faces, case["noise"], seed=case["noise_seed"])
    return mesh, V


def _sweep_deg(case: dict, seam_length: float) -> float:
    return float(min(360.0, np.degrees(seam_length / (case["axis_radii"] * case["radius"]))))


def _grid_mesh(case: dict, profile: S.Profile, seam_length: float, rotation: np.ndarray) -> S.SyntheticMesh:
    """A jittered or CAD-like grid over the exact profile: columns (profile samples) ``edge`` apart
    across curved pieces (``plane_cells`` cells across a line on a CAD-like mesh), rows ``aspect``
    edges apart along the seam; ``jitter`` moves every vertex but the pieces' end columns (and the
    grid's end rows) by a uniform fraction of a spacing in each direction. Vertices lie on the exact
    surface. The builder's grid (shapes._sweep) has one spacing both ways, hence this generator."""
    rng = np.random.default_rng(case["noise_seed"] + 1)
    edge, along = case["edge"], case["edge"] * case["aspect"]
    columns = []  # per piece, its samples' arc lengths (ends included)
    for start, piece in zip(profile.boundaries[:-1], profile.body):
        cells = case["plane_cells"] if (case["mesh"] == "cad" and piece.kind == "line") else \
            max(1, int(np.ceil(piece.length / edge - 1e-9)))
        columns.append(start + np.linspace(0.0, piece.length, cells + 1))
    s = np.concatenate([columns[0]] + [c[1:] for c in columns[1:]])
    ends = np.cumsum([0] + [len(c) - 1 for c in columns])  # column index of each piece boundary
    fixed = np.zeros(len(s), bool)
    fixed[ends] = True
    closed = case["sweep"] == "revolve" and _sweep_deg(case, seam_length) >= 360.0
    if case["sweep"] == "extrude":
        extent = seam_length
    else:
        r_max = profile.points(s)[:, 0].max()
        extent = np.radians(_sweep_deg(case, seam_length)) * r_max
    n_rows = max(3, int(np.ceil(extent / along - 1e-9))) + (0 if closed else 1)
    t = np.arange(n_rows) / (n_rows if closed else n_rows - 1)  # 0..1 along the seam
    j = case["jitter"]
    ds = np.diff(s)
    step_s = np.minimum(np.r_[ds, ds[-1]], np.r_[ds[0], ds])  # the smaller neighbouring spacing
    S_grid = s[None, :] + (~fixed)[None, :] * rng.uniform(-j, j, (n_rows, len(s))) * step_s[None, :]
    row_free = np.ones(n_rows, bool) if closed else np.r_[False, np.ones(n_rows - 2, bool), False]
    dt = 1.0 / (n_rows if closed else n_rows - 1)
    T_grid = t[:, None] + row_free[:, None] * rng.uniform(-j, j, (n_rows, len(s))) * dt
    xy = profile.points(S_grid.ravel())
    if case["sweep"] == "extrude":
        V = np.column_stack([xy, T_grid.ravel() * seam_length])
    else:
        phi = T_grid.ravel() * np.radians(_sweep_deg(case, seam_length))
        V = np.column_stack([xy[:, 0] * np.cos(phi), xy[:, 0] * np.sin(phi), xy[:, 1]])
    ids = np.arange(n_rows * len(s)).reshape(n_rows, len(s))
    faces, groups = [], []
    for g in range(len(columns)):  # grid_triangles wraps its second index: the rows along a closed seam
        block = grid_triangles(0, ends[g + 1] - ends[g] + 1, n_rows, closed)
        col, row = np.divmod(block, n_rows)
        faces.append(ids[row, col + ends[g]])
        groups.append(np.full(len(block), g))
    F = np.concatenate(faces)
    if case["sweep"] == "extrude":
        F = F[:, [0, 2, 1]]  # outward, as the builder's grids (whose first index runs along the seam)
    G = np.concatenate(groups)
    seam_columns = [(ids[:, ends[g + 1]], ids[:, ends[g + 1]]) for g in range(len(columns) - 1)]
    if not case["welded"]:
        V, F, seam_columns = _separate_shells(V, F, G, seam_columns)
    seams = tuple(S.SeamTruth(profile.names[g], profile.names[g + 1], a, b, closed, float(profile.boundaries[g + 1]))
                  for g, (a, b) in enumerate(seam_columns))
    return S.SyntheticMesh(V @ rotation.T, F, G, profile.names, seams, rotation)


def _separate_shells(V, F, G, seam_columns):
    """Every group its own copy of its vertices; seam g runs between groups g and g + 1."""
    new_V, new_F, maps = [], np.empty_like(F), []
    base = 0
    for g in range(G.max() + 1):
        used = np.unique(F[G == g])
        lookup = np.full(len(V), -1)
        lookup[used] = base + np.arange(len(used))
        new_F[G == g] = lookup[F[G == g]]
        new_V.append(V[used])
        maps.append(lookup)
        base += len(used)
    columns = [(maps[g][a], maps[g + 1][b]) for g, (a, b) in enumerate(seam_columns)]
    return np.concatenate(new_V), new_F, columns


# ---------------------------------------------------------------- the truth


def end_values(piece: S.Piece) -> tuple[np.ndarray, np.ndarray]:
    """(curvature, rate d kappa / ds) at the piece's start and end, exactly: a clothoid's rate is
    (k1 - k0) / L; a ramp's is (k1 - k0) / L phi'(x) with phi the Hermite smoothstep (phi' = 0 at both
    ends for order >= 1); lines and arcs have rate 0."""
    kappa = piece.curvature(np.array([0.0, piece.length]))
    slope = (piece.k_end - piece.k_start) / piece.length if piece.length else 0.0
    if piece.kind == "clothoid":
        return kappa, np.array([slope, slope])
    if piece.kind == "ramp":
        return kappa, slope * hermite_polynomial(piece.order).deriv()(np.array([0.0, 1.0]))
    return kappa, np.zeros(2)


@dataclass(frozen=True)
class JumpTruth:
    """The true jump of every order across one seam, and whether it meets the profile's tolerance
    (computed from the true curvatures and rates as the grader computes it from its estimates)."""

    jumps: tuple[float, float, float, float]
    tolerances: tuple[float, float, float, float]

    @property
    def meets(self) -> tuple[bool, ...]:
        return tuple(bool(j <= t) for j, t in zip(self.jumps, self.tolerances))

    @property
    def designed(self) -> int:
        """The highest k with G0..Gk all met (-1 when G0 is not)."""
        k = -1
        for met in self.meets:
            if not met:
                break
            k += 1
        return k


def seam_truth(profile: S.Profile, index: int, tolerance: ToleranceProfile) -> JumpTruth:
    """The true jumps across seam ``index`` of the profile (between its body pieces index and index + 1):
    G0 0 (the pieces meet), G1 the heading jump of a corner between them (else 0), G2 and G3 the jumps of
    the curvature and its rate; tolerances as the grader computes them (continuity.decide_orders), from
    the true values."""
    a, b = profile.body[index], profile.body[index + 1]
    between = profile.pieces[profile.pieces.index(a) + 1:profile.pieces.index(b)]
    turn = abs(float(np.degrees(sum(p.turn for p in between))))
    (_, ka), (_, ra) = end_values(a)
    (kb, _), (rb, _) = end_values(b)
    g2, g3 = abs(kb - ka), abs(rb - ra)
    tol2 = max(tolerance.g2_abs, tolerance.g2_rel * max(abs(ka), abs(kb)))
    tol3 = max(tolerance.g3_abs, tolerance.g3_rel * max(abs(ra), abs(rb)))
    return JumpTruth((0.0, turn, float(g2), float(g3)),
                     (tolerance.g0_gap, tolerance.g1_angle, float(tol2), float(tol3)))


# ---------------------------------------------------------------- grading one case


def run_case(case: dict) -> list[dict]:
    """Grade every seam of the case's part: one row per seam with its truth, its grade and its
    stations (value, u, status per order), or the one-line reason it could not be graded."""
    profile = build_profile(case)
    mesh, V = build_mesh(case, profile)
    part, curves = part_and_seams(mesh, V)
    tolerance = SCAN if case["noise"] > 0 else GENERAL
    rows = []
    for index, curve in enumerate(curves):
        truth = seam_truth(profile, index, tolerance)
        row = {"case": case, "seam": curve.id, "profile": tolerance.name, "truth": list(truth.jumps),
               "truth_tolerance": list(truth.tolerances), "meets": list(truth.meets), "designed": truth.designed}
        t0 = time.perf_counter()
        try:
            grade = grade_seam(part, curve, tolerance)
        except InputError as error:
            rows.append({**row, "error": str(error), "stations": []})
            continue
        row.update(seconds=time.perf_counter() - t0, achieved=grade.achieved,
                   status=[str(o.status) for o in grade.orders],
                   stations=[_station_row(st) for st in grade.stations])
        rows.append(row)
    return rows


_READ = ("value", "uncertainty", "status", "tolerance")


def _station_row(station) -> dict:
    """A station as the benchmark reads it (value, u, status per order) and, for diagnosis, the rest of
    what the grader states there (its ``to_dict``: the sides' curvature, rate, points, windows, and any
    further figures per order, such as the parts of an uncertainty budget)."""
    stated = station.to_dict()
    return {"index": station.index, "s": station.s,
            "value": [float(o.value) for o in station.orders],
            "u": [float(o.uncertainty) if np.isfinite(o.uncertainty) else None for o in station.orders],
            "status": [str(o.status) for o in station.orders],
            "stated": {key: value for key, value in stated.items() if key not in ORDERS + ("index", "s")}
            | {name: {k: v for k, v in stated[name].items() if k not in _READ} for name in ORDERS}}


# ---------------------------------------------------------------- measures


def station_errors(row: dict, order: int) -> np.ndarray:
    """Per station |value - truth| / U (U = k u); inf where u is infinite or 0 with an error, nan
    where nothing is known. Covered where <= 1."""
    out = []
    for st in row["stations"]:
        u = st["u"][order]
        error = abs(st["value"][order] - row["truth"][order])
        if u is None or not np.isfinite(st["value"][order]):
            out.append(np.inf)
        elif u == 0:
            out.append(0.0 if error == 0 else np.inf)
        else:
            out.append(error / (COVERAGE_FACTOR * u))
    return np.array(out)


def station_factors(row: dict, order: int) -> np.ndarray:
    """Per station |value - truth| / u: the coverage factor that station would need; inf where u = 0
    with an error, left out where u is not finite (the station states no uncertainty)."""
    out = []
    for st in row["stations"]:
        u = st["u"][order]
        if u is None:
            continue
        error = abs(st["value"][order] - row["truth"][order])
        out.append(error / u if u > 0 else (0.0 if error == 0 else np.inf))
    return np.array(out)


def seam_outcomes(row: dict, order: int) -> dict:
    """The seam's outcome for one order against its truth: false fail, false ok, exact."""
    status, met = row["status"][order], row["meets"][order]
    return {"false_fail": status == "fail" and met, "false_ok": status == "ok" and not met,
            "exact": status == ("ok" if met else "fail")}


def summary(rows: list[dict], select=lambda row: True) -> dict:
    """Per order: coverage (covered / stations), the share with no finite u, seam false-fail and
    false-ok rates, the share of seams whose status matches the truth; per seam the share with
    achieved == designed. Over the graded rows that ``select`` keeps."""
    graded = [r for r in rows if "error" not in r and select(r)]
    out = {"seams": len(graded), "stations": sum(len(r["stations"]) for r in graded), "orders": []}
    for k in range(4):
        z = np.concatenate([station_errors(r, k) for r in graded]) if graded else np.zeros(0)
        outcomes = [seam_outcomes(r, k) for r in graded]
        n = max(1, len(outcomes))
        out["orders"].append({
            "coverage": float(np.mean(z <= 1.0)) if len(z) else float("nan"),
            "unresolved": float(np.mean(~np.isfinite(z))) if len(z) else float("nan"),
            "false_fail": sum(o["false_fail"] for o in outcomes) / n,
            "false_ok": sum(o["false_ok"] for o in outcomes) / n,
            "exact": sum(o["exact"] for o in outcomes) / n,
            "k95": _percentile([station_factors(r, k) for r in graded], 95),
        })
    out["achieved_exact"] = float(np.mean([r["achieved"] == r["designed"] for r in graded])) if graded else float("nan")
    return out


def _percentile(parts: list[np.ndarray], q: float) -> float:
    values = np.concatenate(parts) if parts else np.zeros(0)
    return float(np.percentile(values, q)) if len(values) else float("nan")


def coverage_interval(rows: list[dict], order: int, select, resamples: int = 400) -> tuple[float, float]:
    """A 95 % interval of the coverage of one order: percentiles 2.5 and 97.5 of the coverage over
    seams resampled with replacement (a cluster bootstrap: stations of one seam are not independent;
    Efron and Tibshirani 1993, An Introduction to the Bootstrap, ch. 13)."""
    per_seam = [station_errors(r, order) for r in rows if "error" not in r and select(r) and r["stations"]]
    if not per_seam:
        return float("nan"), float("nan")
    covered = np.array([np.sum(z <= 1.0) for z in per_seam])
    counts = np.array([len(z) for z in per_seam])
    picks = np.random.default_rng(0).integers(0, len(per_seam), (resamples, len(per_seam)))
    shares = covered[picks].sum(axis=1) / counts[picks].sum(axis=1)
    return float(np.percentile(shares, 2.5)), float(np.percentile(shares, 97.5))


def worst_cases(rows: list[dict], count: int = 5, order: int | None = None) -> list[dict]:
    """The ``count`` station values farthest outside U (|error| / U), the worst station of each seam
    and order (of one ``order`` if given)."""
    found = []
    for r in rows:
        for k in range(4) if order is None else (order,):
            z = station_errors(r, k)
            finite = np.where(np.isfinite(z), z, -1.0)
            if len(z) and finite.max() > 1.0:
                i = int(np.argmax(finite))
                st = r["stations"][i]
                found.append({"z": float(finite[i]), "order": ORDERS[k], "seam": r["seam"], "station": st["index"],
                              "value": st["value"][k], "u": st["u"][k], "truth": r["truth"][k], "case": r["case"]})
    return sorted(found, key=lambda f: -f["z"])[:count]


RESOLUTION_BINS = np.array([1 / 30, 1 / 20, 1 / 12, 1 / 8, 1 / 5 + 1e-9])  # edge / r
NOISE_CLASSES = (("clean", lambda n: n == 0), ("<=0.01", lambda n: 0 < n <= 0.01), (">0.01", lambda n: n > 0.01))


def resolution(rows: list[dict]) -> list[dict]:
    """Per order, edge/r bin and noise class: the median U of stations with finite u (the smallest
    jump told from zero half the time) and, over stations with a non-zero true jump, the share read
    as non-zero (value - U > 0). G0 over separate shells only (a welded seam's G0 is 0 exactly)."""
    out = []
    graded = [r for r in rows if "error" not in r]
    for k in range(4):
        for lo, hi in zip(RESOLUTION_BINS[:-1], RESOLUTION_BINS[1:]):
            for label, keep in NOISE_CLASSES:
                sel = [r for r in graded if lo <= r["case"]["edge_over_r"] < hi and keep(r["case"]["noise"])
                       and (k > 0 or not r["case"]["welded"])]
                U = [COVERAGE_FACTOR * st["u"][k] for r in sel for st in r["stations"] if st["u"][k] is not None]
                told = [st["value"][k] - COVERAGE_FACTOR * st["u"][k] > 0 for r in sel if r["truth"][k] > 0
                        for st in r["stations"] if st["u"][k] is not None]
                nonzero = sum(len(r["stations"]) for r in sel if r["truth"][k] > 0)
                out.append({"order": ORDERS[k], "edge_over_r": [float(lo), float(hi)], "noise": label,
                            "median_U": float(np.median(U)) if U else None, "stations": len(U),
                            "told_from_zero": sum(told) / nonzero if nonzero else None, "nonzero_stations": nonzero})
    return out


# ---------------------------------------------------------------- report


def _pct(x: float) -> str:
    return "-" if not np.isfinite(x) else f"{100 * x:5.1f}"


def report(rows: list[dict], cell: list[dict], seed: int) -> str:
    """The tables as markdown: issue 13's acceptance figures; per order overall, by mesh kind, family,
    sweep and shells; resolution; the worst station values."""
    total = summary(rows)
    errors = [r for r in rows if "error" in r]
    seconds = sum(r.get("seconds", 0.0) for r in rows + cell)
    lines = [f"calibration benchmark: seed {seed}, {total['seams']} seams graded ({len(errors)} not gradable), "
             f"{total['stations']} stations, and {len(cell)} seams of the acceptance cell; {seconds:.0f} s of "
             "grading", ""]
    lines += acceptance(rows, cell) + _order_table(rows)
    for title, key in (("mesh kind", lambda c: c["mesh"]), ("family", lambda c: c["family"]),
                       ("sweep", lambda c: c["sweep"]), ("shells", lambda c: "welded" if c["welded"] else "separate")):
        lines += _breakdown_table(rows, title, key)
    lines += _resolution_table(rows) + _worst_lines(rows)
    if errors:
        lines += ["", "Not gradable: " + "; ".join(f"case {r['case']['seed']} {r['seam']}: {r['error']}"
                                                   for r in errors[:5])]
    return "\n".join(lines) + "\n"


def acceptance(rows: list[dict], cell: list[dict]) -> list[str]:
    """Issue 13's "done when" figures that this benchmark measures, each against its threshold."""
    clean, noisy, total = summary(rows, _clean), summary(rows, _noisy), summary(rows)
    graded = [r for r in rows if "error" not in r]
    failing = [r for r in graded if any(seam_outcomes(r, k)["false_fail"] for k in range(4))]
    failing_clean = [r for r in failing if _clean(r)]
    fine = summary(rows, lambda r: _clean(r) and r["case"]["edge_over_r"] <= 0.1)
    continuous = [r for r in cell if "error" not in r and r["designed"] >= 2]
    reaching = sum(r["achieved"] >= 2 for r in continuous)
    lines = ["Issue 13 acceptance (measured here; coverage with its 95 % interval over seams):", "",
             "| criterion | threshold | measured | met |",
             "|---|---|---|---|"]

    def add(criterion, threshold, measured, met):
        lines.append(f"| {criterion} | {threshold} | {measured} | {'yes' if met else 'no'} |")

    for name, part, select in (("clean", clean, _clean), ("noisy", noisy, _noisy)):
        cover = [o["coverage"] for o in part["orders"]]
        ranges = [coverage_interval(rows, k, select) for k in range(4)]
        measured = " / ".join(f"{_pct(c).strip()} ({_pct(lo).strip()}-{_pct(hi).strip()})"
                              for c, (lo, hi) in zip(cover, ranges))
        add(f"coverage G0 / G1 / G2 / G3, {name}", ">= 95 %", measured + " %", min(cover) >= 0.95)
    add("seams failing an order they meet", "<= 1 %",
        f"{len(failing)} of {total['seams']} ({_pct(len(failing) / max(1, total['seams'])).strip()} %)",
        len(failing) <= 0.01 * total["seams"])
    add("... of them on clean meshes", "0", f"{len(failing_clean)} of {clean['seams']}", not failing_clean)
    add("clean, edge <= r/10: achieved == designed", ">= 95 %",
        f"{_pct(fine['achieved_exact']).strip()} % of {fine['seams']}", fine["achieved_exact"] >= 0.95)
    if continuous:
        kinds = "; ".join(f"{kind} {sum(r['achieved'] >= 2 for r in continuous if r['case']['mesh'] == kind)} of "
                          f"{sum(r['case']['mesh'] == kind for r in continuous)}" for kind in MESHES)
        add("noise 0.01, edge 0.2, r 4: G2-or-better seams reaching G2", ">= 80 %",
            f"{reaching} of {len(continuous)} ({_pct(reaching / len(continuous)).strip()} %; {kinds})",
            reaching >= 0.8 * len(continuous))
    return lines + [""]


def _clean(row: dict) -> bool:
    return row["case"]["noise"] == 0


def _noisy(row: dict) -> bool:
    return row["case"]["noise"] > 0


def _order_table(rows: list[dict]) -> list[str]:
    lines = ["Per order (percent; coverage: |value - truth| <= 2u; no u: stations without a finite u, counted as "
             "not covered; false fail / false ok / exact: per seam; k for 95 %: the 95th percentile of "
             "|value - truth| / u over stations with a finite u, the coverage factor that would cover them):", "",
             "| order | coverage clean | coverage noisy | no u clean | no u noisy | false fail clean "
             "| false fail noisy | false ok | exact clean | exact noisy | k for 95 % clean / noisy |",
             "|---|---|---|---|---|---|---|---|---|---|---|"]
    total, clean, noisy = summary(rows), summary(rows, _clean), summary(rows, _noisy)
    for k in range(4):
        c, n, t = clean["orders"][k], noisy["orders"][k], total["orders"][k]
        cells = (c["coverage"], n["coverage"], c["unresolved"], n["unresolved"], c["false_fail"], n["false_fail"],
                 t["false_ok"], c["exact"], n["exact"])
        lines.append(f"| {ORDERS[k]} | " + " | ".join(_pct(x) for x in cells) + f" | {c['k95']:.3g} / {n['k95']:.3g} |")
    fine = summary(rows, lambda r: _clean(r) and r["case"]["edge_over_r"] <= 0.1)
    seams_failing = sum(any(seam_outcomes(r, k)["false_fail"] for k in range(4)) for r in rows if "error" not in r)
    return lines + ["", f"Seams failing an order they meet: {seams_failing} of {total['seams']}. Seams graded "
                    f"exactly (achieved == designed): clean {_pct(clean['achieved_exact'])} % of {clean['seams']}, "
                    f"clean with edge <= r/10 {_pct(fine['achieved_exact'])} % of {fine['seams']}, noisy "
                    f"{_pct(noisy['achieved_exact'])} % of {noisy['seams']}."]


def _breakdown_table(rows: list[dict], title: str, key) -> list[str]:
    lines = ["", f"By {title} (coverage clean / noisy per order, percent; seams failing an order they meet; "
             "achieved == designed on clean seams):", "",
             f"| {title} | seams | G0 | G1 | G2 | G3 | false-fail seams | exact clean |",
             "|---|---|---|---|---|---|---|---|"]
    for value in sorted({key(r["case"]) for r in rows}):
        part = [r for r in rows if key(r["case"]) == value]
        c, n = summary(part, _clean), summary(part, _noisy)
        graded = [r for r in part if "error" not in r]
        failing = sum(any(seam_outcomes(r, k)["false_fail"] for k in range(4)) for r in graded)
        cells = " | ".join(f"{_pct(c['orders'][k]['coverage'])} / {_pct(n['orders'][k]['coverage'])}" for k in range(4))
        lines.append(f"| {value} | {len(graded)} | {cells} | {failing} | {_pct(c['achieved_exact'])} |")
    return lines


def _resolution_table(rows: list[dict]) -> list[str]:
    lines = ["", "Resolution (median U = 2u, the smallest jump told from zero about half the time; told: share of "
             "stations with a non-zero true jump read as non-zero):", "",
             "| order | edge / r | noise | stations | median U | told / non-zero stations |",
             "|---|---|---|---|---|---|"]
    for cell in resolution(rows):
        if cell["stations"]:
            told = "-" if cell["told_from_zero"] is None else \
                f"{cell['told_from_zero']:.2f} / {cell['nonzero_stations']}"
            lo, hi = cell["edge_over_r"]
            lines.append(f"| {cell['order']} | r/{1 / lo:.0f} to r/{1 / hi:.0f} | {cell['noise']} | {cell['stations']} "
                         f"| {cell['median_U']:.3g} | {told} |")
    return lines


def _worst_lines(rows: list[dict]) -> list[str]:
    welded = worst_cases([r for r in rows if r["case"]["welded"]])
    return (_case_lines(rows, "Worst station values (|value - truth| / U; replay: --case SEED), overall and per order:")
            + _case_lines(welded, "Worst on welded seams:", listed=welded))


def _case_lines(rows: list[dict], title: str, listed: list[dict] | None = None) -> list[str]:
    """One line per listed station value; by default the worst five and, per order, the next two."""
    lines = ["", title, ""]
    if listed is not None:
        return lines + [_case_line(w) for w in listed]
    listed = worst_cases(rows)
    for k in range(4):  # and per order the worst two not listed yet
        key = {(w["case"]["seed"], w["seam"], w["order"]) for w in listed}
        listed += [w for w in worst_cases(rows, 2 + len(listed), k)
                   if (w["case"]["seed"], w["seam"], w["order"]) not in key][:2]
    return lines + [_case_line(w) for w in listed]


def _case_line(w: dict) -> str:
    c = w["case"]
    u = "none" if w["u"] is None else f"{w['u']:.3g}"
    return (f"- {w['z']:.3g} U: case {c['seed']} {c['family']} {c['sweep']} {c['mesh']} "
            f"{'convex' if c['convex'] else 'concave'} {'welded' if c['welded'] else 'separate'}, "
            f"r {c['radius']:.2f}, edge {c['edge']:.3f} (r/{1 / c['edge_over_r']:.1f}), "
            f"noise {c['noise']:.4f}, aspect {c['aspect']:.1f}, seam {w['seam']} station {w['station']}: "
            f"{w['order']} {w['value']:.4g} (u {u}) against truth {w['truth']:.4g}")


def plot(rows: list[dict], path: Path) -> None:
    """Top: coverage per order against edge / r (log bins), clean and noisy, with the 95 % target.
    Bottom: the resolution, median U per order against edge / r, per noise class. G0 over separate
    shells only (a welded seam's G0 is 0 exactly, by the grader's construction)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    edges = np.exp(np.linspace(np.log(1 / 30), np.log(1 / 5 + 1e-9), 6))
    centres = np.sqrt(edges[1:] * edges[:-1])
    cells = resolution(rows)
    units = ("mm", "deg", "1/mm", "1/mm^2")
    fig, axes = plt.subplots(2, 4, figsize=(15, 7), sharex=True)
    for k in range(4):
        ax = axes[0, k]
        for label, keep, style in (("clean", lambda n: n == 0, "o-"), ("noisy", lambda n: n > 0, "s--")):
            cover = []
            for lo, hi in zip(edges[:-1], edges[1:]):
                z = [station_errors(r, k) for r in rows if "error" not in r and keep(r["case"]["noise"])
                     and lo <= r["case"]["edge_over_r"] < hi and (k > 0 or not r["case"]["welded"])]
                z = np.concatenate(z) if z else np.zeros(0)
                cover.append(np.mean(z <= 1.0) if len(z) else np.nan)
            ax.semilogx(centres, cover, style, label=label)
        ax.axhline(0.95, color="grey", lw=0.8, ls=":")
        ax.set_title(f"{ORDERS[k]}{' (separate shells)' if k == 0 else ''}: |value - truth| <= 2u", fontsize=10)
        ax.set_ylim(0, 1.02)
        ax = axes[1, k]
        for label, _ in NOISE_CLASSES:
            mine = [c for c in cells if c["order"] == ORDERS[k] and c["noise"] == label and c["median_U"]]
            ax.loglog([np.sqrt(c["edge_over_r"][0] * c["edge_over_r"][1]) for c in mine],
                      [c["median_U"] for c in mine], "o-", label=f"noise {label} mm" if label != "clean" else label)
        ax.set_ylabel(f"median U = 2u, {units[k]}")
        ax.set_xlabel("edge length")
        ticks = [1 / 30, 1 / 20, 1 / 10, 1 / 5]
        ax.set_xticks(ticks, [f"r/{round(1 / t)}" for t in ticks])
        ax.minorticks_off()
    axes[0, 0].set_ylabel(f"coverage ({sum(len(r['stations']) for r in rows)} stations)")
    axes[0, 0].legend(loc="lower left")
    axes[1, 0].legend(loc="lower left", fontsize=8)
    fig.tight_layout()
    fig.savefig(path, dpi=100)
    plt.close(fig)


# ---------------------------------------------------------------- driver


def run(target: int, seed: int, processes: int, progress=None) -> list[dict]:
    """Grade randomised cases (case seeds seed * 100000 + i) until ``target`` stations are graded,
    in ``processes`` worker processes (at most 2)."""
    rows, i = [], 0
    while sum(len(r["stations"]) for r in rows) < target:
        done = sum(len(r["stations"]) for r in rows)
        per_case = done / i if i and done else 4 * STATIONS_PER_SEAM
        batch = max(processes, int(np.ceil(1.1 * (target - done) / per_case)))
        rows += grade_cases([draw_case(seed * 100000 + j) for j in range(i, i + batch)], processes, progress, rows)
        i += batch
    return rows


# issue 13's cell: "noise 0.01 mm, edge 0.2 mm, r = 4: curvature-continuous blends reach at least G2"
CELL = {"radius": 4.0, "edge": 0.2, "noise": 0.01}
CELL_FAMILIES = ("clothoid", "smoothstep", "variable")


def run_cell(seed: int, processes: int, cases: int, progress=None) -> list[dict]:
    """The acceptance cell: ``cases`` parts of the curvature-continuous families in turn (case seeds
    seed * 100000 + 90000 + i), other draws as in the random set."""
    drawn = [draw_case(seed * 100000 + 90000 + i, family=CELL_FAMILIES[i % 3], **CELL) for i in range(cases)]
    return grade_cases(drawn, processes, progress)


def grade_cases(cases: list[dict], processes: int, progress=None, before: list[dict] = ()) -> list[dict]:
    """run_case over the cases, in ``processes`` worker processes (at most 2); ``progress`` sees the
    rows so far (after ``before``)."""
    if processes <= 1:
        return _collect(map(run_case, cases), progress, before)
    import multiprocessing

    with multiprocessing.get_context("fork").Pool(min(2, processes)) as pool:
        return _collect(pool.imap_unordered(run_case, cases), progress, before)


def _collect(results, progress, before) -> list[dict]:
    rows = []
    for case_rows in results:
        rows += case_rows
        if progress:
            progress(list(before) + rows)
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--stations", type=int, default=2000, help="stations to grade at least (default 2000)")
    parser.add_argument("--quick", action="store_true", help="about 150 stations")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--processes", type=int, default=2, choices=(1, 2))
    parser.add_argument("--json", type=Path, help="write every seam row (case parameters, truth, stations) here")
    parser.add_argument("--plot", type=Path, help="coverage per order against edge / r, PNG")
    parser.add_argument("--report", type=Path, help="write the tables (markdown) here")
    parser.add_argument("--case", type=int, help="replay one case seed (from the --rows dump if given) and print "
                        "its seams' stations")
    parser.add_argument("--rows", type=Path, help="tabulate the rows of an earlier --json dump instead of grading")
    parser.add_argument("--cell", type=int, default=None, help="parts in the acceptance cell (default 30, quick 6)")
    parser.add_argument("--compare", type=Path, nargs="+", help="dumps (of one seed, e.g. before and after an "
                        "estimator change): issue 13's acceptance table of each over the seams they share")
    args = parser.parse_args()
    if args.case is not None:
        replay(args.case, args.rows)
        return
    if args.compare:
        print(compare(args.compare))
        return
    t0 = time.perf_counter()

    def progress(rows):
        n = sum(len(r["stations"]) for r in rows)
        print(f"  {len(rows)} seams, {n} stations, {time.perf_counter() - t0:.0f} s", file=sys.stderr, flush=True)

    if args.rows:
        dump = json.loads(args.rows.read_text())
    else:
        cell_cases = args.cell if args.cell is not None else (6 if args.quick else 30)
        dump = {"seed": args.seed, "random": run(150 if args.quick else args.stations, args.seed, args.processes,
                                                 progress),
                "cell": run_cell(args.seed, args.processes, cell_cases, progress)}
    text = report(dump["random"], dump["cell"], dump["seed"])
    print(text)
    if args.report:
        args.report.write_text(text)
    if args.json:
        args.json.write_text(json.dumps(dump, indent=1))
    if args.plot:
        plot(dump["random"], args.plot)


def compare(paths: list[Path]) -> str:
    """Issue 13's acceptance table of each dump, over the seams (case seed and seam) all of them hold."""
    dumps = [json.loads(path.read_text()) for path in paths]

    def key(row):
        return row["case"]["seed"], row["seam"]

    shared = set.intersection(*({key(r) for r in d["random"] + d["cell"]} for d in dumps))
    lines = []
    for path, dump in zip(paths, dumps):
        rows, cell = ([r for r in dump[part] if key(r) in shared] for part in ("random", "cell"))
        lines += [f"{path.name}: {len(rows)} seams, {sum(len(r['stations']) for r in rows)} stations, "
                  f"{len(cell)} seams of the cell", ""] + acceptance(rows, cell)
    return "\n".join(lines)


def replay(seed: int, rows: Path | None) -> None:
    """Grade one case again, from its seed or from its parameters in a dump, and print its rows."""
    if rows is None:
        case = draw_case(seed)
    else:
        dump = json.loads(rows.read_text())
        case = next(r["case"] for r in dump["random"] + dump["cell"] if r["case"]["seed"] == seed)
    print(json.dumps(case))
    for row in run_case(case):
        print(json.dumps({k: v for k, v in row.items() if k != "case"}))


if __name__ == "__main__":
    main()
