"""The exact grades of a STEP part (its B-rep faces' derivatives along each shared edge) beside the
grades of its tessellation (the mesh grader): an agreement check of the mesh grader on every CAD part
a user brings, and the evidence that a mesh exported from it can carry the same grade.

An order agrees when the two values differ by no more than the expanded uncertainty of their
difference, k sqrt(u_mesh^2 + u_exact^2) (JCGM 100:2008, 5.1: the variance of a difference of
independent estimates), and neither grade is decided against the other (one ok where the other
fails). An order the mesh leaves "not resolved" is no disagreement: the tessellation is too coarse
or too short of vertices to tell, and says so.
"""

from __future__ import annotations

from dataclasses import dataclass

from surfcheck.grading.status import Status

AGREES, DIFFERS, MESH_UNDECIDED, EXACT_UNDECIDED = "agrees", "differs", "mesh not resolved", "exact not decided"


@dataclass(frozen=True)
class OrderAgreement:
    """One order of one seam graded both ways; ``mesh_expanded`` is k u of the mesh value."""

    seam: str
    groups: tuple[str, ...]
    order: str
    unit: str
    exact: float | None
    exact_status: str
    mesh: float | None
    mesh_expanded: float | None
    mesh_status: str
    reading: str


def _reading(exact: dict, mesh: dict, coverage: float) -> str:
    decided = {Status.OK.value, Status.FAIL.value}
    if exact["value"] is None or exact["status"] not in decided:
        return EXACT_UNDECIDED
    if mesh["value"] is None or mesh["uncertainty"] is None or mesh["status"] not in decided:
        return MESH_UNDECIDED
    spread = coverage * (mesh["uncertainty"] ** 2 + (exact["uncertainty"] or 0.0) ** 2) ** 0.5
    same = abs(mesh["value"] - exact["value"]) <= spread and mesh["status"] == exact["status"]
    return AGREES if same else DIFFERS


def compare_grades(exact: dict, mesh: dict) -> list[OrderAgreement]:
    """Pair the orders of the seams graded in both grade documents (matched by seam id).

    Parameters
    ----------
    exact : dict
        The grade document of the B-rep grading (grading.exact.grade_brep through run_document).
    mesh : dict
        The grade document of the tessellation's grading, of the same seams.

    Returns
    -------
    list of OrderAgreement
        Per seam graded both ways and per order G0..G3, the two values and the reading.
    """
    coverage = float(mesh["tolerance"]["coverage"])
    exact_seams = {s["id"]: s for s in exact["seams"]}
    rows = []
    for seam in mesh["seams"]:
        other = exact_seams.get(seam["id"])
        if other is None:
            continue
        for order, graded in seam["orders"].items():
            truth = other["orders"][order]
            expanded = None if graded["uncertainty"] is None else coverage * graded["uncertainty"]
            rows.append(OrderAgreement(seam["id"], tuple(seam["groups"]), order, graded["unit"], truth["value"],
                                       truth["status"], graded["value"], expanded, graded["status"],
                                       _reading(truth, graded, coverage)))
    return rows


def agreement_counts(rows: list[OrderAgreement]) -> dict[str, int]:
    """How many orders read each way (AGREES, DIFFERS, MESH_UNDECIDED, EXACT_UNDECIDED)."""
    return {reading: sum(r.reading == reading for r in rows)
            for reading in (AGREES, DIFFERS, MESH_UNDECIDED, EXACT_UNDECIDED)}
