"""Time of the curvature-jump and tangent-jump fields on a part of about a million vertices.

Run from the repository root:  PYTHONPATH=. python benchmarks/jumpfield.py [--vertices 1000000]
[--repeat 2]. The part is a circular fillet (plane, quarter circle of radius 1, plane) extruded; the
script prints the time, the neighbourhood radius and the field's peak (true jump: 1/r = 1).
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np

from surfcheck.jumpfield import jump_fields
from tests.surfaces import extruded_profile


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--vertices", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    length = 4.0 + 0.5 * np.pi
    stations = int(np.sqrt(args.vertices * length / 10.0))
    across = args.vertices // stations
    V, F, _ = extruded_profile(
        lambda s: np.where((s >= 2.0) & (s <= 2.0 + 0.5 * np.pi), 1.0, 0.0), length, 10.0, stations, across
    )
    print(f"extruded circular fillet: {len(V)} vertices, {len(F)} triangles")
    times = []
    for _ in range(args.repeat):
        t = time.perf_counter()
        jf = jump_fields(V, F)
        times.append(time.perf_counter() - t)
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    runs = ", ".join(f"{t:.1f}" for t in times)
    print(f"jump_fields: best {min(times):.1f} s of {args.repeat} (all: {runs})")
    print(f"  radius {jf.radius:.4f}; curvature-jump peak {np.nanmax(jf.curvature):.3f} (true 1.0)")
    tangent = np.nanpercentile(jf.tangent, 99)
    print(f"  tangent-jump 99th percentile {tangent:.2f} deg; peak memory {rss:.0f} MiB")


if __name__ == "__main__":
    main()
