"""Which seams a grading request means: ids, GROUP_A:GROUP_B, `all`, and `auto` (segment an unlabelled
scan first), optionally on a scan labelled through a nominal part (rigid alignment + nearest face)."""

from __future__ import annotations

from dataclasses import dataclass, field

from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.seams import Curve, SeamIndex


@dataclass
class Selection:
    """The part the seams lie on (labelled, when segmented or transferred), the seams, and what was
    done to find them (segmentation or alignment documents, for the result)."""

    part: Part
    seams: list[Curve]
    notes: dict = field(default_factory=dict)


def select_seams(part: Part, specs: list[str], nominal: Part | None = None) -> Selection:
    """Resolve command-line seam specs on ``part`` (after labelling it from ``nominal`` if given)."""
    notes: dict = {}
    if nominal is not None:
        from surfcheck.segmentation.transfer import align, transfer_groups

        alignment = align(part, nominal)
        part = transfer_groups(nominal, part, alignment)
        notes["alignment"] = alignment.to_json()
    if "auto" in specs and len(part.group_names) <= 1:
        from surfcheck.segmentation.segment import seams_of_segmentation, segment_part

        segmentation = segment_part(part)
        notes["segmentation"] = segmentation.to_json()
        return Selection(segmentation.part, seams_of_segmentation(segmentation), notes)
    index = SeamIndex(part)
    chosen: dict[str, Curve] = {}
    for spec in specs:
        for curve in index.find("all" if spec == "auto" else spec):
            if curve.kind != "seam":
                raise InputError(f"{part.source or 'part'}: {curve.id} is a boundary {curve.kind}, not a seam"
                                 " between two groups")
            chosen.setdefault(curve.id, curve)
    return Selection(part, list(chosen.values()), notes)
