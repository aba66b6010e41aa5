"""Verdicts of a lot: each part's (pass, fail, no requirement, or error), each seam's yield (the
share of graded parts whose seam meets the requirement) and the lot's verdict. Seams are matched
across parts by their two group names, which the nominal gives every part alike."""

from __future__ import annotations

from dataclasses import dataclass

from surfcheck.lots.store import PartRecord

ERROR = "error"


def part_verdict(record: PartRecord) -> str:
    """The part's verdict: its document's ("pass", "fail", "no requirement"), or "error"."""
    return ERROR if record.document is None else record.document["verdict"]


def proven_defective(record: PartRecord) -> bool:
    """Whether a seam of the part fails an order beyond its uncertainty (a defect shown, as opposed to
    a requirement not shown to hold: noise or too coarse data leave that "not resolved")."""
    if record.document is None:
        return False
    return any(order["status"] == "fail" for seam in record.document["seams"] for order in seam["orders"].values())


def seam_name(seam: dict) -> str:
    """A seam's name across the lot: its groups, "A | B"."""
    return " | ".join(seam["groups"])


@dataclass(frozen=True)
class SeamYield:
    """One seam over the lot: how many parts graded it and, against a requirement, how many met it
    (``meeting`` and ``share`` are None without a requirement)."""

    seam: str
    graded: int
    meeting: int | None
    share: float | None

    def to_dict(self) -> dict:
        return {"seam": self.seam, "graded": self.graded, "meeting": self.meeting, "yield": self.share}


def seam_yields(records: list[PartRecord], required: int | None) -> list[SeamYield]:
    """Per seam (in the order first met), the parts that graded it and the share meeting ``required``.

    A part that could not grade the seam (listed as not graded) counts as graded and not meeting it:
    nothing shows that it holds the requirement."""
    achieved: dict[str, list[int | None]] = {}
    for record in records:
        if record.document is None:
            continue
        for seam in record.document["seams"]:
            achieved.setdefault(seam_name(seam), []).append(seam["achieved"])
        for seam in record.document["not_graded"]:
            achieved.setdefault(seam_name(seam), []).append(None)
    yields = []
    for name, values in achieved.items():
        if required is None:
            yields.append(SeamYield(name, len(values), None, None))
        else:
            meeting = sum(1 for v in values if v is not None and v >= required)
            yields.append(SeamYield(name, len(values), meeting, meeting / len(values)))
    return yields


def lot_verdict(records: list[PartRecord], required: int | None) -> str:
    """"pass" when every part meets the requirement, "fail" when one does not or has an error row,
    "no requirement" without one."""
    if required is None:
        return "no requirement"
    return "pass" if all(part_verdict(r) == "pass" for r in records) else "fail"
