"""Grading, segmentation, transfer and maps on parts of millions of triangles: time per step and peak
memory against the part's own arrays.

    PYTHONPATH=. python benchmarks/scale_grading.py [--parts fillet-2M seams-8M] [--steps grade segment transfer map]

Parts (built with surfcheck.demo.shapes, outward-facing, rows skewed so they do not line up):
- fillet-2M: a line, a 60 degree arc of radius 5 and a line, extruded 20 mm at 0.02 mm edges
  (2.1 M triangles, 2 seams of 20 mm);
- seams-8M: 11 lines of 4 mm and 10 arcs of radius 5 and 30 degrees turning alternately left and right,
  extruded 20 mm at 0.0187 mm edges (8.0 M triangles, 20 seams).

Steps, each after the part is in memory (reading is benchmarks/scale.py's):
- grade: `grade --seam all` after the read: the seams found and every seam graded (general profile);
- segment: segment_part on the part without its groups (a scan);
- transfer: align a noisy, moved copy of the part (0.002 mm along the normals) to the grouped part and
  carry the groups over;
- map: the mean curvature field.

Memory: the process's peak resident size during the step (Linux VmHWM, reset before each step
through /proc/self/clear_refs), against the bytes of the part's vertex and face arrays. Timings are
wall clock on a shared machine: the load average is printed beside them.
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.demo import shapes as S  # noqa: E402
from surfcheck.part import Part  # noqa: E402

NOISE = 0.002


def fillet_part() -> Part:
    profile = S.Profile((S.line(8, "a"), S.arc(5.0, "b", angle_deg=60), S.line(8, "c")), start=(30.0, 0.0),
                        heading_deg=90.0)
    return _part(S.extrude(profile, 20.0, 0.02, rotation=1, skew=0.3))


def many_seams_part() -> Part:
    pieces = [S.line(4, "line-0")]
    for i in range(10):
        pieces += [S.arc(5.0 if i % 2 == 0 else -5.0, f"arc-{i}", angle_deg=30), S.line(4, f"line-{i + 1}")]
    return _part(S.extrude(S.Profile(tuple(pieces)), 20.0, 0.0187, rotation=1, skew=0.3))


PARTS = {"fillet-2M": fillet_part, "seams-8M": many_seams_part}


def _part(mesh: S.SyntheticMesh) -> Part:
    return Part(mesh.vertices, mesh.faces, mesh.face_group, mesh.group_names, source="built")


def grade_step(part: Part) -> str:
    from surfcheck.grading.run import grade_part
    from surfcheck.grading.selection import select_seams
    from surfcheck.grading.tolerances import GENERAL

    chosen = select_seams(part, ["all"], None)
    run = grade_part(chosen.part, chosen.seams, GENERAL)
    stations = sum(len(s.stations) for s in run.seams)
    return f"{len(run.seams)} seams, {stations} stations, achieved {sorted({g.achieved for g in run.grades})}"


def segment_step(part: Part) -> str:
    from surfcheck.segmentation.segment import segment_part

    scan = Part(part.vertices, part.faces, np.zeros(part.n_faces, dtype=np.int64), ("scan",), source="scan")
    return f"{len(segment_part(scan).groups)} groups"


def transfer_step(part: Part) -> str:
    from surfcheck.segmentation.transfer import align, transfer_groups

    moved = S.add_normal_noise(part.vertices, part.faces, NOISE, seed=1) + np.array([0.1, 0.05, 0.0])
    scan = Part(moved, part.faces, np.zeros(part.n_faces, dtype=np.int64), ("scan",), source="scan")
    alignment = align(scan, part)
    labelled = transfer_groups(part, scan, alignment)
    # the parts are symmetric (a half turn maps each onto itself, swapping end groups), so the share of
    # triangles given their own group says nothing; the rms of the alignment does
    return f"rms {alignment.rms:.2g}, inliers {100 * alignment.inlier_fraction:.1f} %, {len(labelled.group_names)} groups"


def map_step(part: Part) -> str:
    from surfcheck.geometry.fields import vertex_field

    values = vertex_field(part, "mean").values
    return f"median mean curvature {np.nanmedian(values):.3g}"


STEPS = {"grade": grade_step, "segment": segment_step, "transfer": transfer_step, "map": map_step}


def _peak_reset() -> None:
    with open("/proc/self/clear_refs", "w") as f:
        f.write("5")


def _status(field: str) -> int:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1]) * 1024
    return 0


def measure(name: str, part: Part, step) -> None:
    before = _status("VmRSS")
    _peak_reset()
    load = os.getloadavg()[0]
    start = time.perf_counter()
    what = step(part)
    took = time.perf_counter() - start
    peak = _status("VmHWM")
    arrays = part.vertices.nbytes + part.faces.nbytes
    print(f"| {name} | {took:.1f} | {peak / 1e9:.2f} | {(peak - before) / 1e9:.2f} | {arrays / 1e9:.3f} |"
          f" {peak / arrays:.1f} | {load:.1f} | {what} |", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--parts", nargs="+", default=list(PARTS), choices=list(PARTS))
    parser.add_argument("--steps", nargs="+", default=list(STEPS), choices=list(STEPS))
    args = parser.parse_args()
    print(f"{platform.node()}: {os.cpu_count()} cores, {platform.processor() or platform.machine()}, "
          f"python {platform.python_version()}, numpy {np.__version__}; {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}")
    for name in args.parts:
        start = time.perf_counter()
        part = PARTS[name]()
        print(f"\n{name}: {part.n_vertices:,} vertices, {part.n_faces:,} triangles, {len(part.group_names)} groups"
              f" (built in {time.perf_counter() - start:.1f} s)\n")
        print("| step | time [s] | peak resident [GB] | peak above the part in memory [GB] | vertex + face arrays [GB] |"
              " peak / arrays | load average | result |")
        print("|---|---|---|---|---|---|---|---|")
        for step in args.steps:
            measure(step, part, STEPS[step])
            part = Part(part.vertices, part.faces, part.face_group, part.group_names, source=part.source)  # no caches carried over
        del part


if __name__ == "__main__":
    main()
