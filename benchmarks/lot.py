"""Throughput of a lot on the local Dask cluster against the same parts graded one after the other
in one process (grading.request.grade_file, the nominal read once), measured in the same run; and
the cost of the engine itself: the cluster's start, and the round trip of a task that does nothing.

    PYTHONPATH=. python benchmarks/lot.py [--parts 50] [--edge 0.4] [--workers N]

The parts are the demo lot's scans (demo/lot.py: noisy, each in its own pose, every 10th with a
defect), graded through the nominal on the two front-blend seams with the scan profile at G2.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.demo.lot import DEFECTS, write_lot  # noqa: E402
from surfcheck.demo.scenario import housing_part  # noqa: E402
from surfcheck.grading.request import GradeRequest, grade_file  # noqa: E402
from surfcheck.io import save_part  # noqa: E402
from surfcheck.lots.engine import lot_client  # noqa: E402
from surfcheck.lots.run import run_lot  # noqa: E402

SEAMS = ("top:front-blend", "front-blend:front-wall")


def _nothing(x):
    return x


def _cpu_seconds(client) -> float:
    """CPU time used so far by all worker processes of the cluster."""
    return sum(client.run(time.process_time).values())


def sequential(scans: dict, request: GradeRequest) -> tuple[float, float, list[str]]:
    """Wall and CPU seconds of grading the parts one after the other in this process, and verdicts."""
    wall, cpu = time.perf_counter(), time.process_time()
    reference = request.read_nominal()
    verdicts = [grade_file(path, request, reference)["verdict"] for path in scans.values()]
    return time.perf_counter() - wall, time.process_time() - cpu, verdicts


def on_cluster(client, address: str, root: Path, request: GradeRequest, run: int) -> tuple[float, float, list[str]]:
    """Wall seconds of the lot (grading, table, lot page; no part pages, as in the sequential run)
    and the workers' CPU seconds, and verdicts."""
    cpu, wall = _cpu_seconds(client), time.perf_counter()
    result = run_lot([root / "scans"], request, root / f"out-{run}", scheduler=address, pages="none")
    wall = time.perf_counter() - wall
    verdicts = [r.document["verdict"] for r in sorted(result.records, key=lambda r: r.name)]
    return wall, _cpu_seconds(client) - cpu, verdicts


def main() -> None:
    from dask.distributed import Client

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--parts", type=int, default=50)
    parser.add_argument("--edge", type=float, default=0.4, help="nominal edge length, mm (the demo's)")
    parser.add_argument("--workers", type=int, default=os.cpu_count())
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        root = Path(folder)
        nominal = save_part(housing_part(edge=args.edge), root / "nominal.obj")
        defects = {n: DEFECTS[(n // 10) % 2] for n in range(5, args.parts + 1, 10)}
        scans = write_lot(root / "scans", args.parts, defects, args.edge)
        request = GradeRequest(SEAMS, "scan", "G2", nominal=str(nominal))
        faces = housing_part(edge=0.9 * args.edge).n_faces
        print(f"{args.parts} scans of about {faces:,} triangles, {len(defects)} with a defect; {args.workers} workers,"
              f" {os.cpu_count()} cores; load average {os.getloadavg()[0]:.1f} at the start")
        t0 = time.perf_counter()
        with lot_client(workers=args.workers) as client:
            t_start = time.perf_counter() - t0
            address = client.scheduler.address
            with Client(address) as probe:
                t1 = time.perf_counter()
                probe.gather(probe.map(_nothing, range(1000), pure=False))
                t_nothing = (time.perf_counter() - t1) / 1000
                rounds = []  # sequential, lot, lot, sequential: load that drifts weighs on both alike
                for run, kind in enumerate(("sequential", "lot", "lot", "sequential")):
                    wall, cpu, verdicts = (sequential(scans, request) if kind == "sequential"
                                           else on_cluster(probe, address, root, request, run))
                    rounds.append((kind, wall, cpu, verdicts))
                    print(f"  {kind:10s} {wall:6.1f} s wall, {cpu:6.1f} s CPU, load average {os.getloadavg()[0]:.1f}")
    walls = {k: sum(w for kind, w, _, _ in rounds if kind == k) / 2 for k in ("sequential", "lot")}
    cpus = {k: sum(c for kind, _, c, _ in rounds if kind == k) / 2 for k in ("sequential", "lot")}
    per_part = walls["sequential"] / args.parts
    print(f"one after the other (one process): {walls['sequential']:.1f} s, {per_part:.2f} s a part")
    print(f"lot on the local cluster (grading, table, page): {walls['lot']:.1f} s")
    print(f"  throughput ratio (sequential time / lot time): {walls['sequential'] / walls['lot']:.2f}"
          f" on {args.workers} workers (ideal {args.workers} on an idle machine)")
    print(f"  CPU seconds, lot (workers) / sequential: {cpus['lot'] / cpus['sequential']:.2f}")
    print(f"  cluster start {t_start:.1f} s (once per lot, on top of the lot time)")
    print(f"  per-task overhead of the engine: {1000 * t_nothing:.2f} ms a task (1,000 empty tasks),"
          f" {100 * t_nothing / per_part:.2f} % of a part's grading")
    same = len({tuple(v) for _, _, _, v in rounds}) == 1
    print(f"  verdicts the same in every round and both ways: {same}")


if __name__ == "__main__":
    main()
