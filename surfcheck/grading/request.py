"""A grading request as `surfcheck grade` states it (seam specs, tolerance profile, requirement, station
options, units, method), carried out on one part file: read it, select its seams (through a nominal
part when given), grade them on the mesh or exactly on its B-rep, and make the result document.
The command line and the lot tasks both grade through here, so a part graded in a lot reads exactly
as `grade --json` prints it."""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace
from pathlib import Path

from surfcheck.errors import InputError
from surfcheck.io import LoadResult, read_part
from surfcheck.part import Part
from surfcheck.progress import step
from surfcheck.grading.document import parse_requirement, run_document
from surfcheck.grading.run import GradeOptions, GradeRun, grade_part
from surfcheck.grading.selection import Selection, select_seams
from surfcheck.grading.tolerances import ToleranceProfile, load_profile

METHODS = ("exact", "mesh")


@dataclass(frozen=True)
class GradeRequest:
    """What to grade and against what: the options of `surfcheck grade`.

    ``nominal`` is the path of the grouped nominal part (or None); ``method`` is "exact", "mesh" or
    None (exact for a STEP part, mesh otherwise)."""

    seams: tuple[str, ...]
    tolerance: str = "general"
    require: str | None = None
    options: GradeOptions = field(default_factory=GradeOptions)
    units: str = "mm"
    deflection: float | None = None
    method: str | None = None
    nominal: str | None = None

    def __post_init__(self) -> None:
        if self.method not in (None, *METHODS):
            raise InputError(f"--method {self.method!r}: use exact or mesh")
        parse_requirement(self.require)

    @property
    def required(self) -> int | None:
        """The required order 0..3, or None."""
        return parse_requirement(self.require)

    def profile(self) -> ToleranceProfile:
        """The tolerance profile named (or the TOML file given) by ``tolerance``."""
        return load_profile(self.tolerance)

    def work(self, report: bool = False) -> str:
        """The command whose memory need the reader's guard checks (io.memory): segmenting (``--seam
        auto``) needs the most, then a review page, then grading."""
        return "segment" if "auto" in self.seams else "report" if report else "grade"

    def read_nominal(self, report: bool = False) -> Part | None:
        """The nominal part, read once for every part graded through it (None without one)."""
        if self.nominal is None:
            return None
        with step(f"reading {Path(self.nominal).name}"):
            return read_part(self.nominal, units=self.units, deflection=self.deflection, command=self.work(report)).part


@dataclass(frozen=True)
class PreparedPart:
    """A part read and its seams chosen, before grading: ``exact`` says whether it is graded on its
    B-rep faces."""

    loaded: LoadResult
    chosen: Selection
    exact: bool


def prepare_part(path: str | os.PathLike, request: GradeRequest, nominal: Part | None = None,
                 report: bool = False) -> PreparedPart:
    """Read a part and select the requested seams (after labelling it from ``nominal``).

    Parameters
    ----------
    path : str or PathLike
        The part file.
    request : GradeRequest
        The grading request.
    nominal : Part, optional
        The nominal part read from ``request.nominal`` (GradeRequest.read_nominal); read here when
        the request names one and it is not given.

    Returns
    -------
    PreparedPart
        The loaded part, the chosen seams and the method.
    """
    with step(f"reading {Path(path).name}"):
        loaded = read_part(Path(path), units=request.units, deflection=request.deflection, command=request.work(report))
    exact = (request.method or ("exact" if loaded.brep is not None else "mesh")) == "exact"
    if exact and loaded.brep is None:
        raise InputError(f"{path}: --method exact needs a STEP part (B-rep faces); a mesh is graded with --method mesh")
    if nominal is None:
        nominal = request.read_nominal(report)
    with step("finding the seams"):
        chosen = select_seams(loaded.part, list(request.seams), nominal)
    return PreparedPart(loaded, chosen, exact)


def grade_prepared(prepared: PreparedPart, request: GradeRequest, progress=iter) -> tuple[GradeRun, dict]:
    """Grade a prepared part: the GradeRun and the result document (what `grade --json` prints).

    Parameters
    ----------
    prepared : PreparedPart
        From prepare_part.
    request : GradeRequest
        The grading request.
    progress : callable, optional
        Wraps the list of seams for iteration (a progress bar).

    Returns
    -------
    tuple of GradeRun and dict
        The grading and its document (grading.document.run_document).

    Raises
    ------
    InputError
        When no requested seam could be graded (the reasons, one line).
    """
    from surfcheck.grading.exact import EXACT, grade_brep

    chosen, profile = prepared.chosen, request.profile()
    if prepared.exact:
        run = grade_brep(chosen.part, prepared.loaded.brep, chosen.seams, profile, request.options, progress=progress)
    else:
        run = grade_part(chosen.part, chosen.seams, profile, request.options, progress=progress)
    if not run.grades:
        raise InputError("; ".join(f"{s.curve.id}: {s.reason}" for s in run.not_graded))
    parameters = {"seams": list(request.seams), "nominal": request.nominal,
                  "method": EXACT if prepared.exact else "mesh", "deflection": request.deflection, **chosen.notes}
    return run, run_document(run, request.required, parameters)


def review_gradings(prepared: PreparedPart, request: GradeRequest, run: GradeRun, document: dict,
                    progress=iter) -> tuple[GradeRun, dict, dict | None]:
    """What a review page of a graded part draws: the mesh grading (its sections and fits are the
    pictures) and, for a STEP part, the exact grading of the same seams to set beside it.

    Parameters
    ----------
    prepared : PreparedPart
        From prepare_part.
    request : GradeRequest
        The grading request.
    run, document : GradeRun, dict
        The part's grading as grade_prepared returned it (exact or mesh, as requested).
    progress : callable, optional
        Wraps the list of seams of the other grading.

    Returns
    -------
    tuple of GradeRun, dict and dict or None
        The mesh grading and its document, and the exact grade document (None for a mesh part, or
        when no seam has a B-rep edge to grade).
    """
    if prepared.loaded.brep is None:
        return run, document, None
    if prepared.exact:
        mesh_run, mesh_document = grade_prepared(replace(prepared, exact=False), request, progress)
        return mesh_run, mesh_document, document
    try:
        exact = grade_prepared(replace(prepared, exact=True), request, progress)[1]
    except InputError:
        exact = None  # no requested seam lies on a B-rep edge: the page shows the mesh grades alone
    return run, document, exact


def grade_file(path: str | os.PathLike, request: GradeRequest, nominal: Part | None = None) -> dict:
    """The result document of grading one part file as `surfcheck grade PATH ... --json` prints it.

    Parameters
    ----------
    path : str or PathLike
        The part file.
    request : GradeRequest
        The grading request.
    nominal : Part, optional
        The nominal part already read (GradeRequest.read_nominal), shared by many parts.

    Returns
    -------
    dict
        The grade document (docs/grade.schema.json).
    """
    return grade_prepared(prepare_part(path, request, nominal), request)[1]
