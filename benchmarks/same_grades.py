"""Grades that must not change when the grader is only made faster: the grade documents of the sample
meshes (the demo's parts, through the command line's request), of the synthetic fillets of tests/fixtures
(extruded and revolved, clean and noisy) and of kernel-built filleted boxes (CAD tessellations, whose
sparse sides are read from the surface), written to one JSON file, or compared against such a file.

    PYTHONPATH=/path/to/old/tree python benchmarks/same_grades.py --write /tmp/before.json
    PYTHONPATH=. python benchmarks/same_grades.py --compare /tmp/before.json

Numbers are compared to a relative 1e-9 or an absolute 1e-12 (rounding); the first differences are listed and the exit
code is 1 when any is found.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

RELATIVE = 1e-9
ABSOLUTE = 1e-12  # numbers at rounding level of zero (a sum taken in another order)
DERIVED = {"relative"}  # a station's relative jump is the ratio of its two sides' values, which are compared
# themselves; where both are rounding errors of a zero (a plane's curvature) it is a ratio of two of them
SAMPLES = ROOT / "sample_meshes"
REQUESTS = {  # name: (file, seams, nominal, method)
    "housing.obj": ("housing.obj", ("all",), None, None),
    "housing.stl auto": ("housing.stl", ("auto",), None, None),
    "housing.ply auto": ("housing.ply", ("auto",), None, None),
    "housing-scan.stl nominal": ("housing-scan.stl", ("all",), "housing.obj", None),
    "housing-gap.obj": ("housing-gap.obj", ("all",), None, None),
    "housing.step mesh": ("housing.step", ("all",), None, "mesh"),
}


def sample_documents() -> dict:
    from surfcheck.errors import SurfcheckError
    from surfcheck.grading.request import GradeRequest, grade_file

    out = {}
    for name, (file, seams, nominal, method) in REQUESTS.items():
        request = GradeRequest(seams, method=method, nominal=None if nominal is None else str(SAMPLES / nominal))
        try:
            out[name] = grade_file(SAMPLES / file, request)
        except SurfcheckError as exc:
            out[name] = {"error": str(exc)}
    return out


def synthetic_documents() -> dict:
    from surfcheck.demo import shapes as S
    from surfcheck.grading.document import run_document
    from surfcheck.grading.run import GradeOptions, grade_part
    from surfcheck.grading.tolerances import GENERAL, SCAN
    from tests.fixtures.synthetic import build, part_and_seams

    out = {}
    for kind in ("sharp", "arc", "clothoid", "smoothstep"):
        for sweep in ("extrude", "revolve"):
            mesh = build(kind, sweep, rotation=5)
            for sigma in (0.0, 0.01):
                V = mesh.vertices if sigma == 0 else S.add_normal_noise(mesh.vertices, mesh.faces, sigma, seed=3)
                part, seams = part_and_seams(mesh, V)
                profile = GENERAL if sigma == 0 else SCAN
                run = grade_part(part, seams, profile, GradeOptions())
                out[f"{kind} {sweep} sigma {sigma}"] = run_document(run, None, {})
    return out


def kernel_documents() -> dict:
    from surfcheck.grading.document import run_document
    from surfcheck.grading.run import GradeOptions, grade_part
    from surfcheck.grading.tolerances import GENERAL
    from surfcheck.seams import SeamIndex
    from tests.fixtures.kernel_parts import filleted_box, kernel_mesh

    out = {}
    for deflection in (0.05, 0.01):
        part, _ = kernel_mesh(filleted_box((40.0, 30.0, 20.0), 5.0), deflection)
        seams = SeamIndex(part).seams
        run = grade_part(part, seams, GENERAL, GradeOptions())
        out[f"filleted box deflection {deflection}"] = run_document(run, None, {})
    return out


def _settle_ties(before: dict, after: dict) -> None:
    """Where a seam's worst station changed between stations whose values agree to rounding (two
    stations of a symmetric part), take the earlier choice, and with it the position in the advice."""
    for kind in before:
        for old, new in zip(before[kind].get("seams", []), after.get(kind, {}).get("seams", [])):
            for order, summary in old.get("orders", {}).items():
                changed = new["orders"].get(order, {})
                i, j = summary.get("worst_station"), changed.get("worst_station")
                if i is None or j is None or i == j or max(i, j) >= len(new["station_values"]):
                    continue
                values = [new["station_values"][k][order]["value"] for k in (i, j)]
                if not differences(*values):
                    moved = json.dumps(changed["worst_position"]), json.dumps(summary["worst_position"])
                    changed.update(worst_station=i, worst_position=summary["worst_position"])
                    for advice in after[kind].get("advice", []):
                        if (advice["seam"], advice["order"]) == (new["id"], order):
                            advice["text"] = advice["text"].replace(_point(moved[0]), _point(moved[1]))


def _point(position: str) -> str:
    """A position as the advice writes it (grading/advice.py)."""
    return "(" + ", ".join(f"{round(float(c), 4) + 0.0:.6g}" for c in json.loads(position)) + ")"


def differences(before, after, where: str = "") -> list[str]:
    """Where two JSON values differ beyond rounding (numbers to RELATIVE, the rest exactly)."""
    if isinstance(before, dict) and isinstance(after, dict):
        if before.keys() != after.keys():
            return [f"{where}: keys {sorted(set(before) ^ set(after))}"]
        return [d for k in before if k not in DERIVED for d in differences(before[k], after[k], f"{where}/{k}")]
    if isinstance(before, list) and isinstance(after, list):
        if len(before) != len(after):
            return [f"{where}: {len(before)} items before, {len(after)} after"]
        return [d for i, (b, a) in enumerate(zip(before, after)) for d in differences(b, a, f"{where}[{i}]")]
    numbers = (int, float)
    if isinstance(before, numbers) and isinstance(after, numbers) and not isinstance(before, bool):
        if abs(before - after) <= max(ABSOLUTE, RELATIVE * max(abs(before), abs(after))):
            return []
        return [f"{where}: {before!r} before, {after!r} after"]
    return [] if before == after else [f"{where}: {before!r} before, {after!r} after"]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    what = parser.add_mutually_exclusive_group(required=True)
    what.add_argument("--write", type=Path, help="write the documents to this JSON file")
    what.add_argument("--compare", type=Path, help="compare the documents against this JSON file")
    parser.add_argument("--show", type=int, default=40, help="how many differences to list")
    args = parser.parse_args()
    documents = {"samples": sample_documents(), "synthetic": synthetic_documents(), "kernel": kernel_documents()}
    documents = json.loads(json.dumps(documents).replace(str(ROOT), "ROOT"))  # as a file would hold them
    if args.write:
        args.write.write_text(json.dumps(documents, indent=1))
        print(f"{sum(len(v) for v in documents.values())} documents written to {args.write}")
        return 0
    stored = json.loads(args.compare.read_text())
    for group in stored:
        _settle_ties(stored[group], documents.get(group, {}))
    found = differences(stored, documents)
    for line in found[: args.show]:
        print(line)
    print(f"{len(found)} differences against {args.compare}")
    return 1 if found else 0


if __name__ == "__main__":
    sys.exit(main())
