"""Boundary walk on a sheet with many holes: surfcheck's loops and chains against trimesh's boundary
outline (Trimesh.outline) on the same mesh, in the same run.

    PYTHONPATH=. python benchmarks/boundary_walk.py [--cells 316] [--holes 1000 3000 10000]

A grid of 2 * cells^2 triangles loses ``holes`` random triangles; the walk must stay linear in the
part's size (it was quadratic in the number of holes: 1,000 holes took 16 s).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import trimesh

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.part import Part  # noqa: E402
from surfcheck.seams import SeamIndex  # noqa: E402


def holed_sheet(cells: int, holes: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    x, y = np.meshgrid(np.arange(cells + 1.0), np.arange(cells + 1.0))
    V = np.c_[x.ravel(), y.ravel(), np.zeros(x.size)]
    i, j = np.meshgrid(np.arange(cells), np.arange(cells))
    a = (j * (cells + 1) + i).ravel()
    F = np.concatenate([np.c_[a, a + 1, a + cells + 2], np.c_[a, a + cells + 2, a + cells + 1]])
    keep = np.ones(len(F), dtype=bool)
    keep[np.random.default_rng(seed).choice(len(F), holes, replace=False)] = False
    return V, F[keep]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=316)
    parser.add_argument("--holes", type=int, nargs="+", default=[1000, 3000, 10000])
    args = parser.parse_args()
    print(f"{'holes':>6} {'faces':>7} {'loops':>6} {'surfcheck s':>12} {'trimesh s':>10} {'ratio':>6}")
    for holes in args.holes:
        V, F = holed_sheet(args.cells, holes)
        start = time.perf_counter()
        index = SeamIndex(Part(V, F, np.zeros(len(F), dtype=np.int64), ("all",)))
        loops = len(index.loops)
        len(index.chains)
        ours = time.perf_counter() - start
        start = time.perf_counter()
        trimesh.Trimesh(V, F, process=False).outline()
        theirs = time.perf_counter() - start
        print(f"{holes:>6} {len(F):>7} {loops:>6} {ours:>12.2f} {theirs:>10.2f} {ours / theirs:>6.1f}")


if __name__ == "__main__":
    main()
