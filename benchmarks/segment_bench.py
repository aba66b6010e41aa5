"""Segmentation and transfer: accuracy against the synthetic parts' known faces, and times.

Run from the project root: `PYTHONPATH=.:tests python benchmarks/segment_bench.py`. Prints markdown
tables (used in docs/segmentation.md). The fine alignment is timed beside trimesh.registration.icp
(point-to-point, the reference library) started from the same coarse pose in the same run.
"""

from __future__ import annotations

import time

import numpy as np
import trimesh

from surfcheck.demo import EDGE, SCAN_MOTION, housing_part, scanned_part
from surfcheck.segment import segment_part
from surfcheck.transfer import _icp, _moments, _proper_axis_maps, _samples, align, transfer_groups
from synthetic_parts import boss_on_plate, bracket, housing, scanned

NOISE = 0.02


def segmentation_rows():
    cases = [("bracket", *bracket()), ("boss on plate", *boss_on_plate()), ("housing G2/G3", *housing())]
    print("| part | faces | noise (mm) | time (s) | groups found | true piece -> group: area recovered |")
    print("|---|---|---|---|---|---|")
    for name, truth, profile in cases:
        scan, _ = scanned(truth, NOISE, seed=3)
        start = time.perf_counter()
        seg = segment_part(scan)
        took = time.perf_counter() - start
        shares = []
        for t, kind in enumerate(profile.kinds):
            mine = truth.face_group == t
            area = np.bincount(seg.part.face_group[mine], truth.face_areas[mine], len(seg.part.group_names))
            g = int(np.argmax(area))
            label = {"wall": "wall", "arc": f"r{profile.radii[t]:g}"}.get(kind, kind)
            extra = ""
            group = seg.group(seg.part.group_names[g])
            if kind == "arc":
                extra = f" r={group.fillet.mean:.3f} ({100 * (group.fillet.mean / profile.radii[t] - 1):+.2f} %)"
            shares.append(f"{label}->{seg.part.group_names[g]} {100 * area[g] / area.sum():.1f} %{extra}")
        print(f"| {name} | {scan.n_faces} | {NOISE} | {took:.1f} | {len(seg.groups)} | {'; '.join(shares)} |")
    demo_rows()


def demo_rows():
    nominal, scan = housing_part(), scanned_part()
    truth = housing_part(edge=0.9 * EDGE, skew=0.3)
    start = time.perf_counter()
    seg = segment_part(scan)
    took = time.perf_counter() - start
    shares = []
    for t, name in enumerate(truth.group_names):
        mine = truth.face_group == t
        area = np.bincount(seg.part.face_group[mine], truth.face_areas[mine], len(seg.part.group_names))
        g = int(np.argmax(area))
        shares.append(f"{name}->{seg.part.group_names[g]} {100 * area[g] / area.sum():.1f} %")
    print(f"| demo housing scan | {scan.n_faces} | 0.01 | {took:.1f} | {len(seg.groups)} | {'; '.join(shares)} |")
    del nominal


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
    """Both ICPs from the same coarse pose (the best axis map after the coarse stage)."""
    from scipy.spatial import cKDTree

    normals = trimesh.Trimesh(nominal.vertices, nominal.faces, process=False).vertex_normals
    tree = cKDTree(nominal.vertices)
    ms, axes_s, _ = _moments(scan)
    mn, axes_n, _ = _moments(nominal)
    coarse = _samples(scan, 1000)
    best = None
    for M in _proper_axis_maps():
        R = axes_n @ M @ axes_s.T
        start = np.eye(4)
        start[:3, :3], start[:3, 3] = R, mn - R @ ms
        T, rms, share, _ = _icp(coarse, tree, nominal.vertices, normals, start, 6, 1e-6 * nominal.diagonal)
        if best is None or rms / share < best[0]:
            best = (rms / share, T)
    points = _samples(scan, 10000)
    t0 = time.perf_counter()
    T, *_ = _icp(points, tree, nominal.vertices, normals, best[1], 60, 1e-6 * nominal.diagonal)
    t1 = time.perf_counter()
    T_ref, _, _ = trimesh.registration.icp(points, nominal.vertices, initial=best[1], threshold=1e-9, max_iterations=60)
    t2 = time.perf_counter()

    def drift(M):
        back = M @ motion  # identity for a perfect alignment
        moved = nominal.vertices @ back[:3, :3].T + back[:3, 3]
        return float(np.linalg.norm(moved - nominal.vertices, axis=1).max())

    return t1 - t0, t2 - t1, drift(T), drift(T_ref)


if __name__ == "__main__":
    segmentation_rows()
    transfer_rows()
