"""A finished grading of a part: for each requested seam its sections, both sides' fits at every
station and the grade, or why it could not be graded. The command line, the demo and the review
folder all work from one GradeRun, so the pictures show the stations, data and fits that were graded.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.progress import track
from surfcheck.seams import Curve
from surfcheck.grading.continuity import SeamGrade, StationResult, StationSides, fit_sides, grade_sides, seam_grade
from surfcheck.grading.sections import Section, cut_sections
from surfcheck.grading.tolerances import ToleranceProfile


@dataclass(frozen=True)
class GradeOptions:
    """How stations are placed and sections cut: ``stations`` (a count) or ``spacing`` (a length; by
    default two strip widths, at most 48 stations); ``strip`` and ``reach`` (lengths, part units) as
    sections.cut_sections takes them; ``search`` moves the split of a welded seam to the transition
    found along each section (transition.py; off by default: a split found one edge off the true
    transition biases the fits next to it)."""

    stations: int | None = None
    spacing: float | None = None
    strip: float | None = None
    reach: float | None = None
    search: bool = False

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class GradedStation:
    """One station as graded: its section, both sides' data and fits, and the result."""

    section: Section
    sides: StationSides
    result: StationResult


@dataclass(frozen=True)
class SeamRun:
    """One requested seam: its curve (sides in the requested order), the graded stations and the grade,
    or ``reason`` (one line) when no station has data on both sides."""

    curve: Curve
    stations: tuple[GradedStation, ...]
    grade: SeamGrade | None
    reason: str | None = None


@dataclass(frozen=True)
class GradeRun:
    """The grading of seams of a part against a profile (converted to the part's units)."""

    part: Part
    profile: ToleranceProfile
    options: GradeOptions
    seams: tuple[SeamRun, ...]

    @property
    def grades(self) -> list[SeamGrade]:
        """The grades of the seams that could be graded, in the requested order."""
        return [s.grade for s in self.seams if s.grade is not None]

    @property
    def not_graded(self) -> list[SeamRun]:
        """The seams that could not be graded, each with its reason."""
        return [s for s in self.seams if s.grade is None]


def grade_seam_run(part: Part, seam: Curve, profile: ToleranceProfile, options: GradeOptions) -> SeamRun:
    """Cut the seam's sections, fit both sides at every station and grade it (profile in part units)."""
    if seam.kind != "seam":
        raise InputError(f"{seam.id} is a {seam.kind}, not a seam between two groups")
    sections = cut_sections(part, seam, options.stations, options.spacing, options.strip, options.reach)
    if not sections:
        return SeamRun(seam, (), None, f"no station has data on both sides of {' | '.join(seam.groups)}")
    stations = []
    for section in track(sections, f"{seam.id}: fitting both sides"):
        sides = fit_sides(section, options.search)
        stations.append(GradedStation(section, sides, grade_sides(section, sides, profile)))
    deflections = [s.deflection for s in sections if s.deflection is not None]
    grade = seam_grade(seam, sections[0].welded, [s.result for s in stations], profile, part.units,
                       deflection=max(deflections) if deflections else None)
    return SeamRun(seam, tuple(stations), grade)


def grade_part(part: Part, seams: list[Curve], profile: ToleranceProfile,
               options: GradeOptions | None = None, progress=iter) -> GradeRun:
    """Grade the continuity G0..G3 of seams of a part.

    Parameters
    ----------
    part : Part
        The triangle mesh with its face groups.
    seams : list of Curve
        Seams between two groups each (seams.SeamIndex), sides in the order they are to be named.
    profile : ToleranceProfile
        Tolerances and coverage factor; converted to the part's units.
    options : GradeOptions, optional
        Station placement, section size and transition search (defaults: GradeOptions()).
    progress : callable, optional
        Wraps the list of seams for iteration (a progress bar); ``iter`` by default.

    Returns
    -------
    GradeRun
        Every seam's sections, side fits and grade, or the reason it could not be graded.

    Notes
    -----
    Per station both sides are fitted one-sidedly (sidefit.py) and each order is decided with the
    guard bands of ISO 14253-1 and the expanded uncertainty U = k u of JCGM 100:2008 (continuity.py).
    """
    profile = profile.in_units(part.units)
    options = options or GradeOptions()
    return GradeRun(part, profile, options, tuple(grade_seam_run(part, s, profile, options) for s in progress(seams)))


def grade_seam(part: Part, seam: Curve, profile: ToleranceProfile, stations: int | None = None,
               spacing: float | None = None, *, strip: float | None = None, reach: float | None = None,
               search: bool = False) -> SeamGrade:
    """The grade of one seam (grade_part for a single seam); InputError when it cannot be graded.

    Parameters
    ----------
    part : Part
        The triangle mesh with its face groups.
    seam : Curve
        A seam between two groups.
    profile : ToleranceProfile
        Tolerances, converted to the part's units.
    stations, spacing, strip, reach, search
        As GradeOptions.

    Returns
    -------
    SeamGrade
        Per-order summaries, the stations and the achieved order (-1..3).
    """
    run = grade_part(part, [seam], profile, GradeOptions(stations, spacing, strip, reach, search))
    only = run.seams[0]
    if only.grade is None:
        raise InputError(f"{seam.id}: {only.reason}")
    return only.grade
