"""The lot's unit of work: one part graded as `surfcheck grade PART --nominal NOMINAL --seam SPEC`
does, run on a Dask worker, with the part's review page (`grade --report`) when asked. A part that
cannot be graded (unreadable, no seam found, ...) returns its one-line error; anything else raises,
so Dask retries the task (``retries=``) and the lot records the failure only when the retries are
spent."""

from __future__ import annotations

import tempfile
from dataclasses import dataclass
from pathlib import Path

from surfcheck.errors import SurfcheckError
from surfcheck.part import Part
from surfcheck.grading.request import GradeRequest, grade_prepared, prepare_part
from surfcheck.lots.parts import LotPart

PAGES = ("failing", "all", "none")  # which parts get their own review page


@dataclass(frozen=True)
class TaskResult:
    """What a task sends back: the grade document, or the error (one line). ``of_part`` says the error
    is the part's own (an unreadable file, no seam found), kept for reruns; False marks a failure of
    the run (a task that kept raising or lost its workers), graded again on the next run. ``review``
    holds the files of the part's review folder (name -> bytes), which the client writes."""

    document: dict | None = None
    error: str | None = None
    of_part: bool = True
    review: dict[str, bytes] | None = None


def grade_lot_part(part: LotPart, request: GradeRequest, nominal: Part | None, pages: str = "failing") -> TaskResult:
    """Grade one part of a lot (grading.request) and, when ``pages`` asks for it, draw its review.

    Parameters
    ----------
    part : LotPart
        The part; its file is read on the worker.
    request : GradeRequest
        The lot's grading request.
    nominal : Part or None
        The nominal part, read once by the client and shared with every worker.
    pages : str
        "failing" (a review page for each part that fails the requirement), "all" or "none".

    Returns
    -------
    TaskResult
        The document (and review files), or the error that makes this part an error row.
    """
    try:
        prepared = prepare_part(part.path, request, nominal)
        run, document = grade_prepared(prepared, request)
    except SurfcheckError as exc:
        return TaskResult(error=str(exc))
    if pages == "all" or (pages == "failing" and document["verdict"] == "fail"):
        return TaskResult(document=document, review=_review_files(run, prepared, request, document))
    return TaskResult(document=document)


def _review_files(run, prepared, request: GradeRequest, document: dict) -> dict[str, bytes]:
    """The part's review folder (review.folder.write_report), drawn in a temporary folder on the
    worker and sent back as bytes, so the worker needs no access to the lot folder."""
    from surfcheck.review.folder import write_report
    from surfcheck.summary import part_summary

    with tempfile.TemporaryDirectory(prefix="surfcheck-review-") as folder:
        write_report(run, request.required, folder, parameters=document["parameters"],
                     summary=part_summary(prepared.loaded), quiet=True)
        return {path.name: path.read_bytes() for path in sorted(Path(folder).iterdir()) if path.is_file()}
