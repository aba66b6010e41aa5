"""The review folder of a grading: DIR/index.html (page.py) with its pictures beside it, and
DIR/result.json, the document `grade --json` prints (grading.document.run_document). Everything is
drawn from the GradeRun: the stations, sections and side fits shown are the ones that were graded.

Pictures: per seam, the curvature-jump field facing the seam with the seam coloured by its
per-station result (whole part and a close-up at the governing station), its reflection lines
(geometry/reflection.py, lights chosen for the seam), the curvature profile across
it at its worst stations and G0..G3 along it (plots.py); for the whole part, the jump heatmaps and
DIR/part-3d.html, the part to turn in the browser (view3d.py).
"""

from __future__ import annotations

import json
import re
import sys
from dataclasses import replace
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from surfcheck.version import __version__
from surfcheck.grading.continuity import ORDERS, SeamGrade
from surfcheck.geometry.fields import VertexField, vertex_fields
from surfcheck.io import LoadResult, write_atomic
from surfcheck.io.folders import check_replaceable, replaced_folder
from surfcheck.review.page import Picture, review_page
from surfcheck.part import Part
from surfcheck.grading.document import run_document
from surfcheck.grading.run import GradeRun
from surfcheck.grading.status import Status
from surfcheck.seams import Curve
from surfcheck.summary import part_summary
from surfcheck.polyline import cumulative_arc_length

PART_QUANTITIES = ("jump", "tangent-jump")  # whole-part heatmaps
SEAM_QUANTITY = "jump"  # the field under each seam's picture
CLOSE_UP_EDGES = 16.0  # radius of a seam's close-up, in edge lengths near the seam ...
CLOSE_UP_SHARE = 0.125  # ... and at most this share of the part's diagonal (a CAD export's long triangles
# made the close-up the whole part); no published source
PAGE_FILE, RESULT_FILE = "index.html", "result.json"
EXACT_FILE = "exact.json"  # a STEP part's exact B-rep grades, beside the mesh grades the page draws
VIEW_FILE = "part-3d.html"  # the interactive view, when trame-vtk is installed
STRIPE_SAMPLES = 8  # sub-edges of the stripe pictures' split mesh per light-line spacing; no published source
FIXED_FILES = (PAGE_FILE, RESULT_FILE, EXACT_FILE, VIEW_FILE)  # the names a review folder holds, beside its pictures
OWN_FILES = (*FIXED_FILES, "*.png")  # all it holds: a folder with anything else is not replaced
LIBRARIES = ("numpy", "scipy", "trimesh", "pyvista", "vtk", "matplotlib", "trame-vtk")


def station_statuses(grade: SeamGrade, upto: int) -> tuple[Status, ...]:
    """Per station, the decision over G0..G``upto`` (Status.combine)."""
    return tuple(Status.combine(station.orders[k].status for k in range(upto + 1)) for station in grade.stations)


def shown_order(grade: SeamGrade, required: int | None) -> int:
    """The order whose per-station result colours a seam: the requirement, else the first order that
    does not hold (G3 when all hold)."""
    return required if required is not None else min(max(grade.achieved + 1, 0), 3)


def seam_overlay(curve: Curve, grade: SeamGrade, upto: int):
    """The seam as drawn: each polyline point takes the result of its nearest station along the seam."""
    from surfcheck.review.render import SeamOverlay

    statuses = station_statuses(grade, upto)
    arc = cumulative_arc_length(curve.points, curve.closed)[: len(curve.points)]
    s = np.array([st.s for st in grade.stations])
    nearest = np.argmin(np.abs(arc[:, None] - s[None, :]), axis=1)
    points = np.vstack([curve.points, curve.points[:1]]) if curve.closed else curve.points
    status = tuple(statuses[k] for k in nearest) + ((statuses[nearest[0]],) if curve.closed else ())
    markers = np.array([st.position for st in grade.stations])
    return SeamOverlay(points, status, grade.id, markers, statuses)


def check_folder(path: str | Path) -> Path:
    """The report folder as a Path; InputError when it names an existing file or a folder holding
    anything but a review's own files (io.folders.check_replaceable), before any work is done."""
    return check_replaceable(path, OWN_FILES)


def _near(V: np.ndarray, points: np.ndarray, radius: float) -> np.ndarray:
    """(n,) bool: the vertex lies within ``radius`` of one of the points."""
    from scipy.spatial import cKDTree

    if len(points) == 0:
        return np.zeros(len(V), dtype=bool)
    return cKDTree(points).query_ball_point(V, radius, return_length=True) > 0


def without_boundary_band(part: Part, field: VertexField) -> VertexField:
    """The field with NaN (drawn grey: no value) at the vertices within its fits' radius of an open
    boundary: there a one-sided fit across a cut runs out of data and its jump means nothing."""
    from surfcheck.geometry.differential import boundary_vertices

    edge = part.vertices[boundary_vertices(part.faces, part.n_vertices)]
    band = _near(part.vertices, edge, field.radius) if np.isfinite(field.radius) else np.zeros(part.n_vertices, bool)
    return replace(field, values=np.where(band, np.nan, field.values))


def seam_reflection(V: np.ndarray, F: np.ndarray, normals: np.ndarray, seam_points: np.ndarray,
                    centre: np.ndarray, reach: float):
    """Lights chosen for one seam (reflection.choose_lights: from the normals within ``reach`` of the
    seam, its direction and ``centre``) and the reflection-line parameter under them on the mesh
    split for the picture (refine.refine_for_stripes, sub-edges STRIPE_SAMPLES to a light-line
    spacing): that mesh's vertices, triangles, parameter, and the lights."""
    from surfcheck.geometry.reflection import choose_lights, reflection_parameter
    from surfcheck.review.refine import refine_for_stripes
    from surfcheck.review.render import principal_axes

    near = _near(V, seam_points, reach)
    along = principal_axes(seam_points if len(seam_points) > 2 else V[near])[0]
    lights = choose_lights(V[near], normals[near], along, centre, reach)
    split, triangles, blended = refine_for_stripes(V, F, normals, lights.spacing / STRIPE_SAMPLES)
    return split, triangles, reflection_parameter(split, blended, lights), lights


def _grey(field: VertexField, units: str) -> str:
    """The caption's note on the light grey "no value" band, its width (the fits' radius) a length in
    the part's ``units``."""
    if not np.isnan(field.values).any():
        return ""
    return (f" Light grey: no value (within the fits' radius, {field.radius:.2g} {units}, of an open"
            " boundary).")


def _file_name(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text)


def _library_versions() -> str:
    from importlib.metadata import PackageNotFoundError, version

    found = []
    for name in LIBRARIES:
        try:
            found.append(f"{name} {version(name)}")
        except PackageNotFoundError:
            pass
    return ", ".join(found)


class _Steps:
    """A rich progress bar on a terminal's stderr (transient); nothing when quiet or not a terminal."""

    def __init__(self, total: int, quiet: bool) -> None:
        self.progress = None
        if not quiet and sys.stderr.isatty():
            from rich.console import Console
            from rich.progress import Progress

            self.progress = Progress(console=Console(stderr=True), transient=True)
            self.task = self.progress.add_task("writing the review", total=total)

    def __enter__(self) -> "_Steps":
        if self.progress:
            self.progress.start()
        return self

    def advance(self, what: str) -> None:
        if self.progress:
            self.progress.update(self.task, advance=1, description=what)

    def __exit__(self, *exc) -> None:
        if self.progress:
            self.progress.stop()


def write_report(run: GradeRun, required: int | None, out_dir: str | Path, *, parameters: dict | None = None,
                 summary: dict | None = None, exact: dict | None = None, quiet: bool = False) -> Path:
    """Write the review of a grading to ``out_dir``: index.html, result.json and the pictures.

    Parameters
    ----------
    run : GradeRun
        The grading (grading.run.grade_part); its stations, sections and fits are drawn.
    required : int or None
        The required order (0..3), or None.
    out_dir : str or Path
        The folder; created when missing. It is written whole (io.folders.replaced_folder): after
        any failure or kill it is this run's complete folder or the one before. InputError when it
        names a file or a folder holding other files than a review's (check_folder).
    parameters : dict, optional
        The request beside the run's options (seams, nominal, notes), as run_document takes them.
    summary : dict, optional
        summary.part_summary of the loaded part (made from the part alone when not given).
    exact : dict, optional
        For a STEP part, the grade document of the same seams graded exactly on its B-rep faces
        (grading.exact.grade_brep): written as exact.json and set beside the mesh grades on the page.
    quiet : bool
        No progress bar.

    Returns
    -------
    Path
        The page, ``out_dir/index.html``.
    """
    from surfcheck.geometry.differential import principal_curvatures
    from surfcheck.review.plots import plot_along_seam, plot_profiles
    from surfcheck.review.render import colour_limits, limits_text, overview_views, render_field, seam_views

    folder = check_folder(out_dir)
    part, profile = run.part, run.profile
    graded = [s for s in run.seams if s.grade is not None]
    grades = [s.grade for s in graded]
    document = run_document(run, required, parameters)
    summary = summary or part_summary(LoadResult(part))
    V, F = part.vertices, part.faces
    diagonal = float(np.linalg.norm(V.max(axis=0) - V.min(axis=0)))
    name = Path(part.source).name or "part"
    part_pictures: list[Picture] = []
    seam_pictures: dict[str, list[Picture]] = {}
    with replaced_folder(folder, OWN_FILES) as out, _Steps(2 + len(PART_QUANTITIES) + 4 * len(grades), quiet) as steps:
        fields = {q: without_boundary_band(part, f)
                  for q, f in vertex_fields(part, dict.fromkeys([*PART_QUANTITIES, SEAM_QUANTITY])).items()}
        curvature = principal_curvatures(V, F)
        steps.advance("fields")
        overlays = [seam_overlay(s.curve, s.grade, shown_order(s.grade, required)) for s in graded]
        shown = sorted({ORDERS[shown_order(g, required)] for g in grades})
        for quantity in PART_QUANTITIES:
            f = fields[quantity]
            file = f"part-{_file_name(quantity)}.png"
            render_field(V, F, f.values, out / file, quantity=quantity, unit=f.unit, signed=f.signed,
                         seams=overlays, views=overview_views(V, F),
                         title=f"{f.description}: {name}")
            part_pictures.append(Picture(file, f"{f.description} [{f.unit}] over the whole part, from the side"
                                         " that shows most of it and from the other side; seams coloured by"
                                         f" their per-station result up to {'/'.join(shown)}.{_grey(f, part.units)}",
                                         f"{quantity} heatmap of the whole part"))
            steps.advance(quantity)
        interactive = _interactive_view(part, fields[SEAM_QUANTITY], overlays, out)
        for seam, overlay in zip(graded, overlays):
            curve, grade = seam.curve, seam.grade
            pictures = seam_pictures.setdefault(grade.id, [])
            edge = seam.stations[0].section.edge
            order = shown_order(grade, required)
            focus = grade.orders[order].worst_position
            f = fields[SEAM_QUANTITY]
            stem = _file_name(grade.id)
            radius = min(CLOSE_UP_EDGES * edge, CLOSE_UP_SHARE * diagonal)
            near = _near(V, curve.points, radius)
            views = seam_views(V, F, curve.points, focus, radius, grade.id)
            render_field(V, F, f.values, out / f"{stem}-map.png", quantity=SEAM_QUANTITY, unit=f.unit,
                         signed=f.signed, seams=[overlay], limits=colour_limits(f.values[near], f.signed),
                         limits_rule=limits_text(f.signed, f"within {radius:.3g} {part.units} of {grade.id}"),
                         views=views,
                         title=f"{grade.id} ({grade.groups[0]} | {grade.groups[1]}) over the {f.description}")
            pictures.append(Picture(f"{stem}-map.png", f"{f.description} [{f.unit}] around {grade.id}, facing it;"
                                    f" close-up at the governing station of {ORDERS[order]}. Tube: the seam; balls: the stations'"
                                    " seam points as graded (after the transition search); both coloured by the"
                                    f" result up to {ORDERS[order]} per station.{_grey(f, part.units)}",
                                    f"{grade.id} over the {SEAM_QUANTITY} heatmap"))
            steps.advance(f"{grade.id} picture")
            split, triangles, lines, lights = seam_reflection(V, F, curvature.normals, curve.points, focus, radius)
            shown = lines[_near(split, curve.points, radius) & np.isfinite(lines)]
            render_field(split, triangles, lines, out / f"{stem}-reflection.png", quantity="reflection", unit=part.units,
                         signed=False, seams=[overlay], views=views, stripes=lights.spacing,
                         limits=colour_limits(shown, False),
                         title=f"{grade.id} ({grade.groups[0]} | {grade.groups[1]}): reflection lines")
            pictures.append(Picture(f"{stem}-reflection.png", f"Reflection lines near {grade.id}: the part as a"
                                    " mirror of parallel light lines"
                                    f" {lights.spacing:.3g} {part.units} apart in a plane {radius:.3g} {part.units}"
                                    " above the seam, seen from above it, from the smoothed (jet-fit) normals,"
                                    " interpolated across each triangle (long triangles split, so stripes curve"
                                    " within them as on the surface);"
                                    f" stripes within {radius:.3g} {part.units} of the seam. A stripe that breaks"
                                    " at the seam: the normals jump (G0 at most); one that kinks: the curvature"
                                    " jumps (G1, not G2); one that bends on smoothly: G2 or better. The jet fits"
                                    f" round a break or a kink off over their radius ({curvature.radius:.2g}"
                                    f" {part.units}) each side, and on a coarse CAD export, whose faces hold few"
                                    " vertices, they may bend a smooth seam's stripes into a corner: the grades"
                                    " decide. Light grey: the surface mirrors no light line"
                                    " there (it turns more than about 45 deg from the seam's mean normal, as the"
                                    " faces of a right-angled crease do) or lies outside the stripes shown.",
                                    f"{grade.id} reflection lines"))
            steps.advance(f"{grade.id} reflection lines")
            plot_along_seam(grade, out / f"{stem}-along.png", coverage=profile.coverage)
            pictures.append(Picture(f"{stem}-along.png", f"G0..G3 at each station along {grade.id} against the"
                                    " tolerance (shaded: within tolerance).", f"{grade.id} G0 to G3 along the seam"))
            steps.advance(f"{grade.id} along the seam")
            plot_profiles(seam, out / f"{stem}-profiles.png", coverage=profile.coverage, curvature=curvature)
            pictures.append(Picture(f"{stem}-profiles.png", f"The section and the curvature across {grade.id} at"
                                    " its worst stations, each side's one-sided fit over its data.",
                                    f"{grade.id} curvature profiles"))
            steps.advance(f"{grade.id} profiles")
        write_atomic(out / RESULT_FILE, (json.dumps(document, indent=2, allow_nan=False) + "\n").encode())
        if exact is not None:
            write_atomic(out / EXACT_FILE, (json.dumps(exact, indent=2, allow_nan=False) + "\n").encode())
        context = {"surfcheck": __version__, "libraries": _library_versions(),
                   "written": datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")}
        notes = _notes(document)
        page = review_page(document, summary, part_pictures, seam_pictures, context, notes, interactive, exact)
        write_atomic(out / PAGE_FILE, page.encode("utf-8"))
        steps.advance("page")
    return folder / PAGE_FILE


def _interactive_view(part: Part, field: VertexField, overlays: list, out: Path) -> str | None:
    """Write the part's interactive 3D view (view3d.py) coloured by ``field`` with the seams; its file
    name, or None when trame-vtk is not installed."""
    from surfcheck.review import view3d
    from surfcheck.review.render import colour_limits, overview_views

    if not view3d.available():
        return None
    view3d.write_view(part.vertices, part.faces, field.values, out / VIEW_FILE, seams=overlays,
                      limits=colour_limits(field.values, field.signed),
                      view=overview_views(part.vertices, part.faces)[0])
    return VIEW_FILE


def _notes(document: dict) -> list[str]:
    """Cautions that this result calls for, beyond the standing one."""
    notes = []
    unresolved = sorted({f"{s['id']} {k}" for s in document["seams"] for k, o in s["orders"].items()
                         if o["status"] == Status.NOT_RESOLVED})
    if unresolved:
        notes.append("Not resolved (the data cannot decide within the tolerance; measure finer or with less"
                     f" noise before concluding): {', '.join(unresolved)}.")
    for seam in document["not_graded"]:
        notes.append(f"Not graded: {seam['id']} ({' | '.join(seam['groups'])}): {seam['reason']}.")
    return notes
