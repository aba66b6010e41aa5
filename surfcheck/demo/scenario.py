"""The demo scenario: the top shell of a hand-held water tester of our own invention.

Its cross-section is molded as one profile and extruded along the shell's length. Each joint of the
profile is made to a known continuity class, so the demo shows every grade:

- flange -> side-wall: a sharp inside corner (G0 only);
- side-wall -> edge-fillet -> top: a circular fillet of radius 6 mm (G1: curvature jumps to 1/6);
- top -> front-blend -> front-wall: entry spiral, arc, exit spiral (clothoids; G2);
- front-wall -> lip-blend -> underside: cubic smooth-step curvature ramps into an arc (G3: the
  curvature rate is zero at both ends of each ramp).

The files: the part as OBJ with groups, as binary STL, as PLY with a group property, and a "scanned"
copy (moved to a scanner's frame, normal noise of 0.01 mm, no groups), and the part with its edge
fillet and CUT_BACK of each face beside it cut away (a gap the blend demo bridges at K = 1, 2, 3).
The same shell is also built as a B-rep by the CAD kernel and written as STEP (housing_brep.py); it is
graded exactly on its faces and, like a CAD export, on the kernel's tessellation.
Regenerate sample_meshes/ with `python -m surfcheck.demo.scenario sample_meshes`.
"""

from __future__ import annotations

import json
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
from scipy.spatial.transform import Rotation

from surfcheck.blend.patch import build_blend, merge_with_patch, prove_blend
from surfcheck.demo.housing_brep import write_housing_step
from surfcheck.grading.exact import EXACT, grade_brep
from surfcheck.grading.run import grade_part
from surfcheck.io import read_part, save_part, write_atomic
from surfcheck.io.weld import weld_vertices
from surfcheck.part import Part
from surfcheck.seams import Curve, SeamIndex
from surfcheck.segmentation.segment import seams_of_segmentation, segment_part
from surfcheck.review.folder import write_report
from surfcheck.demo.shapes import Profile, add_normal_noise, arc, clothoid, corner, extrude, line, ramp
from surfcheck.grading.document import CAUTION, parse_requirement, run_document, verdict
from surfcheck.summary import part_summary
from surfcheck.grading.tolerances import load_profile
from surfcheck.segmentation.transfer import transfer_groups

FILLET_RADIUS = 6.0  # mm
BLEND_SPIRAL = 6.0  # mm of curvature ramp at each end of the G2 and G3 blends
DEPTH = 16.0  # mm of extrusion
EDGE = 0.4  # mm, mesh edge length
REVIEW_REQUIREMENT = "G2"  # what the demo's reviews check: the styling surfaces of the shell
CUT_AWAY = "edge-fillet"  # the poor fillet the blend demo replaces
# mm of side-wall and top cut away beside it: legs of 12 mm to the corner. A patch's curvature reaches half
# its peak within about an eighth of a leg from each seam; with 6 mm legs no practical mesh let the
# grader read G2 or G3 there, with 12 mm it does (docs/blend.md, "The demo gap")
CUT_BACK = 6.0
SCAN_NOISE = 0.01  # mm, standard deviation along the normal (a structured-light scanner's order)
SCAN_MOTION = (Rotation.from_euler("xyz", [12.0, -7.0, 31.0], degrees=True).as_matrix(), np.array([41.0, -13.0, 6.5]))

# Piece name -> face group: the spirals and arc of a blend form one blend group.
GROUP_OF_PIECE = {
    "flange": "flange", "side-wall": "side-wall", "edge-fillet": "edge-fillet", "top": "top",
    "front-blend-in": "front-blend", "front-blend-arc": "front-blend", "front-blend-out": "front-blend",
    "front-wall": "front-wall",
    "lip-blend-in": "lip-blend", "lip-blend-arc": "lip-blend", "lip-blend-out": "lip-blend",
    "underside": "underside",
}

# The class each seam is built to: the highest k with G0..Gk continuity (the mesh and the B-rep shell alike).
DESIGNED = {
    ("flange", "side-wall"): 0,
    ("side-wall", "edge-fillet"): 1, ("edge-fillet", "top"): 1,
    ("top", "front-blend"): 2, ("front-blend", "front-wall"): 2,
    ("front-wall", "lip-blend"): 3, ("lip-blend", "underside"): 3,
}


def housing_profile() -> Profile:
    """The shell's cross-section, traversed with the inside on the left (outward normal on the right)."""
    k = 1.0 / FILLET_RADIUS
    spiral_turn = np.degrees(k * BLEND_SPIRAL / 2.0)  # a clothoid or symmetric ramp from 0 to k turns k L / 2
    blend_arc = 90.0 - 2.0 * spiral_turn
    return Profile(
        (
            line(12.0, "flange"),
            corner(-90.0),
            line(14.0, "side-wall"),
            arc(FILLET_RADIUS, "edge-fillet", angle_deg=90.0),
            line(30.0, "top"),
            clothoid(BLEND_SPIRAL, 0.0, k, "front-blend-in"),
            arc(FILLET_RADIUS, "front-blend-arc", angle_deg=blend_arc),
            clothoid(BLEND_SPIRAL, k, 0.0, "front-blend-out"),
            line(14.0, "front-wall"),
            ramp(BLEND_SPIRAL, 0.0, k, "lip-blend-in", order=1),
            arc(FILLET_RADIUS, "lip-blend-arc", angle_deg=blend_arc),
            ramp(BLEND_SPIRAL, k, 0.0, "lip-blend-out", order=1),
            line(10.0, "underside"),
        ),
        start=(24.0, 0.0),
        heading_deg=180.0,
    )


def housing_part(source: str = "housing", edge: float = EDGE, skew: float = 0.0, profile: Profile | None = None,
                 offsets: dict[str, tuple[float, float, float]] | None = None) -> Part:
    """The nominal shell as a Part with its face groups (or a shell of another ``profile`` with the
    same piece names); ``offsets`` moves named pieces off the rest (shapes.extrude), the pieces that
    still meet welded again, so only the moved ones stand apart."""
    mesh = extrude(profile or housing_profile(), DEPTH, edge, skew=skew, separate_shells=bool(offsets), offsets=offsets)
    vertices, faces = mesh.vertices, mesh.faces
    if offsets:
        vertices, faces, _ = weld_vertices(vertices, faces)
    names = list(dict.fromkeys(GROUP_OF_PIECE[n] for n in mesh.group_names))
    regroup = np.array([names.index(GROUP_OF_PIECE[n]) for n in mesh.group_names])
    return Part(vertices, faces, regroup[mesh.face_group], tuple(names), "mm", source)


def scanned_part() -> Part:
    """The shell as a scanner would deliver it: its own staggered triangulation, in the scanner's
    frame, with normal noise, without groups."""
    sampled = housing_part(edge=0.9 * EDGE, skew=0.3)
    rotation, shift = SCAN_MOTION
    noisy = add_normal_noise(sampled.vertices, sampled.faces, SCAN_NOISE, seed=20)
    moved = noisy @ rotation.T + shift
    return Part(moved, sampled.faces, np.zeros(sampled.n_faces, dtype=np.int64), ("scan",), "mm", "housing-scan")


def gap_part(nominal: Part) -> Part:
    """The shell with its poor (G1) edge fillet cut away, and CUT_BACK of the side-wall and of the top
    beside it: a gap between side-wall and top to bridge."""
    fillet = nominal.face_group == nominal.group_index(CUT_AWAY)
    # the profile runs up the side-wall (+y), round the fillet, then along -x on the top
    top_end_x, wall_end_y = nominal.vertices[np.unique(nominal.faces[fillet])][:, :2].min(axis=0)
    centre = nominal.vertices[nominal.faces].mean(axis=1)
    wall = (nominal.face_group == nominal.group_index("side-wall")) & (centre[:, 1] > wall_end_y - CUT_BACK)
    top = (nominal.face_group == nominal.group_index("top")) & (centre[:, 0] > top_end_x - CUT_BACK)
    keep = ~(fillet | wall | top)
    used, faces = np.unique(nominal.faces[keep], return_inverse=True)
    names = tuple(n for n in nominal.group_names if n != CUT_AWAY)
    renumber = np.array([names.index(n) if n in names else -1 for n in nominal.group_names])
    return Part(nominal.vertices[used], faces.reshape(-1, 3), renumber[nominal.face_group[keep]], names,
                nominal.units, "housing-gap")


def gap_chains(part: Part) -> tuple[Curve, Curve]:
    """The two boundary chains the cut left: side-wall's upper edge and top's near edge (the
    straight chains, along the extrusion, that touch the gap)."""
    index = SeamIndex(part)
    found = []
    for group in ("side-wall", "top"):
        chains = [c for c in index.chains if c.groups == (group,)]
        found.append(min(chains, key=lambda c: _distance_to_gap(c.points)))
    return found[0], found[1]


def _distance_to_gap(points: np.ndarray) -> float:
    fillet_middle = np.array([12.0 - FILLET_RADIUS * (1 - np.cos(np.pi / 4)), 14.0 + FILLET_RADIUS * np.sin(np.pi / 4)])
    return float(np.linalg.norm(points[:, :2].mean(axis=0) - fillet_middle)) + (0.0 if np.ptp(points[:, 2]) > DEPTH / 2 else 1e9)


def write_samples(folder: str | Path) -> dict[str, Path]:
    """Write the sample files; returns name -> path."""
    folder = Path(folder)
    nominal = housing_part()
    files = {
        "housing.obj": nominal,
        "housing.stl": nominal,
        "housing.ply": nominal,
        "housing-scan.stl": scanned_part(),
        "housing-gap.obj": gap_part(nominal),
    }
    written = {name: save_part(part, folder / name) for name, part in files.items()}
    written["housing.step"] = write_housing_step(folder / "housing.step")
    return written


def run_demo(out: str | Path, say=print) -> dict:
    """Build the samples in ``out``/samples and run every capability on them, writing results to ``out``."""
    out = Path(out)
    samples = write_samples(out / "samples")
    results: dict = {"samples": {name: str(path) for name, path in samples.items()}, "inspect": {}, "loops": {},
                     "grades": {}}
    for name, path in samples.items():
        if name == "housing-gap.obj":
            results["blends"] = _bridge_gap(path, out, say)
            continue
        stem = f"{Path(name).stem}-{Path(name).suffix[1:]}"
        loaded = read_part(path)
        summary = part_summary(loaded)
        index = SeamIndex(loaded.part)
        results["inspect"][name] = summary
        results["loops"][name] = {"loops": len(index.loops), "chains": len(index.chains), "seams": len(index.seams)}
        say(f"{name}: {summary['vertices']} vertices, {summary['faces']} triangles, {len(summary['groups'])} groups,"
            f" {len(index.seams)} seams, {len(index.chains)} boundary chains")
        _write_json(out / f"{stem}-inspect.json", summary)
        exact = None
        if loaded.brep is not None:
            results["grades"][f"{name} (exact)"], exact = _grade_exact(loaded, index.seams, out / f"{stem}-exact.json",
                                                                       say)
            say(f"{name}: the kernel's tessellation, graded as a CAD export (its page sets the exact grades beside)")
        if index.seams:
            results["grades"][name] = _grade_and_review(loaded, index.seams, out / f"{stem}-review", say, exact=exact)
        elif name == "housing-scan.stl":  # graded as a scan both ways: through the nominal, and segmented
            grouped = replace(loaded, part=transfer_groups(read_part(samples["housing.obj"]).part, loaded.part))
            say(f"{name}: face groups transferred from housing.obj")
            results["grades"][name] = _grade_and_review(grouped, SeamIndex(grouped.part).seams,
                                                        out / f"{stem}-review", say, "scan")
            segmentation = segment_part(loaded.part)
            save_part(segmentation.part, out / f"{stem}-segmented.obj")
            say(f"{name}: segmented into " + ", ".join(g.name for g in segmentation.groups)
                + f" (written to {stem}-segmented.obj)")
            built = _built_groups(segmentation.part, grouped.part)
            results["grades"][f"{name} (segmented)"] = _grade_and_review(
                replace(loaded, part=segmentation.part), seams_of_segmentation(segmentation),
                out / f"{stem}-segmented-review", say, "scan", built)
    from surfcheck.demo.lot import run_lot_demo

    results["lot"] = run_lot_demo(out / "lot", samples["housing.obj"], say)
    _write_json(out / "demo.json", results)
    say(CAUTION)
    return results


def _built_groups(segmented: Part, grouped: Part) -> dict[str, str]:
    """Segmented group -> the built group holding most of its area (both label the same triangles)."""
    return {name: grouped.group_names[int(np.argmax(grouped.group_areas(segmented.face_group == index)))]
            for index, name in enumerate(segmented.group_names)}


def _seam_line(seam: dict, built: dict[str, str]) -> str:
    """One line per graded seam: what it achieved, what stopped it, what it was built as."""
    achieved = f"G{seam['achieved']}" if seam["achieved"] >= 0 else "none"
    limit = seam["limited_by"]
    why = f", {limit['order']} {limit['status']}" if limit else ""
    pair = tuple(built.get(g, g) for g in seam["groups"])
    designed = DESIGNED.get(pair, DESIGNED.get(pair[::-1]))
    known = "" if designed is None else f" (built as G{designed})"
    where = "" if pair == tuple(seam["groups"]) else f" (= {' | '.join(pair)})"
    return f"  {seam['id']} {' | '.join(seam['groups'])}{where}: achieved {achieved}{why}{known}"


def _grade_and_review(loaded, seams: list[Curve], folder: Path, say, tolerance: str = "general",
                      built: dict[str, str] | None = None, exact: dict | None = None) -> dict:
    """Grade seams of a grouped sample against a tolerance profile, print one line per seam (with the
    built groups ``built`` maps its groups to) and write its review page (with result.json, and the
    ``exact`` grade document of a STEP sample beside)."""
    part = loaded.part
    profile = load_profile(tolerance).in_units(part.units)
    required = parse_requirement(REVIEW_REQUIREMENT)
    run = grade_part(part, seams, profile)
    grades = run.grades
    u = part.units
    say(f"  tolerance profile {profile.name}: G0 {profile.g0_gap:g} {u}, G1 {profile.g1_angle:g} deg,"
        f" G2 {profile.g2_abs:g} 1/{u} (or {profile.g2_rel:.0%}), G3 {profile.g3_abs:g} 1/{u}^2 (or {profile.g3_rel:.0%})")
    parameters = {"seams": ["all"], "nominal": None}
    for seam in run_document(run, required, parameters)["seams"]:
        say(_seam_line(seam, built or {}))
    page = write_report(run, required, folder, parameters=parameters, summary=part_summary(loaded), exact=exact)
    say(f"  review page {page} ({verdict(grades, required)} for {REVIEW_REQUIREMENT})")
    return {"page": str(page), "verdict": verdict(grades, required), "achieved": {g.id: g.achieved for g in grades}}


def _grade_exact(loaded, seams: list[Curve], target: Path, say) -> tuple[dict, dict]:
    """Grade a STEP sample's seams exactly on its B-rep faces, print one line per seam and write the
    grade document to ``target``; the demo's record of it, and the document."""
    profile = load_profile("general")
    required = parse_requirement(REVIEW_REQUIREMENT)
    run = grade_brep(loaded.part, loaded.brep, seams, profile)
    document = run_document(run, required, {"seams": ["all"], "nominal": None, "method": EXACT})
    say(f"{loaded.part.source}: graded exactly on its B-rep faces")
    for seam in document["seams"]:
        say(_seam_line(seam, {}))
    _write_json(target, document)
    return {"document": str(target), "verdict": document["verdict"],
            "achieved": {g.id: g.achieved for g in run.grades}}, document


def _bridge_gap(path: Path, out: Path, say) -> dict:
    """Bridge the cut-away fillet's gap at K = 1, 2 and 3 and grade each patch's two seams."""
    part = read_part(path).part
    chain_a, chain_b = gap_chains(part)
    profile = load_profile("general")
    achieved = {}
    say(f"{path.name}: gap between {chain_a.id} (side-wall) and {chain_b.id} (top)")
    for order in (1, 2, 3):
        blend = build_blend(part, chain_a, part, chain_b, order)
        merged = merge_with_patch(part, blend)
        target = out / f"housing-bridged-G{order}.obj"
        save_part(merged.part, target)
        grades = prove_blend(merged, profile)
        achieved[f"G{order}"] = [g.achieved for g in grades]
        marks = ", ".join(f"{g.groups[0]} | {g.groups[1]}: G{g.achieved}" if g.achieved >= 0 else
                          f"{g.groups[0]} | {g.groups[1]}: none" for g in grades)
        problems = f"; problems: {'; '.join(blend.problems)}" if blend.problems else ""
        say(f"  patch of order {order} -> {target.name}: {marks}{problems}")
    return achieved


def _write_json(path: Path, document: dict) -> None:
    write_atomic(path, (json.dumps(document, indent=2) + "\n").encode())


if __name__ == "__main__":
    for written in write_samples(sys.argv[1] if len(sys.argv) > 1 else "sample_meshes").values():
        print(written)
