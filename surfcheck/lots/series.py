"""One seam's values over a lot, in lot order (the order the parts were given, which is the
production order when the listing follows it): per part its governing (worst)
station's value of an order, uncertainty, tolerance and status; and the parts ranked by how far
their worst seam stands from its tolerance."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.grading.continuity import ORDERS
from surfcheck.lots.store import PartRecord
from surfcheck.lots.yields import part_verdict, proven_defective, seam_name


@dataclass(frozen=True)
class SeamSeries:
    """An order of one seam over the lot: arrays of one entry per part that graded the seam (NaN
    where no value was decided), in lot order; ``positions`` are the parts' places in the lot (1, 2 ...)."""

    seam: str
    order: str
    parts: tuple[str, ...]
    positions: np.ndarray
    values: np.ndarray
    tolerances: np.ndarray
    statuses: tuple[str, ...]
    unit: str


def seam_series(records: list[PartRecord], seam: str, order: str) -> SeamSeries:
    """The values of ``order`` (G0..G3) at the seam named ``seam`` ("A | B") over the lot, whose
    records are given in lot order."""
    parts, positions, values, tolerances, statuses, unit = [], [], [], [], [], ""
    for position, record in enumerate(records, start=1):
        if record.document is None:
            continue
        for graded in record.document["seams"]:
            if seam_name(graded) != seam:
                continue
            grade = graded["orders"][order]
            parts.append(record.name)
            positions.append(position)
            values.append(np.nan if grade["value"] is None else grade["value"])
            tolerances.append(np.nan if grade["tolerance"] is None else grade["tolerance"])
            statuses.append(grade["status"])
            unit = grade.get("unit", unit)
    return SeamSeries(seam, order, tuple(parts), np.array(positions, dtype=int), np.array(values, dtype=float),
                      np.array(tolerances, dtype=float), tuple(statuses), unit)


@dataclass(frozen=True)
class WorstPart:
    """A part's seam and order that stand closest to (or furthest beyond) the tolerance; ``defect``
    whether the part has an order failing beyond its uncertainty (yields.proven_defective)."""

    part: str
    verdict: str
    defect: bool
    seam: str
    order: str
    value: float
    tolerance: float

    @property
    def ratio(self) -> float:
        return self.value / self.tolerance


def worst_parts(records: list[PartRecord], required: int | None, count: int = 10) -> list[WorstPart]:
    """The ``count`` parts whose worst value / tolerance is largest, over the orders up to the
    requirement (all of G0..G3 without one); parts with a defect shown first, then the other failing ones."""
    upto = ORDERS[: (3 if required is None else required) + 1]
    found = []
    for record in records:
        if record.document is None:
            continue
        candidates = [(o["value"] / o["tolerance"], seam_name(s), k, o["value"], o["tolerance"])
                      for s in record.document["seams"] for k in upto
                      for o in [s["orders"][k]] if o["value"] is not None and o["tolerance"]]
        if candidates:
            _, seam, order, value, tolerance = max(candidates)
            found.append(WorstPart(record.name, part_verdict(record), proven_defective(record), seam, order, value,
                                   tolerance))
    found.sort(key=lambda w: (not w.defect, w.verdict != "fail", -w.ratio))
    return found[:count]
