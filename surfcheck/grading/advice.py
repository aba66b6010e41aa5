"""What to do about a seam that falls short: one line per seam on the order that limits it.

A failing order names the defect at the governing station and the blend order that removes it. An
order that is "not resolved" is told apart by its cause: where the expanded uncertainty U = k u alone
exceeds the tolerance, the data cannot decide that order at that tolerance whatever the value (the
measurement is not fit for the tolerance: ISO 14253-1's guard bands leave no conformance zone);
otherwise the value lies within U of the tolerance and the seam is borderline. Where the seam's sides
were read from a tessellation's surface (a CAD export), the line names the chordal deflection to
export with instead (finer_deflection).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.grading.continuity import ORDERS, UNITS, SeamGrade

DEFECTS = (
    "a gap: weld the faces or rebuild their shared edge",
    "a kink: a fillet or `surfcheck blend --order 1` (or higher) removes it",
    "a curvature jump (a circular fillet is G1 by nature): `surfcheck blend --order 2` or 3 removes it",
    "a jump in the curvature's rate: `surfcheck blend --order 3` removes it",
)


def finer_deflection(deflection: float, value: float, expanded: float, tolerance: float) -> float:
    """The chordal deflection at which an unresolved order should be decided: U taken as proportional
    to the deflection (so for a cut side, whose floor is its sagitta; an interpolated side's U falls
    faster), shrunk until value + U fits under the tolerance, or U to half the distance between value
    and tolerance when the value lies beyond it (common practice, no published source)."""
    room = tolerance - value if value < tolerance else 0.5 * (value - tolerance)
    return deflection * float(np.clip(0.8 * room / expanded, 0.05, 0.8)) if expanded > 0 else 0.5 * deflection


@dataclass(frozen=True)
class Advice:
    """The seam, the order that limits it, its status, and what to do."""

    seam: str
    order: str
    status: str
    text: str

    def to_dict(self) -> dict:
        return {"seam": self.seam, "order": self.order, "status": self.status, "text": self.text}


def advise(grade: SeamGrade, coverage: float) -> Advice | None:
    """Advice on the order that limits ``grade`` (None when the seam achieves G3)."""
    limit = grade.limited_by
    if limit is None:
        return None
    name, status = limit
    k = ORDERS.index(name)
    summary = grade.orders[k]
    unit = " " + UNITS[k].format(u=grade.units)
    at = "at (" + ", ".join(f"{round(float(c), 4) + 0.0:.6g}" for c in summary.worst_position) + ")"
    expanded = coverage * summary.uncertainty
    if status == "fail":
        text = (f"{name} fails {at}: {summary.value:.3g}{unit} exceeds {summary.tolerance:.3g}{unit} by more"
                f" than {grade.fail_coverage:.3g} u = {grade.fail_coverage * summary.uncertainty:.2g}{unit} (the"
                f" seam's factor over its {len(grade.stations)} station{'' if len(grade.stations) == 1 else 's'});"
                f" it is {DEFECTS[k]}")
    elif grade.deflection:
        finer = finer_deflection(grade.deflection, summary.value, expanded, summary.tolerance)
        length = f" {grade.units}"
        text = (f"{name} is not resolved {at}: {summary.value:.3g}{unit} +- U = {expanded:.2g}{unit} against the"
                f" tolerance {summary.tolerance:.3g}{unit}; the faces there are a tessellation of chordal deflection"
                f" about {grade.deflection:.2g}{length}: export with a chordal deflection of at most {finer:.2g}{length}")
    elif not expanded < summary.tolerance:
        looser = "" if grade.tolerance == "scan" else " (or, for a scan, `--tolerance scan`)"
        text = (f"{name} cannot be decided {at}: U = {expanded:.2g}{unit} alone exceeds the tolerance"
                f" {summary.tolerance:.3g}{unit}; it needs denser or less noisy data{looser}")
    else:
        text = (f"{name} is borderline {at}: {summary.value:.3g}{unit} is within U = {expanded:.2g}{unit} of"
                f" the tolerance {summary.tolerance:.3g}{unit}; denser data narrows U, else treat it as not shown")
    return Advice(grade.id, name, status, text)
