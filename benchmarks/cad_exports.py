"""The mesh grader on CAD exports: randomly sized boxes with rolling-ball fillets (one edge or all
twelve, r = 1.5 to 6 mm) built and tessellated by the OpenCASCADE kernel at chordal deflections of
0.01, 0.05 and 0.1 mm, one group per face; truth by construction (tests/fixtures/kernel_parts.py).

    PYTHONPATH=. python benchmarks/cad_exports.py [--seed 7] [--parts 8]

Prints per deflection how many seams were graded exactly (the true order reached and the next one
failed), not resolved, or wrong (an order passed that the construction does not have, or failed one
it has), and the seconds per seam.
"""

from __future__ import annotations

import argparse
import sys
import time
from collections import Counter
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.grading.run import GradeOptions, grade_part  # noqa: E402
from surfcheck.grading.selection import select_seams  # noqa: E402
from surfcheck.grading.status import Status  # noqa: E402
from surfcheck.grading.tolerances import load_profile  # noqa: E402
from tests.fixtures.kernel_parts import filleted_box, kernel_mesh, true_order  # noqa: E402

DEFLECTIONS = (0.01, 0.05, 0.1)


def outcome(grade, truth: int | None) -> str:
    if truth is None:
        return "no truth"
    if grade is None:
        return "not graded"
    statuses = [o.status for o in grade.orders]
    if grade.achieved == truth and (truth == 3 or statuses[truth + 1] == Status.FAIL):
        return "exact"
    if grade.achieved > truth or statuses[grade.achieved + 1] == Status.FAIL:
        return "wrong"
    return "not resolved"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--parts", type=int, default=8)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    profile = load_profile("general")
    tally = {d: Counter() for d in DEFLECTIONS}
    seconds = Counter()
    for k in range(args.parts):
        dims = rng.uniform(15.0, 50.0, 3)
        radius = rng.uniform(1.5, min(6.0, dims.min() / 3.0))
        shape = filleted_box(tuple(dims), radius, "all" if k % 2 else "one")
        for deflection in DEFLECTIONS:
            part, kinds = kernel_mesh(shape, deflection)
            start = time.perf_counter()
            run = grade_part(part, select_seams(part, ["all"]).seams, profile, GradeOptions())
            seconds[deflection] += time.perf_counter() - start
            for seam in run.seams:
                truth = true_order(*(kinds[part.group_index(g)] for g in seam.curve.groups))
                tally[deflection][outcome(seam.grade, truth)] += 1
    print(f"seed {args.seed}, {args.parts} parts, general profile")
    print(f"{'deflection':>10} {'seams':>6} {'exact':>6} {'not resolved':>13} {'wrong':>6} {'other':>6} {'s/seam':>7}")
    for d in DEFLECTIONS:
        t = tally[d]
        n = sum(t.values())
        other = n - t["exact"] - t["not resolved"] - t["wrong"]
        print(f"{d:>10} {n:>6} {t['exact']:>6} {t['not resolved']:>13} {t['wrong']:>6} {other:>6} {seconds[d] / max(n, 1):>7.3f}")


if __name__ == "__main__":
    main()
