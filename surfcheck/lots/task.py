"""The lot's unit of work: one part graded as `surfcheck grade PART --nominal NOMINAL --seam SPEC`
does, run on a Dask worker. A part that cannot be graded (unreadable, no seam found, ...) returns its
one-line error; anything else raises, so Dask retries the task (``retries=``) and the lot records
the failure only when the retries are spent."""

from __future__ import annotations

from dataclasses import dataclass

from surfcheck.errors import SurfcheckError
from surfcheck.part import Part
from surfcheck.grading.request import GradeRequest, grade_file
from surfcheck.lots.parts import LotPart


@dataclass(frozen=True)
class TaskResult:
    """What a task sends back: the grade document, or the error (one line). ``of_part`` says the error
    is the part's own (an unreadable file, no seam found), kept for reruns; False marks a failure of
    the run (a task that kept raising or lost its workers), graded again on the next run."""

    document: dict | None = None
    error: str | None = None
    of_part: bool = True


def grade_lot_part(part: LotPart, request: GradeRequest, nominal: Part | None) -> TaskResult:
    """Grade one part of a lot (grading.request.grade_file).

    Parameters
    ----------
    part : LotPart
        The part; its file is read on the worker.
    request : GradeRequest
        The lot's grading request.
    nominal : Part or None
        The nominal part, read once by the client and shared with every worker.

    Returns
    -------
    TaskResult
        The document, or the error that makes this part an error row.
    """
    try:
        return TaskResult(document=grade_file(part.path, request, nominal))
    except SurfcheckError as exc:
        return TaskResult(error=str(exc))
