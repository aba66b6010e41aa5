"""Grading benchmarks: speed on a ~1,000,000-vertex part, accuracy of the jumps against analytic
truth, the noise level up to which each order is still resolved, and the calibration of the stated
uncertainties on noisy data.

    PYTHONPATH=. python benchmarks/grading.py [--quick | --calibration-only]

--calibration-only measures what the choice of window and degree trades: calibration (seeds 1-4),
the resolution table at 0.01 and 0.02 mm (seeds 1, 2), the one-sided errors / u on the demo scan's
lip-blend seams (truth 0: a plane meets a cubic smooth-step curvature ramp) and the demo scan's
achieved orders through the nominal.

Speed is reported against trimesh's plane section (trimesh.intersections.mesh_plane) at the same
stations, measured in the same run: a single plane cut per station, the minimum any section-based
grader must do (ours reads a strip of vertices and fits both sides instead).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.demo import shapes as S  # noqa: E402
from surfcheck.grading.run import grade_seam  # noqa: E402
from surfcheck.grading.sections import cut_sections  # noqa: E402
from surfcheck.grading.tolerances import GENERAL, SCAN  # noqa: E402
from tests.fixtures.synthetic import RADIUS, RAMP, build, fillet, part_and_seams  # noqa: E402

DESIGNED = {"sharp": 0, "arc": 1, "clothoid": 2, "smoothstep": 3}


def speed(edge: float, depth: float) -> None:
    import trimesh

    t0 = time.perf_counter()
    mesh = S.extrude(fillet("smoothstep"), depth, edge, rotation=1)
    part, seams = part_and_seams(mesh)
    t_build = time.perf_counter() - t0
    print(f"part: {part.n_vertices:,} vertices, {part.n_faces:,} faces, {len(seams)} seams (built in {t_build:.1f} s)")
    total, stations = 0.0, 0
    for seam in seams:
        t0 = time.perf_counter()
        g = grade_seam(part, seam, GENERAL)
        dt = time.perf_counter() - t0
        total += dt
        stations += len(g.stations)
        print(f"  {seam.id}: {len(g.stations)} stations, achieved {g.achieved}, {dt:.2f} s")
    sections = cut_sections(part, seams[0])
    tm = trimesh.Trimesh(part.vertices, part.faces, process=False)
    t0 = time.perf_counter()
    for sec in sections:
        trimesh.intersections.mesh_plane(tm, sec.tangent, sec.origin)
    t_cut = (time.perf_counter() - t0) / len(sections)
    per_station = total / stations
    print(f"grading: {total:.1f} s for {stations} stations ({per_station * 1e3:.0f} ms per station, "
          f"first call includes the adjacency and KD-trees)")
    print(f"trimesh plane section: {t_cut * 1e3:.0f} ms per station; ratio ours / trimesh = {per_station / t_cut:.2f}")


def accuracy() -> None:
    print("\naccuracy on clean meshes (edge 0.1 mm, extruded and revolved, rotated): |measured - truth| and u")
    truth = {"arc": (2, 1.0 / RADIUS), "clothoid": (3, 1.0 / (RADIUS * RAMP)), "smoothstep": (3, 0.0),
             "sharp": (1, 60.0)}
    names = ("G0", "G1", "G2", "G3")
    for kind, (order, value) in truth.items():
        errors, us = [], []
        for sweep in ("extrude", "revolve"):
            part, seams = part_and_seams(build(kind, sweep, rotation=5))
            for seam in seams:
                for st in grade_seam(part, seam, GENERAL).stations:
                    errors.append(abs(st.orders[order].value - value))
                    us.append(st.orders[order].uncertainty)
        print(f"  {kind:10s} {names[order]} truth {value:.6g}: max error {max(errors):.2e}, max u {max(us):.2e}")


def resolution(sigmas, seeds) -> None:
    print("\nnoise (mm, along the normals; edge 0.1 mm, scan profile): fraction of stations where each order "
          "is decided correctly for the designed class (ok below it, fail at it)")
    for kind in DESIGNED:
        for sigma in sigmas:
            orders = range(min(4, DESIGNED[kind] + 2))  # the designed orders and the next (which fails)
            right = np.zeros(4)
            count = 0
            for seed in seeds:
                mesh = build(kind, "extrude", rotation=seed)
                V = S.add_normal_noise(mesh.vertices, mesh.faces, sigma, seed=seed)
                part, seams = part_and_seams(mesh, V)
                for seam in seams:
                    for st in grade_seam(part, seam, SCAN).stations:
                        count += 1
                        for k in orders:
                            want = "ok" if k <= DESIGNED[kind] or SCAN_OK.get((kind, k)) else "fail"
                            right[k] += st.orders[k].status == want
            cells = " ".join(f"G{k} {right[k] / count:4.2f}" for k in orders)
            print(f"  {kind:10s} sigma {sigma:6.3f}: {cells}")


# under the scan profile the clothoid's rate jump 1/(r L) = 0.025 lies inside the G3 tolerance 0.05
SCAN_OK = {("clothoid", 3): True}


def calibration(seeds) -> None:
    print("\ncalibration at sigma 0.01 mm: fraction of stations with |measured - truth| <= 2u (95 % nominal)")
    truth = {"arc": (2, 1.0 / RADIUS), "clothoid": (3, 1.0 / (RADIUS * RAMP)), "smoothstep": (2, 0.0)}
    for kind, (order, value) in truth.items():
        inside = total = 0
        for seed in seeds:
            mesh = build(kind, "extrude", rotation=seed)
            V = S.add_normal_noise(mesh.vertices, mesh.faces, 0.01, seed=seed)
            part, seams = part_and_seams(mesh, V)
            for seam in seams:
                for st in grade_seam(part, seam, SCAN).stations:
                    r = st.orders[order]
                    total += 1
                    inside += abs(r.value - value) <= 2 * r.uncertainty
        print(f"  {kind:10s} G{order}: {inside}/{total} = {inside / total:.2f}")


LIP_SEAMS = ("front-wall|lip-blend", "lip-blend|underside")


def demo_scan():
    """The demo scan labelled through the nominal part: (part, seams by their groups "a|b")."""
    from surfcheck.io import load_part
    from surfcheck.grading.selection import select_seams

    root = Path(__file__).resolve().parents[1] / "sample_meshes"
    sel = select_seams(load_part(root / "housing-scan.stl"), ["all"], load_part(root / "housing.obj"))
    return sel.part, {"|".join(seam.groups): seam for seam in sel.seams}


def demo_lip(part, seams) -> None:
    """Per station and side, |kappa| / u and |rate| / u on the lip-blend seams (truth 0 on both sides)."""
    from surfcheck.grading.continuity import fit_sides

    print("\ndemo scan via nominal, lip-blend seams at 8 stations: |error| / u per station, sides A / B "
          "(truth 0 for curvature and rate)")
    for seam_id in LIP_SEAMS:
        worst = 0.0
        for sec in cut_sections(part, seams[seam_id], 8):
            sides = fit_sides(sec)
            a, b = sides.a, sides.b
            z = [abs(e.values[q]) / np.sqrt(e.variances[q]) for q in (2, 3) for e in (a, b)]
            worst = max(worst, *z)
            print(f"  {seam_id} station {sec.index}: kappa {z[0]:5.1f} / {z[1]:5.1f}  rate {z[2]:5.1f} / {z[3]:5.1f}"
                  f"   (kappa A {a.values[2]:+.4f} +- {np.sqrt(a.variances[2]):.4f}, "
                  f"B {b.values[2]:+.4f} +- {np.sqrt(b.variances[2]):.4f})")
        print(f"  {seam_id}: worst {worst:.1f} u")


def demo_achieved(part, seams) -> None:
    """Each seam's achieved order and what limits it, at the default stations and at 8."""
    print("\ndemo scan via nominal, scan profile: achieved per seam (default stations; 8 stations)")
    for seam_id, seam in seams.items():
        default, eight = grade_seam(part, seam, SCAN), grade_seam(part, seam, SCAN, 8)
        print(f"  {seam_id:28s} {default.achieved:2d} ({len(default.stations)} stations; {_limit(default)})  "
              f"{eight.achieved:2d} (8; {_limit(eight)})")


def _limit(grade) -> str:
    limit = grade.limited_by
    return "G3 ok" if limit is None else f"{limit[0]} {limit[1]}"


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="smaller part and fewer noise levels")
    parser.add_argument("--calibration-only", action="store_true",
                        help="calibration, resolution at 0.01 and 0.02 mm and the demo scan's lip seams")
    args = parser.parse_args()
    if args.calibration_only:
        calibration((1, 2, 3, 4))
        part, seams = demo_scan()
        demo_lip(part, seams)
        demo_achieved(part, seams)
        resolution((0.01, 0.02), (1, 2))
        return
    speed(0.06, 13.0) if args.quick else speed(0.03, 26.0)
    accuracy()
    sigmas = (0.003, 0.01, 0.03) if args.quick else (0.001, 0.003, 0.01, 0.02, 0.05)
    seeds = (1, 2) if args.quick else (1, 2, 3, 4)
    resolution(sigmas, seeds)
    calibration(seeds)


if __name__ == "__main__":
    main()
