"""The demo's production lot: scans of the housing shell (demo.scenario) as a line would deliver
them, each in its own pose with its own measurement noise, and a few with a defect built in
(run_lot_demo grades a dozen through the nominal on a local Dask cluster):

- "flattened-blend": the front blend's curvature ramps (clothoids) flattened into one circular arc
  through the same end points, so the curvature jumps at both of its seams (G1 only where G2 is built);
- "kinked-blend": the top runs into the front blend at a KINK_DEG corner (a G0 seam where G2 is built);
- "moved-shell": the front blend a separate shell standing SHELL_LIFT_MM off the top, along the top's
  normal (a G0 gap at both of its seams: graded through the nominal, a gap is a grade, not an error).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from scipy.spatial.transform import Rotation

from surfcheck.io import save_part
from surfcheck.grading.request import GradeRequest
from surfcheck.lots.run import run_lot
from surfcheck.part import Part
from surfcheck.demo.scenario import EDGE, SCAN_NOISE, housing_part, housing_profile
from surfcheck.demo.shapes import Profile, add_normal_noise, arc, corner

DEFECTS = ("flattened-blend", "kinked-blend", "moved-shell")
KINK_DEG = 6.0  # degrees of the kinked part's corner: three times the scan profile's G1 tolerance
SHELL_LIFT_MM = 0.3  # the moved shell's offset: six times the scan profile's G0 tolerance
POSE_DEG, POSE_MM = 1.5, 0.5  # spread of a scan's pose: rotation about each axis, shift along each
BLEND = ("front-blend-in", "front-blend-arc", "front-blend-out")
LOT_SEAMS = ("top:front-blend", "front-blend:front-wall")  # the blend the defects touch, built G2
LOT_TOLERANCE, LOT_REQUIREMENT = "scan", "G2"


def lot_profile(defect: str | None = None) -> Profile:
    """The housing's cross-section, as built (None or "moved-shell", a defect of placement, not of
    shape) or with one of the other DEFECTS."""
    nominal = housing_profile()
    if defect in (None, "moved-shell"):
        return nominal
    pieces = list(nominal.pieces)
    first = next(i for i, p in enumerate(pieces) if p.name == BLEND[0])
    blend = pieces[first:first + len(BLEND)]
    turn = sum(p.turning(np.array([p.length]))[0] for p in blend)
    if defect == "flattened-blend":
        ends = Profile(tuple(blend)).points(np.array([0.0, sum(p.length for p in blend)]))
        radius = np.linalg.norm(ends[1] - ends[0]) / (2.0 * np.sin(turn / 2.0))  # the arc of the same chord
        share = [p.length / sum(q.length for q in blend) for p in blend]
        replaced = [arc(radius, p.name, angle_deg=np.degrees(turn) * w) for p, w in zip(blend, share)]
    elif defect == "kinked-blend":
        middle = blend[1]
        shorter = np.degrees(middle.k_start * middle.length) - KINK_DEG  # the corner takes over KINK_DEG of the turn
        replaced = [corner(KINK_DEG), blend[0], arc(1.0 / middle.k_start, middle.name, angle_deg=shorter), blend[2]]
    else:
        raise ValueError(f"unknown defect {defect!r}; one of {', '.join(DEFECTS)}")
    pieces[first:first + len(BLEND)] = replaced
    return Profile(tuple(pieces), nominal.start, nominal.heading_deg)


def lot_scan(seed: int, defect: str | None = None, edge: float = EDGE, noise: float = SCAN_NOISE) -> Part:
    """One scan of the lot: the shell (with ``defect``) sampled in its own staggered triangulation
    about 0.9 ``edge`` apart, with normal noise of standard deviation ``noise`` and a small random
    pose (seeded by ``seed``), without groups."""
    rng = np.random.default_rng(seed)
    lift = {piece: (0.0, SHELL_LIFT_MM, 0.0) for piece in BLEND} if defect == "moved-shell" else None
    sampled = housing_part(edge=0.9 * edge, skew=0.3, profile=lot_profile(defect), offsets=lift)
    rotation = Rotation.from_euler("xyz", rng.uniform(-POSE_DEG, POSE_DEG, 3), degrees=True).as_matrix()
    noisy = add_normal_noise(sampled.vertices, sampled.faces, noise, seed=seed)
    moved = noisy @ rotation.T + rng.uniform(-POSE_MM, POSE_MM, 3)
    return Part(moved, sampled.faces, np.zeros(sampled.n_faces, dtype=np.int64), ("scan",), "mm", f"scan-{seed}")


def write_lot(folder: str | Path, count: int = 12, defects: dict[int, str] | None = None,
              edge: float = EDGE) -> dict[str, Path]:
    """Write ``count`` scans (binary STL, scan-01.stl ...) to ``folder``; ``defects`` maps a scan's
    number (1-based) to its defect (default: the 4th flattened, the 9th kinked, the 11th moved).
    Returns name -> path."""
    defects = {4: DEFECTS[0], 9: DEFECTS[1], 11: DEFECTS[2]} if defects is None else defects
    folder = Path(folder)
    written = {}
    for number in range(1, count + 1):
        name = f"scan-{number:02d}.stl"
        written[name] = save_part(lot_scan(100 + number, defects.get(number), edge), folder / name)
    return written


def run_lot_demo(out: str | Path, nominal: str | Path, say=print) -> dict:
    """Write a dozen scans to ``out``/scans (the 4th flattened, the 9th kinked, the 11th moved) and grade them as a lot
    through ``nominal`` on a local Dask cluster; the lot folder is ``out``. Returns the lot's summary."""
    out = Path(out)
    write_lot(out / "scans")
    request = GradeRequest(LOT_SEAMS, LOT_TOLERANCE, LOT_REQUIREMENT, nominal=str(nominal))
    summary = run_lot([out / "scans"], request, out, force=True).summary()
    yields = ", ".join(f"{s['seam']} {100 * s['yield']:.0f} %" for s in summary["seams"])
    say(f"lot of {summary['parts']} scans through {Path(nominal).name} at {LOT_REQUIREMENT} ({LOT_TOLERANCE} profile):"
        f" yield {yields}; not shown to meet it: {', '.join(summary['failing']) or 'none'}, of them with a defect"
        f" shown: {', '.join(summary['defective']) or 'none'}; lot page {summary['files']['page']}")
    return summary
