"""Segmentation and transfer: accuracy against the synthetic parts' known faces, and times.

Run from the project root: `PYTHONPATH=.:tests python benchmarks/segment_bench.py`. Prints markdown
tables (used in docs/segmentation.md). The fine alignment is timed beside trimesh.registration.icp
(point-to-point, the reference library) started from the same coarse pose in the same run.
"""

from __future__ import annotations

import time

import numpy as np
import trimesh

from surfcheck.demo.scenario import EDGE, SCAN_MOTION, housing_part, scanned_part
from surfcheck.segmentation.segment import segment_part
from surfcheck.segmentation.transfer import MAX_SAMPLES, Target, sample_vertices, align, coarse_pose, transfer_groups
from tests.fixtures.synthetic_parts import boss_on_plate, bracket, housing, scanned

NOISE = 0.02


def best_group(truth, seg, t):
    """The found group holding most of true piece t's area, and the share of that area it holds."""
    mine = truth.face_group == t
    area = np.bincount(seg.part.face_group[mine], truth.face_areas[mine], len(seg.part.group_names))
    return seg.part.group_names[int(np.argmax(area))], float(area.max() / area.sum())


def segmentation_row(name: str, scan, noise: float, truth, entry) -> None:
    """Segment ``scan``, timed, and print its row: per true piece t, ``entry(t, seg, group, share)``
    with the group holding most of the piece and the share of its area recovered."""
    start = time.perf_counter()
    seg = segment_part(scan)
    took = time.perf_counter() - start
    shares = [entry(t, seg, *best_group(truth, seg, t)) for t in range(len(truth.group_names))]
    print(f"| {name} | {scan.n_faces} | {noise} | {took:.1f} | {len(seg.groups)} | {'; '.join(shares)} |")


def segmentation_rows():
    cases = [("bracket", *bracket()), ("boss on plate", *boss_on_plate()), ("housing G2/G3", *housing())]
    print("| part | faces | noise (mm) | time (s) | groups found | true piece -> group: area recovered |")
    print("|---|---|---|---|---|---|")
    for name, truth, profile in cases:

        def entry(t, seg, g, share, profile=profile):
            kind = profile.kinds[t]
            label = {"wall": "wall", "arc": f"r{profile.radii[t]:g}"}.get(kind, kind)
            extra = ""
            if kind == "arc":
                mean = seg.group(g).fillet.mean
                extra = f" r={mean:.3f} ({100 * (mean / profile.radii[t] - 1):+.2f} %)"
            return f"{label}->{g} {100 * share:.1f} %{extra}"

        segmentation_row(name, scanned(truth, NOISE, seed=3)[0], NOISE, truth, entry)
    scan, truth = scanned_part(), housing_part(edge=0.9 * EDGE, skew=0.3)
    segmentation_row("demo housing scan", scan, 0.01, truth,
                     lambda t, seg, g, share: f"{truth.group_names[t]}->{g} {100 * share:.1f} %")


def transfer_rows():
    print("\n| part | faces | align (s) | rms (mm) | pose error (mm, deg) | right group | fine ICP from the same start: ours (s) / trimesh point-to-point (s), largest pose error on the part (mm) ours / trimesh |")
    print("|---|---|---|---|---|---|---|")
    rotation, shift = SCAN_MOTION
    demo_motion = np.eye(4)
    demo_motion[:3, :3], demo_motion[:3, 3] = rotation, shift
    cases = [("bracket", *scanned(bracket()[0], NOISE, seed=5), bracket()[0]),
             ("housing G2/G3", *scanned(housing()[0], NOISE, seed=5), housing()[0]),
             ("demo housing scan (own triangulation)", scanned_part(), demo_motion, housing_part())]
    for name, scan, motion, nominal in cases:
        start = time.perf_counter()
        alignment = align(scan, nominal)
        took = time.perf_counter() - start
        back = alignment.matrix @ motion
        angle = np.degrees(np.arccos(np.clip((np.trace(back[:3, :3]) - 1) / 2, -1, 1)))
        labelled = transfer_groups(nominal, scan, alignment)
        truth = housing_part(edge=0.9 * EDGE, skew=0.3) if name.startswith("demo") else nominal
        right = (labelled.face_group == truth.face_group).mean()
        ours, theirs, drift_ours, drift_theirs = fine_icp_against_trimesh(scan, nominal, motion)
        print(f"| {name} | {scan.n_faces} | {took:.1f} | {alignment.rms:.4f} | {np.linalg.norm(back[:3, 3]):.4f}, "
              f"{angle:.4f} | {100 * right:.2f} % | {ours:.2f} / {theirs:.2f} (ratio {ours / theirs:.2f}), "
              f"{drift_ours:.4f} / {drift_theirs:.4f} |")


def fine_icp_against_trimesh(scan, nominal, motion):
    """Both ICPs from the same coarse pose; each one's largest displacement error on the part."""
    target = Target.of(nominal)
    start = coarse_pose(scan, nominal, target)
    points = sample_vertices(scan, MAX_SAMPLES)
    t0 = time.perf_counter()
    T, *_ = target.icp(points, start, 60)
    t1 = time.perf_counter()
    T_ref, _, _ = trimesh.registration.icp(points, nominal.vertices, initial=start, threshold=1e-9, max_iterations=60)
    t2 = time.perf_counter()

    def drift(M):
        back = M @ motion  # identity for a perfect alignment
        moved = nominal.vertices @ back[:3, :3].T + back[:3, 3]
        return float(np.linalg.norm(moved - nominal.vertices, axis=1).max())

    return t1 - t0, t2 - t1, drift(T), drift(T_ref)


if __name__ == "__main__":
    segmentation_rows()
    transfer_rows()
