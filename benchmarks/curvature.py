"""Accuracy and speed of surfcheck's jet-fit curvatures against libigl and VTK, measured in one run.

Run from the repository root:  PYTHONPATH=. python benchmarks/curvature.py [--vertices 1000000]
[--repeat 3] [--no-accuracy] [--no-libigl]. Prints a table of median / 95th-percentile absolute errors
of k1 and k2 (1/unit) against the analytic values (do Carmo 1976) and, on a torus of about --vertices
vertices, the times of principal_curvatures and of libigl's principal_curvature, their ratio and errors.
The first call, in which numba compiles the kernels or loads them from its cache (cache=True), is timed
on a small mesh and reported apart from the steady-state runs.
"""

from __future__ import annotations

import argparse
import resource
import time

import igl
import numpy as np
import pyvista as pv

from surfcheck.geometry import differential
from surfcheck.geometry.differential import principal_curvatures
from tests.fixtures.surfaces import cylinder, sphere, torus


def errors(estimate, exact):
    e = np.abs(np.asarray(estimate) - exact)
    return np.median(e), np.percentile(e, 95)


def by_libigl(s):
    _, _, k1, k2, _ = igl.principal_curvature(s.V, s.F)
    return k1, k2


def by_vtk(s):
    mesh = pv.PolyData(s.V, np.hstack([np.full((len(s.F), 1), 3), s.F]).ravel())
    return mesh.curvature("maximum"), mesh.curvature("minimum")


def by_surfcheck(s):
    c = principal_curvatures(s.V, s.F)
    return c.k1, c.k2


def accuracy_table() -> None:
    meshes = {
        "sphere R=2, 10k, jittered 0.3 edge": sphere(2.0, 5, jitter=0.3),
        "sphere R=2, 10k, noise 0.1% R": sphere(2.0, 5).with_noise(0.002),
        "open cylinder R=1, 20k, jittered": cylinder(1.0, 3.0, 200, 100, jitter=0.2),
        "torus 3/1, 30k, regular": torus(3.0, 1.0, 300, 100),
        "torus 3/1, 30k, irregular": torus(3.0, 1.0, 300, 100, jitter=0.25, warp=0.5),
        "torus 3/1, 30k, irregular + noise 0.1% r": torus(3.0, 1.0, 300, 100, 0.25, 0.5).with_noise(0.001),
        "torus 3/1, 120k, irregular + noise 0.1% r": torus(3.0, 1.0, 600, 200, 0.25, 0.5).with_noise(0.001),
    }
    print("| mesh | method | k1 median | k1 p95 | k2 median | k2 p95 |")
    print("|---|---|---|---|---|---|")
    for name, s in meshes.items():
        for method, run in (("surfcheck", by_surfcheck), ("libigl", by_libigl), ("VTK", by_vtk)):
            k1, k2 = run(s)
            (m1, p1), (m2, p2) = errors(k1, s.k1), errors(k2, s.k2)
            print(f"| {name} | {method} | {m1:.4f} | {p1:.4f} | {m2:.4f} | {p2:.4f} |", flush=True)


def first_call() -> float:
    """Time of a first fit on a small mesh, in which numba compiles every kernel or loads it from its
    cache (set NUMBA_CACHE_DIR to an empty folder to time a cold compile)."""
    s = torus(3.0, 1.0, 30, 10)
    t = time.perf_counter()
    principal_curvatures(s.V, s.F)
    first = time.perf_counter() - t
    origin = "loaded from the cache" if differential._jet_kernel.stats.cache_hits else "compiled"
    print(f"first call on a small mesh (kernels {origin}): {first:.2f} s")
    return first


def speed(vertices: int, repeat: int, with_libigl: bool, first: float) -> None:
    nv = int(round(np.sqrt(vertices / 3.0)))
    s = torus(3.0, 1.0, 3 * nv, nv)
    print(f"\ntorus 3/1 with {len(s.V)} vertices, {len(s.F)} triangles")
    rss_before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        c = principal_curvatures(s.V, s.F)
        times.append(time.perf_counter() - t)
    rss_after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    ours = min(times)
    (m1, p1), (m2, p2) = errors(c.k1, s.k1), errors(c.k2, s.k2)
    print(f"surfcheck: best {ours:.2f} s of {repeat} (all: {', '.join(f'{t:.2f}' for t in times)}), "
          f"radius {c.radius:.4f}, {c.neighbours.mean():.1f} neighbours")
    print(f"  errors k1 median {m1:.5f} p95 {p1:.5f}, k2 median {m2:.5f} p95 {p2:.5f}")
    print(f"  peak resident memory {rss_after:.0f} MiB (before the runs {rss_before:.0f} MiB)")
    if not with_libigl:
        return
    t = time.perf_counter()
    k1, k2 = by_libigl(s)
    theirs = time.perf_counter() - t
    (m1, p1), (m2, p2) = errors(k1, s.k1), errors(k2, s.k2)
    print(f"libigl principal_curvature: {theirs:.2f} s")
    print(f"  errors k1 median {m1:.5f} p95 {p1:.5f}, k2 median {m2:.5f} p95 {p2:.5f}")
    print(f"ratio libigl / surfcheck: {theirs / ours:.1f}x (steady state); "
          f"{theirs / (ours + first):.1f}x counting the first call's compile or cache load")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--vertices", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--no-accuracy", action="store_true")
    parser.add_argument("--no-libigl", action="store_true")
    args = parser.parse_args()
    first = first_call()
    if not args.no_accuracy:
        accuracy_table()
    speed(args.vertices, args.repeat, not args.no_libigl, first)


if __name__ == "__main__":
    main()
