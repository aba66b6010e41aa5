"""Time of the curvature-jump and tangent-jump fields on a part of about a million vertices, against
principal_curvatures on the same part in the same run.

Run from the repository root:  PYTHONPATH=. python benchmarks/jumpfield.py [--vertices 1000000]
[--repeat 2]. The part is a circular fillet (plane, quarter circle of radius 1, plane) extruded. Both
functions are called once on a small part first, so numba's compile or cache load is timed apart; then
each of --repeat rounds runs jump_fields and principal_curvatures once. The script prints the best
run of each, their ratio (the jump fields fit 2 * directions + 1 polynomials per vertex against one,
over 1.5 times the radius), the neighbourhood radius, the field's peak (true jump: 1/r = 1) and the
peak resident memory.
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np

from surfcheck.geometry.differential import principal_curvatures
from surfcheck.geometry.jumpfield import jump_fields
from tests.fixtures.surfaces import extruded_profile


def fillet(vertices: int):
    """An extruded circular fillet of about ``vertices`` vertices, square-ish triangles."""
    length = 4.0 + 0.5 * np.pi
    stations = int(np.sqrt(vertices * length / 10.0))
    V, F, _ = extruded_profile(
        lambda s: np.where((s >= 2.0) & (s <= 2.0 + 0.5 * np.pi), 1.0, 0.0), length, 10.0, stations,
        vertices // stations,
    )
    return V, F


def timed(run):
    t = time.perf_counter()
    result = run()
    return time.perf_counter() - t, result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--vertices", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    t = time.perf_counter()
    small = fillet(10_000)
    jump_fields(*small)
    principal_curvatures(*small)
    print(f"first calls on a small part (compile or cache load): {time.perf_counter() - t:.2f} s")
    V, F = fillet(args.vertices)
    print(f"extruded circular fillet: {len(V)} vertices, {len(F)} triangles")
    jump_runs, curve_runs = [], []
    for _ in range(args.repeat):  # alternated, so that both see the same swings of the machine's load
        seconds, jf = timed(lambda: jump_fields(V, F))
        jump_runs.append(seconds)
        seconds, c = timed(lambda: principal_curvatures(V, F))
        curve_runs.append(seconds)
    jump, curve = min(jump_runs), min(curve_runs)
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    for name, runs in (("jump_fields", jump_runs), ("principal_curvatures", curve_runs)):
        all_runs = ", ".join(f"{t:.2f}" for t in runs)
        print(f"{name}: best {min(runs):.2f} s of {args.repeat} (all: {all_runs})")
    pairs = ", ".join(f"{j / k:.1f}" for j, k in zip(jump_runs, curve_runs))
    print(f"ratio jump_fields / principal_curvatures: {jump / curve:.1f} of the best runs "
          f"(run by run: {pairs})")
    print(f"  jump radius {jf.radius:.4f} ({jf.radius / c.radius:.2f} x the curvature radius {c.radius:.4f})")
    tangent = np.nanpercentile(jf.tangent, 99)
    print(f"  curvature-jump peak {np.nanmax(jf.curvature):.3f} (true 1.0); tangent-jump 99th percentile "
          f"{tangent:.2f} deg")
    print(f"peak resident memory {rss:.0f} MiB")


if __name__ == "__main__":
    main()
