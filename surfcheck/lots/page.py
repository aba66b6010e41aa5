"""The lot page, DIR/index.html: the lot's verdict and each seam's yield, per seam its run chart and
histogram with the individuals chart's control limits, the worst parts (each linked to its
result.json), the error rows, the request, and the cautions. Plain HTML in the style of the part
review page (review.page); a part with a review page of its own links to it."""

from __future__ import annotations

from dataclasses import dataclass
from html import escape

from surfcheck.review.page import STYLE, Picture, _figure, _num, _status, _table
from surfcheck.lots.control import IndividualsLimits
from surfcheck.lots.series import WorstPart
from surfcheck.lots.yields import SeamYield

LIMITS_NOTE = ("Control limits (dashed) are those of an individuals chart (ISO 7870-2: centre line the mean,"
               " limits at the mean +/- 2.66 times the mean moving range of consecutive parts). They show the"
               " process's own spread: a part beyond them has changed, whether or not it is within tolerance."
               " The values are magnitudes, so a lower limit below zero is no limit.")


@dataclass(frozen=True)
class SeamReview:
    """What the page shows of one seam: its yield, its pictures and the control limits per order
    (None where fewer than two parts had a value), with the parts beyond them."""

    seam: SeamYield
    pictures: tuple[Picture, ...]
    limits: dict[str, IndividualsLimits | None]
    beyond: dict[str, tuple[str, ...]]


def _anchor(name: str) -> str:
    return "seam-" + "".join(c if c.isalnum() else "-" for c in name)


def _yield_table(seams: list[SeamReview]) -> str:
    rows = [[f'<a href="#{_anchor(s.seam.seam)}">{escape(s.seam.seam)}</a>', str(s.seam.graded),
             "&ndash;" if s.seam.meeting is None else str(s.seam.meeting),
             "&ndash;" if s.seam.share is None else escape(f"{100 * s.seam.share:.1f} %")] for s in seams]
    return _table(["seam", "parts graded", "meeting the requirement", "yield"], rows, {1, 2, 3})


def _seam_section(review: SeamReview) -> str:
    lines = []
    for order, limits in review.limits.items():
        if limits is None:
            lines.append(f"{order}: fewer than two decided values, no control limits.")
            continue
        beyond = review.beyond[order]
        lines.append(f"{order}: centre {limits.centre:.4g}, mean moving range {limits.mean_moving_range:.4g},"
                     f" control limits {limits.lower:.4g} .. {limits.upper:.4g}; beyond them: "
                     + (", ".join(beyond) if beyond else "none") + ".")
    facts = "".join(f"<li>{escape(line)}</li>" for line in lines)
    figures = "".join(_figure(p) for p in review.pictures)
    name = review.seam.seam
    return f'<section id="{_anchor(name)}"><h3>{escape(name)}</h3><ul class="small">{facts}</ul>{figures}</section>'


def _part_links(name: str, reviewed: set[str]) -> str:
    """The part's name, linked to its review page when it has one, and a link to its result.json."""
    folder = f"parts/{escape(name, quote=True)}"
    shown = f'<a href="{folder}/review/index.html">{escape(name)}</a>' if name in reviewed else escape(name)
    return f'{shown} (<a href="{folder}/result.json">result</a>)'


def _reading(worst: WorstPart) -> str:
    """Why a part fails: a defect shown, or the requirement only not shown (data that cannot decide)."""
    if worst.verdict != "fail":
        return ""
    return "defect shown" if worst.defect else "requirement not shown (not resolved)"


def _worst_table(worst: list[WorstPart], reviewed: set[str]) -> str:
    rows = [[_part_links(w.part, reviewed), _status(w.verdict), escape(_reading(w)), escape(w.seam), escape(w.order),
             _num(w.value), _num(w.tolerance), _num(w.ratio, 3)] for w in worst]
    return _table(["part", "verdict", "reading", "seam", "order", "worst value", "tolerance", "value / tolerance"],
                  rows, {5, 6, 7})


def lot_page(summary: dict, seams: list[SeamReview], worst: list[WorstPart], context: dict,
             reviewed: set[str]) -> str:
    """The lot page as text.

    Parameters
    ----------
    summary : dict
        run.LotResult.summary() of the lot.
    seams : list of SeamReview
        Per seam, its yield, pictures and control limits.
    worst : list of WorstPart
        The parts to list first (series.worst_parts).
    context : dict
        Facts for the request table (tolerance profile, nominal, seams, version, time).
    reviewed : set of str
        The parts with a review page of their own (parts/NAME/review/index.html).
    """
    verdict = summary["verdict"]
    requirement = summary["require"] or "none"
    defective = ", ".join(escape(name) for name in summary["defective"]) or "none"
    counts = (f"{summary['parts']} parts, {summary['graded']} graded, {len(summary['failing'])} not shown to meet the"
              f" requirement, of them {len(summary['defective'])} with a defect shown (an order failing beyond its"
              f" uncertainty: {defective}); the others read not resolved, where the data cannot decide;"
              f" {len(summary['errors'])} error rows")
    errors = _table(["part", "file", "error"], [[escape(e["part"]), escape(e["source"]), escape(e["error"] or "")]
                                               for e in summary["errors"]]) if summary["errors"] else "<p>None.</p>"
    request = _table(None, [[escape(k), escape(str(v))] for k, v in context.items()])
    return (
        "<!DOCTYPE html>\n"
        f'<html lang="en"><head><meta charset="utf-8"><title>Lot review: {escape(summary["out"])}</title>'
        f'<meta name="viewport" content="width=device-width, initial-scale=1"><style>{STYLE}</style></head>'
        f'<body><header><h1>Lot review</h1><p class="small">{escape(counts)}</p></header>'
        f'<div class="caution"><p>{escape(summary["caution"])}</p><p>{escape(LIMITS_NOTE)}</p></div>'
        f'<section id="verdict"><h2>Verdict</h2><p>Requirement {escape(requirement)}:'
        f' <span class="verdict {escape(verdict.replace(" ", "-"))}">{escape(verdict)}</span></p>'
        f"{_yield_table(seams)}</section>"
        f'<section id="seams"><h2>Seams over the lot</h2>{"".join(_seam_section(s) for s in seams)}</section>'
        f'<section id="worst"><h2>Worst parts</h2>{_worst_table(worst, reviewed)}</section>'
        f'<section id="errors"><h2>Error rows</h2>{errors}</section>'
        f'<section id="request"><h2>Request and tool</h2>{request}</section></body></html>\n'
    )
