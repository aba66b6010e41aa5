"""The grade result document: what `grade --json` prints and `report` writes as result.json."""

from __future__ import annotations

from surfcheck.version import __version__
from surfcheck.grading.advice import advise
from surfcheck.grading.continuity import ORDERS, SeamGrade
from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.grading.run import GradeRun
from surfcheck.grading.tolerances import ToleranceProfile

CAUTION = (
    "Continuity grades are geometric. Strength, stress concentration, fatigue life, sealing and safety"
    " are not assessed: defer to the applicable codes, standards and licensed engineering practice."
    " Grades of scanned parts are only as good as the scan."
)


def parse_requirement(text: str | None) -> int | None:
    """`G0`..`G3` (any case) -> 0..3; None stays None."""
    if text is None:
        return None
    name = text.strip().upper()
    if name not in ORDERS:
        raise InputError(f"--require {text!r}: use one of {', '.join(ORDERS)}")
    return ORDERS.index(name)


def verdict(grades: list[SeamGrade], required: int | None, not_graded: int = 0) -> str:
    """"pass" when every seam achieves the requirement, "fail" when one does not or when ``not_graded``
    requested seams could not be graded (nothing shows that they hold it), "no requirement"."""
    if required is None:
        return "no requirement"
    return "pass" if not_graded == 0 and all(g.achieved >= required for g in grades) else "fail"


def grade_document(part: Part, grades: list[SeamGrade], profile: ToleranceProfile, required: int | None,
                   parameters: dict | None = None, not_graded: list[dict] | None = None) -> dict:
    """The JSON-ready result of grading seams of a part (JSON Schema: docs/grade.schema.json).

    ``not_graded``: the requested seams that could not be graded, as {"id", "groups", "reason"}; while
    one is listed a requirement is not met (nothing shows that the seam holds it)."""
    not_graded = list(not_graded or [])
    return {
        "tool": {"name": "surfcheck", "version": __version__},
        "part": {"source": part.source, "units": part.units, "vertices": part.n_vertices,
                 "faces": part.n_faces, "groups": list(part.group_names)},
        "units": part.units,
        "tolerance": profile.to_dict(),
        "require": None if required is None else ORDERS[required],
        "verdict": verdict(grades, required, len(not_graded)),
        "parameters": parameters or {},
        "seams": [g.to_dict() for g in grades],
        "not_graded": not_graded,
        "advice": [a.to_dict() for a in (advise(g, profile.coverage) for g in grades) if a is not None],
        "caution": CAUTION,
    }


def run_document(run: GradeRun, required: int | None, parameters: dict | None = None) -> dict:
    """grade_document of a GradeRun: its grades, its options among the parameters (``parameters`` adds
    the request: seams, nominal, notes) and the seams it could not grade."""
    skipped = [{"id": s.curve.id, "groups": list(s.curve.groups), "reason": s.reason} for s in run.not_graded]
    return grade_document(run.part, run.grades, run.profile, required,
                          {**run.options.to_dict(), **(parameters or {})}, skipped)
