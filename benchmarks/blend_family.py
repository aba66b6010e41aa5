"""Blend patches between irregular coarse sides, proven by the mesh grader: a seeded random family.

Each case draws (``np.random.default_rng(seed)``, replayable with --case SEED) side B, a plane tilted
60 degrees from side A's plane or a cylinder of radius 12 mm leaving at that angle, the legs beyond
the corner (5 to 15 mm; the gap is twice the leg), and the order K = 1, 2 or 3; both sides are
jittered meshes with edges of 0.4 to 0.6 mm (tests/fixtures/blend_fixtures.irregular_pair). The patch
is built by ``build_blend`` with its defaults, its contact is first checked on the exact section jets
(blend_fixtures.achieved_order: the highest order within the general profile at every column), then
both new seams are graded by ``grade_seam`` (general profile). Outcomes per case:

- shown: both seams graded at least K;
- stated: not shown, and ``blend`` states on that seam the resolution that would let it be shown;
- false fail: a seam fails an order that the exact jets hold;
- missed: none of these.

    PYTHONPATH=. python benchmarks/blend_family.py [--cases 24] [--seed 1] [--case SEED]
"""

from __future__ import annotations

import argparse
import sys
import time
from collections import Counter
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.blend.patch import build_blend, merge_with_patch  # noqa: E402
from surfcheck.grading.run import grade_seam  # noqa: E402
from surfcheck.grading.status import Status  # noqa: E402
from surfcheck.grading.tolerances import load_profile  # noqa: E402
from tests.fixtures.blend_fixtures import achieved_order, irregular_pair  # noqa: E402

PROFILE = load_profile("general")


def draw(seed: int) -> dict:
    """The parameters of one case."""
    rng = np.random.default_rng(seed)
    return {"seed": seed, "kind": str(rng.choice(["planes", "cylinder"])), "order": int(rng.integers(1, 4)),
            "leg": float(rng.uniform(5.0, 15.0))}


def run_case(case: dict) -> dict:
    """Build, check on the exact jets and grade one case."""
    a, b = irregular_pair(case["seed"], case["kind"], case["leg"])
    start = time.perf_counter()
    blend = build_blend(a.part, a.chain, b.part, b.chain, case["order"])
    merged = merge_with_patch(a.part, blend, b.part)
    exact = achieved_order(blend, a, b)
    grades = [grade_seam(merged.part, seam, PROFILE) for seam in (merged.seam_a, merged.seam_b)]
    false_fail = any(o.status is Status.FAIL for g, e in zip(grades, exact) for o in g.orders[:e + 1])
    stated = [any(seam.id.split("|")[0] in note for note in blend.notes) for seam in (merged.seam_a, merged.seam_b)]
    shown = [g.achieved >= case["order"] for g in grades]
    if false_fail:
        outcome = "false fail"
    elif all(shown):
        outcome = "shown"
    elif all(s or n for s, n in zip(shown, stated)):
        outcome = "stated"
    else:
        outcome = "missed"
    return {**case, "exact": exact, "graded": tuple(g.achieved for g in grades), "rows": (min(blend.seam_row_spacing), blend.row_spacing),
            "vertices": len(blend.vertices), "problems": blend.problems, "notes": blend.notes,
            "outcome": outcome, "seconds": time.perf_counter() - start,
            "orders": [[(o.status.value, o.value, o.uncertainty) for o in g.orders] for g in grades]}


def line(r: dict) -> str:
    return (f"{r['seed']} {r['kind']} K {r['order']} leg {r['leg']:.1f}: exact {r['exact']} graded {r['graded']} "
            f"rows {r['rows'][0]:.3g} to {r['rows'][1]:.3g} ({r['vertices']} vertices, {r['seconds']:.0f} s) {r['outcome']}"
            + "".join(f"\n    note: {n}" for n in r["notes"]) + "".join(f"\n    problem: {p}" for p in r["problems"]))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=24)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--case", type=int, help="replay one case seed and print its seams' orders")
    args = parser.parse_args()
    if args.case is not None:
        r = run_case(draw(args.case))
        print(line(r))
        for seam in r["orders"]:
            print("   ", "  ".join(f"G{k} {s} {v:.3g} +- {u:.2g}" for k, (s, v, u) in enumerate(seam)))
        return
    rows = []
    for j in range(args.cases):
        rows.append(run_case(draw(args.seed * 1000 + j)))
        print(line(rows[-1]), flush=True)
    tally = Counter(r["outcome"] for r in rows)
    exact_ok = sum(min(r["exact"]) >= r["order"] for r in rows)
    print(f"\n{len(rows)} cases (seed {args.seed}): patch of order K on the exact jets {exact_ok}; "
          + ", ".join(f"{k} {tally[k]}" for k in ("shown", "stated", "false fail", "missed"))
          + f"; {sum(r['seconds'] for r in rows):.0f} s")


if __name__ == "__main__":
    main()
