"""The surfcheck command line: parses options, calls the library, prints or writes. No numerics here."""

from __future__ import annotations

import json
import os
import sys
from pathlib import Path
from typing import Optional

import numpy as np
import typer
from rich.console import Console
from rich.table import Table

from surfcheck.errors import InputError, SurfcheckError
from surfcheck.grading.document import CAUTION
from surfcheck.io import check_outputs, read_part
from surfcheck.progress import step, track
from surfcheck.seams import SeamIndex
from surfcheck.summary import part_summary

app = typer.Typer(
    name="surfcheck",
    help="Grade G0-G3 continuity of fillets and blends on triangle meshes; build blend patches.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)
console = Console(highlight=False, width=None if sys.stdout.isatty() else 140)

PART_ARG = typer.Argument(..., help="Part file: .stl (ASCII or binary), .obj (g/o groups), .ply or .step/.stp (B-rep).")
UNITS_OPT = typer.Option("mm", "--units", help="Length unit of the file's coordinates.")
DEFLECTION_OPT = typer.Option(None, "--deflection", help="STEP input: chordal deflection of the tessellation, in part units (default from the part's size).")
JSON_OPT = typer.Option(False, "--json", help="Print one JSON document to stdout and nothing else.")


def print_json(document: dict) -> None:
    """One JSON document on stdout."""
    sys.stdout.write(json.dumps(document, indent=2, allow_nan=False) + "\n")


def _read(path: Path, **options):
    """read_part with a bar on the terminal while the file is read."""
    with step(f"reading {Path(path).name}"):
        return read_part(path, **options)


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def _point(p: list[float]) -> str:
    return " ".join(f"{x:.2f}" for x in p)


def _groups(names: list[str]) -> str:
    return " | ".join(names) if len(names) <= 2 else f"{len(names)} groups"


@app.command()
def inspect(part: Path = PART_ARG, units: str = UNITS_OPT, as_json: bool = JSON_OPT,
            deflection: Optional[float] = DEFLECTION_OPT) -> None:
    """Size, groups, boundaries, edge lengths and defects of a part."""
    loaded = _read(part, units=units, deflection=deflection)
    summary = part_summary(loaded)
    if as_json:
        print_json(summary)
        return
    u = summary["units"]
    box = summary["bounding_box"]
    console.print(f"[bold]{summary['source']}[/bold]  {summary['vertices']} vertices, {summary['faces']} triangles,"
              f" units {u}, {summary['merged_vertices']} duplicate vertices welded")
    console.print(f"box {[_fmt(x) for x in box['min']]} .. {[_fmt(x) for x in box['max']]}"
              f"  diagonal {_fmt(box['diagonal'])} {u}, area {_fmt(summary['area'])} {u}^2")
    e = summary["edge_length"]
    console.print(f"edge length min {_fmt(e['min'])}, median {_fmt(e['median'])}, mean {_fmt(e['mean'])},"
              f" max {_fmt(e['max'])} {u}")
    groups = summary["groups"]
    table = Table("group", "triangles", f"area [{u}^2]", title=f"face groups ({len(groups)})")
    for g in groups[:LISTED_GROUPS]:
        table.add_row(g["name"], str(g["faces"]), _fmt(g["area"]))
    console.print(table)
    if len(groups) > LISTED_GROUPS:
        console.print(f"... and {len(groups) - LISTED_GROUPS} more groups (every one in --json)")
    d = summary["defects"]
    console.print(f"components {d['components']}, boundary loops {summary['boundary_loops']}"
              f" ({d['boundary_edges']} boundary edges), group seams {summary['group_seams']},"
              f" misoriented edges {d['misoriented_edges']}")
    for warning in summary["warnings"]:
        console.print(f"[yellow]warning:[/yellow] {warning}")


@app.command()
def loops(part: Path = PART_ARG, units: str = UNITS_OPT, as_json: bool = JSON_OPT,
          deflection: Optional[float] = DEFLECTION_OPT) -> None:
    """Every boundary loop, boundary chain and group seam, with the ids other commands take."""
    index = SeamIndex(_read(part, units=units, deflection=deflection, command="loops").part)
    document = {
        "loops": [c.to_dict() for c in index.loops],
        "chains": [c.to_dict() for c in index.chains],
        "seams": [c.to_dict() for c in index.seams],
    }
    if as_json:
        print_json(document)
        return
    table = Table("id", f"length [{units}]", "vertices", "closed", "groups", "start", "end",
                  title=f"loops, chains and seams of {part}")
    for column in table.columns:
        column.no_wrap = True
    for kind in ("loops", "chains", "seams"):
        for item in document[kind]:
            table.add_row(item["id"], _fmt(item["length"]), str(item["vertices"]), "yes" if item["closed"] else "no",
                          _groups(item["groups"]), _point(item["start"]), _point(item["end"]))
    console.print(table)


def _order_cell(order: dict) -> str:
    colour = {"ok": "green", "fail": "red"}.get(order["status"], "yellow")
    if order["value"] is None or order["uncertainty"] is None:
        return f"- [{colour}]{order['status']}[/{colour}]"
    text = f"{order['value']:.3g} ± {order['uncertainty']:.2g} / {order['tolerance']:.3g}"
    return f"{text} [{colour}]{order['status']}[/{colour}]"


def print_grades(document: dict) -> None:
    """The grade table: one row per seam, each order as value ± uncertainty / tolerance and status."""
    u = document["units"]
    table = Table("seam", "groups", f"length [{u}]", "stations", f"G0 gap [{u}]", "G1 angle [deg]",
                  f"G2 jump [1/{u}]", f"G3 jump [1/{u}^2]", "achieved",
                  title=f"continuity of {document['part']['source']} (tolerance profile {document['tolerance']['name']})")
    for seam in document["seams"]:
        achieved = seam["achieved"]
        limit = seam["limited_by"]
        why = f" ({limit['order']} {limit['status']})" if limit else ""
        table.add_row(seam["id"], " | ".join(seam["groups"]), _fmt(seam["length"]), str(seam["stations"]),
                      *(_order_cell(seam["orders"][k]) for k in ("G0", "G1", "G2", "G3")),
                      ("G" + str(achieved) if achieved >= 0 else "none") + why)
    console.print(table)
    console.print("values: governing station's value ± standard uncertainty / tolerance; the decision uses"
                  f" the expanded uncertainty (k = {document['tolerance']['coverage']:g})")
    for item in document["advice"]:
        console.print(f"{item['seam']}: {item['text']}")
    for item in document.get("not_graded", []):
        console.print(f"[yellow]not graded[/yellow] {item['id']} ({' | '.join(item['groups'])}): {item['reason']}")
    if document["require"]:
        colour = "green" if document["verdict"] == "pass" else "red"
        console.print(f"requirement {document['require']}: [{colour}]{document['verdict']}[/{colour}]")
    console.print(f"[dim]{document['caution']}[/dim]")


SEAM_OPT = typer.Option(..., "--seam", help="GROUP_A:GROUP_B, an id from `surfcheck loops`, or `all`. Repeatable.")
TOLERANCE_OPT = typer.Option("general", "--tolerance", help="Profile name (styling, general, scan) or a .toml file.")
REQUIRE_OPT = typer.Option(None, "--require", help="G0, G1, G2 or G3: exit 1 if a seam falls short.")
STATIONS_OPT = typer.Option(None, "--stations", min=3, help="Stations per seam (default from its length).")
SPACING_OPT = typer.Option(None, "--spacing", help="Distance between stations, in part units.")
STRIP_OPT = typer.Option(None, "--strip", help="Half-width of a station's strip along the seam, part units (default from the edge length).")
REACH_OPT = typer.Option(None, "--reach", help="How far from the seam a section reaches, part units (default from the edge length).")
SEARCH_OPT = typer.Option(False, "--search", help="On a welded seam, move the split to the transition found along each section.")
LISTED_GROUPS = 60  # face groups the text output of inspect lists (a file may hold one per triangle)
METHOD_OPT = typer.Option(None, "--method", help="exact (a STEP part's B-rep faces; its default) or mesh (the triangles; default for meshes).")
NOMINAL_OPT = typer.Option(None, "--nominal", help="A grouped nominal part: align the scan to it and grade by its group names.")


@app.command()
def grade(
    part: Path = PART_ARG,
    seam: list[str] = SEAM_OPT,
    tolerance: str = TOLERANCE_OPT,
    require: Optional[str] = REQUIRE_OPT,
    stations: Optional[int] = STATIONS_OPT,
    spacing: Optional[float] = SPACING_OPT,
    units: str = UNITS_OPT,
    deflection: Optional[float] = DEFLECTION_OPT,
    as_json: bool = JSON_OPT,
    report_dir: Optional[Path] = typer.Option(None, "--report", help="Also write the review page (index.html, pictures, result.json) to this folder."),
    nominal: Optional[Path] = NOMINAL_OPT,
    strip: Optional[float] = STRIP_OPT,
    reach: Optional[float] = REACH_OPT,
    search: bool = SEARCH_OPT,
    method: Optional[str] = METHOD_OPT,
) -> None:
    """Grade G0..G3 continuity across seams, with uncertainty, against a tolerance profile.

    On a scan without groups, `--seam auto` segments it into faces and fillets first, and `--nominal`
    labels it from a grouped nominal part. A STEP part is graded on its B-rep faces (exact) unless
    `--method mesh` asks for its tessellation."""
    from surfcheck.grading.request import GradeRequest, grade_prepared, prepare_part, review_gradings
    from surfcheck.grading.run import GradeOptions

    if report_dir is not None:
        from surfcheck.review.folder import FIXED_FILES, check_folder, write_report

        check_outputs([report_dir, *(report_dir / f for f in FIXED_FILES)], [part, nominal])
        check_folder(report_dir)
    request = GradeRequest(tuple(seam), tolerance, require, GradeOptions(stations, spacing, strip, reach, search),
                           units, deflection, method, str(nominal) if nominal is not None else None)
    request.profile()  # a bad profile is reported before the part is read
    prepared = prepare_part(part, request, report=report_dir is not None)

    def progress(seams):
        return track(seams, "grading seams")

    run, document = grade_prepared(prepared, request, progress)
    if report_dir is not None:  # a STEP part's page draws its tessellation, its exact grades beside
        drawn, drawn_document, exact = review_gradings(prepared, request, run, document, progress)
        with step("writing the review page"):
            page = write_report(drawn, request.required, report_dir, parameters=drawn_document["parameters"],
                                summary=part_summary(prepared.loaded), exact=exact, quiet=as_json)
    if as_json:
        print_json(document)
    else:
        print_grades(document)
        if report_dir is not None:
            console.print(f"review page: {page}")
    raise typer.Exit(1 if document["verdict"] == "fail" else 0)


@app.command()
def report(
    part: Path = PART_ARG,
    seam: list[str] = SEAM_OPT,
    out: Path = typer.Option(..., "--out", help="Folder for index.html, its pictures and result.json."),
    tolerance: str = TOLERANCE_OPT,
    require: Optional[str] = REQUIRE_OPT,
    stations: Optional[int] = STATIONS_OPT,
    spacing: Optional[float] = SPACING_OPT,
    units: str = UNITS_OPT,
    deflection: Optional[float] = DEFLECTION_OPT,
    nominal: Optional[Path] = NOMINAL_OPT,
    strip: Optional[float] = STRIP_OPT,
    reach: Optional[float] = REACH_OPT,
    search: bool = SEARCH_OPT,
) -> None:
    """Grade seams and write a review page with pictures and plots (DIR/index.html, DIR/result.json)."""
    grade(part, seam, tolerance, require, stations, spacing, units, deflection=deflection, as_json=False, report_dir=out, nominal=nominal,
          strip=strip, reach=reach, search=search, method="mesh")


@app.command()
def lot(
    parts: list[Path] = typer.Argument(..., help="Part files, folders of part files, or .txt files listing part paths."),
    seam: list[str] = SEAM_OPT,
    out: Path = typer.Option(..., "--out", help="Lot folder: parts/NAME/result.json, lot.parquet, lot.csv, index.html."),
    nominal: Optional[Path] = NOMINAL_OPT,
    tolerance: str = TOLERANCE_OPT,
    require: Optional[str] = REQUIRE_OPT,
    scheduler: Optional[str] = typer.Option(None, "--scheduler", help="A running Dask scheduler, tcp://HOST:PORT (default: a local cluster)."),
    workers: Optional[int] = typer.Option(None, "--workers", help="Worker processes of the local cluster (default: one per core)."),
    force: bool = typer.Option(False, "--force", help="Grade every part again, also those DIR holds already."),
    pages: str = typer.Option("failing", "--pages", help="Review pages of their own for: failing parts, all, or none."),
    stations: Optional[int] = STATIONS_OPT,
    spacing: Optional[float] = SPACING_OPT,
    units: str = UNITS_OPT,
    deflection: Optional[float] = DEFLECTION_OPT,
    as_json: bool = JSON_OPT,
) -> None:
    """Grade a production lot, each part as `grade` does, one task per part on Dask distributed; write
    each part's result as it arrives, the lot table (Parquet, CSV) and the lot page."""
    from surfcheck.grading.request import GradeRequest
    from surfcheck.grading.run import GradeOptions
    from surfcheck.lots.run import run_lot

    request = GradeRequest(tuple(seam), tolerance, require, GradeOptions(stations, spacing), units, deflection,
                           None, str(nominal) if nominal is not None else None)
    result = run_lot(list(parts), request, out, scheduler=scheduler, workers=workers, force=force, pages=pages,
                     progress=None if as_json else _lot_progress)
    summary = result.summary()
    if as_json:
        print_json(summary)
    else:
        print_lot(summary)
    raise typer.Exit(1 if summary["verdict"] == "fail" or summary["errors"] else 0)


def _lot_progress(total: int):
    """A progress bar over the parts of a lot on stderr (when it is a terminal); returns advance(what)."""
    if not sys.stderr.isatty():
        return None
    from rich.progress import Progress

    bar = Progress(console=Console(stderr=True), transient=True)
    task = bar.add_task("grading parts", total=total)
    bar.start()

    def advance(what: str) -> None:
        bar.update(task, advance=1, description=what)
        if bar.finished:
            bar.stop()

    return advance


def print_lot(summary: dict) -> None:
    """The lot in a few lines: parts, yield per seam, failing parts, error rows, verdict."""
    console.print(f"{summary['parts']} parts: {summary['graded']} graded ({summary['kept']} kept from an earlier run),"
                  f" {len(summary['errors'])} with errors")
    table = Table("seam", "parts graded", "meeting", "yield", title=f"lot in {summary['out']}")
    for item in summary["seams"]:
        share = "" if item["yield"] is None else f"{100 * item['yield']:.1f} %"
        table.add_row(item["seam"], str(item["graded"]), "" if item["meeting"] is None else str(item["meeting"]), share)
    console.print(table)
    if summary["failing"]:
        console.print("parts not shown to meet the requirement: " + ", ".join(summary["failing"]))
    if summary["defective"]:
        console.print("of them with a defect shown (an order failing beyond its uncertainty): "
                      + ", ".join(summary["defective"]))
    for item in summary["errors"]:
        console.print(f"[yellow]error row[/yellow] {item['part']}: {item['error']}")
    if summary["require"]:
        colour = "green" if summary["verdict"] == "pass" else "red"
        console.print(f"requirement {summary['require']}: [{colour}]{summary['verdict']}[/{colour}]")
    console.print("written: " + ", ".join(summary["files"].values()))
    console.print(f"[dim]{summary['caution']}[/dim]")


@app.command()
def blend(
    parts: list[Path] = typer.Argument(..., help="PART (both chains on it) or PART_A PART_B."),
    chain_from: str = typer.Option(..., "--from", help="Boundary chain id on the (first) part, from `surfcheck loops`."),
    chain_to: str = typer.Option(..., "--to", help="Boundary chain id on the (second) part."),
    order: int = typer.Option(..., "--order", help="Contact order K to reach on both seams: 1, 2 or 3."),
    step: str = typer.Option("hermite", "--step", help="Smooth step: hermite (default), rational, exp or linear."),
    reach: Optional[float] = typer.Option(None, "--reach", help="How far each side's extension reaches, in part units."),
    resolution: Optional[float] = typer.Option(None, "--resolution", help="Patch edge length (default: from the chains and the reach)."),
    out_patch: Optional[Path] = typer.Option(None, "--out", help="Write the patch alone (.obj, .ply, .stl)."),
    merged_file: Optional[Path] = typer.Option(None, "--merged", help="Write part(s) + patch, welded, as one grouped file."),
    tolerance: str = TOLERANCE_OPT,
    units: str = UNITS_OPT,
    deflection: Optional[float] = DEFLECTION_OPT,
    as_json: bool = JSON_OPT,
) -> None:
    """Build a blend patch of order K between two boundary chains and grade its two new seams."""
    from surfcheck.blend.patch import build_blend, merge_with_patch, patch_part, prove_blend
    from surfcheck.io import save_part
    from surfcheck.grading.document import grade_document
    from surfcheck.grading.tolerances import load_profile

    if len(parts) not in (1, 2):
        raise InputError("blend takes PART, or PART_A PART_B")
    check_outputs([out_patch, merged_file], parts)
    profile = load_profile(tolerance)
    part_a = _read(parts[0], units=units, deflection=deflection, command="blend").part
    part_b = part_a if len(parts) == 1 else _read(parts[1], units=units, deflection=deflection, command="blend").part
    chain_a = _one_chain(SeamIndex(part_a), chain_from, parts[0])
    chain_b = _one_chain(SeamIndex(part_b), chain_to, parts[-1])
    result = build_blend(part_a, chain_a, part_b, chain_b, order, step, reach, resolution)
    merged = merge_with_patch(part_a, result, None if len(parts) == 1 else part_b)
    if out_patch:
        save_part(patch_part(result, part_a.units, str(out_patch)), out_patch)
    if merged_file:
        save_part(merged.part, merged_file)
    grades = prove_blend(merged, profile)
    document = grade_document(merged.part, grades, profile, order,
                              {"from": chain_from, "to": chain_to, "order": order, "step": step, "reach": reach,
                               "resolution": result.spacing, "row_spacing": result.row_spacing,
                               "seam_row_spacing": list(result.seam_row_spacing),
                               "problems": list(result.problems), "notes": list(result.notes)})
    if as_json:
        print_json(document)
    else:
        for problem in result.problems:
            console.print(f"[red]problem:[/red] {problem}")
        for note in result.notes:
            console.print(f"[yellow]note:[/yellow] {note}")
        print_grades(document)
        written = [str(p) for p in (out_patch, merged_file) if p]
        console.print(f"patch: {len(result.vertices)} vertices, {len(result.faces)} triangles, columns "
                      f"{_fmt(result.spacing)} and rows {_fmt(result.row_spacing)} {part_a.units} apart "
                      f"({' and '.join(_fmt(r) for r in result.seam_row_spacing)} near the seams)"
                      + (f"; written {', '.join(written)}" if written else ""))
    raise typer.Exit(1 if result.problems or document["verdict"] == "fail" else 0)


@app.command()
def segment(
    part: Path = PART_ARG,
    out_file: Path = typer.Option(..., "--out", help="Labelled part to write: .obj (groups) or .ply (group property)."),
    radius: Optional[float] = typer.Option(None, "--radius", help="Nominal fillet radius to compare each band with."),
    units: str = UNITS_OPT,
    deflection: Optional[float] = DEFLECTION_OPT,
    as_json: bool = JSON_OPT,
) -> None:
    """Split an unlabelled part (a scan) into faces (plane, cylinder, sphere, cone, torus, freeform)
    and fillet bands, and write it with those groups."""
    from surfcheck.io import save_part
    from surfcheck.segmentation.segment import segment_part

    if out_file.suffix.lower() not in (".obj", ".ply"):
        raise InputError(f"{out_file}: give --out a .obj or .ply name (STL holds no groups)")
    check_outputs([out_file], [part])
    loaded = _read(part, units=units, deflection=deflection, command="segment")
    with step("segmenting"):
        segmentation = segment_part(loaded.part, nominal_radius=radius)
    with step(f"writing {out_file.name}"):
        save_part(segmentation.part, out_file)
    document = segmentation.to_json()
    if as_json:
        print_json(document)
        return
    u = loaded.part.units
    table = Table("group", "kind", f"area [{u}^2]", f"fit rms [{u}]", "parameters", f"fillet radius [{u}]",
                  title=f"faces and fillets of {part}")
    for group in document["groups"]:
        fillet = group.get("radius") or {}
        radius_text = ""
        if fillet.get("mean") is not None:
            radius_text = f"{fillet['mean']:.4g} ({fillet['min']:.4g} .. {fillet['max']:.4g})"
            if fillet.get("across_min") is not None:
                radius_text += f"; across {fillet['across_min']:.4g} .. {fillet['across_max']:.4g}"
            if fillet.get("max_deviation") is not None:
                radius_text += f", deviation from nominal up to {fillet['max_deviation']:.3g}"
        table.add_row(group["name"], group["kind"], _fmt(group["area"]),
                      _fmt(group["fit_residual"]) if group.get("fit_residual") is not None else "",
                      _parameters(group.get("parameters") or {}), radius_text)
    console.print(table)
    for note in document.get("notes", []):
        console.print(f"note: {note}")
    console.print(f"labelled part written to {out_file}")
    console.print(f"[dim]{CAUTION}[/dim]")


def _parameters(parameters: dict) -> str:
    def show(value):
        if isinstance(value, (list, tuple)):
            return "(" + ", ".join(f"{v:.3g}" for v in value) + ")"
        return f"{value:.4g}" if isinstance(value, float) else str(value)

    return "; ".join(f"{k} {show(v)}" for k, v in parameters.items())


@app.command()
def transfer(
    nominal: Path = typer.Argument(..., help="The nominal part, with face groups."),
    scan: Path = typer.Argument(..., help="The scanned part, without groups."),
    out_file: Path = typer.Option(..., "--out", help="Labelled scan to write: .obj or .ply."),
    units: str = UNITS_OPT,
    deflection: Optional[float] = DEFLECTION_OPT,
    as_json: bool = JSON_OPT,
) -> None:
    """Align a scan to its nominal part (principal axes, then ICP) and give each scan triangle the group
    of the nearest nominal triangle."""
    from surfcheck.io import save_part
    from surfcheck.segmentation.transfer import align, transfer_groups

    if out_file.suffix.lower() not in (".obj", ".ply"):
        raise InputError(f"{out_file}: give --out a .obj or .ply name (STL holds no groups)")
    check_outputs([out_file], [nominal, scan])
    reference = _read(nominal, units=units, deflection=deflection, command="transfer").part
    if len(reference.group_names) < 2:
        raise InputError(f"{nominal}: the nominal part has no face groups to carry over")
    measured = _read(scan, units=units, deflection=deflection, command="transfer").part
    with step("aligning the scan"):
        alignment = align(measured, reference)
    with step("carrying the groups over"):
        labelled = transfer_groups(reference, measured, alignment)
    with step(f"writing {out_file.name}"):
        save_part(labelled, out_file)
    document = {"alignment": alignment.to_json(), "groups": list(labelled.group_names), "out": str(out_file)}
    if as_json:
        print_json(document)
        return
    a = document["alignment"]
    console.print(f"aligned {scan} to {nominal}: rms distance {a['rms']:.4g} {measured.units}, inliers"
                  f" {100 * a['inlier_fraction']:.1f} %, {a['iterations']} iterations")
    console.print(f"{len(labelled.group_names)} groups carried over; labelled scan written to {out_file}")


def _one_chain(index: SeamIndex, spec: str, where: Path):
    found = index.find(spec)
    if len(found) != 1 or found[0].kind != "chain":
        raise InputError(f"{where}: {spec!r} is not a boundary chain; use a chain-N.K id from `surfcheck loops`")
    return found[0]


@app.command("map")
def map_field(
    part: Path = PART_ARG,
    quantity: str = typer.Option("mean", "--quantity", help="k1, k2, mean, gaussian, jump, tangent-jump, isophote or reflection."),
    out_file: Path = typer.Option(..., "--out", help="Output: .ply (vertex property), .csv or .png (heatmap; stripes for isophote and reflection)."),
    light: Optional[str] = typer.Option(None, "--light", help="DX,DY,DZ: the light direction (isophote) or the light lines' direction (reflection); default from the part."),
    stripes: Optional[float] = typer.Option(None, "--stripes", help="Light-line spacing, part units (reflection; default the part's diagonal / 24)."),
    units: str = UNITS_OPT,
    deflection: Optional[float] = DEFLECTION_OPT,
) -> None:
    """Write a per-vertex field of a part as PLY, CSV or a PNG picture."""
    from surfcheck.geometry.fields import vertex_field
    from surfcheck.io import save_vertex_field

    suffix = out_file.suffix.lower()
    if suffix not in (".ply", ".csv", ".png"):
        raise InputError(f"{out_file}: give --out a .ply, .csv or .png name")
    check_outputs([out_file], [part])
    lights = _lights(quantity, light, stripes)
    loaded = _read(part, units=units, deflection=deflection, command="map")
    with step(f"computing the {quantity} field"):
        field = vertex_field(loaded.part, quantity, lights=lights)
    if suffix == ".png":
        from surfcheck.review.render import render_field

        with step(f"rendering {out_file.name}"):
            render_field(loaded.part.vertices, loaded.part.faces, field.values, out_file, quantity=quantity,
                         unit=field.unit, signed=field.signed, title=f"{field.description}: {part.name}",
                         stripes=field.stripes)
    else:
        with step(f"writing {out_file.name}"):
            save_vertex_field(loaded.part, field.values, quantity, out_file)
    finite = field.values[np.isfinite(field.values)]
    if len(finite) == 0:
        console.print(f"{quantity} \\[{field.unit}]: no vertex has a value (too few neighbours on this part);"
                      f" written to {out_file}")
        return
    console.print(f"{quantity} \\[{field.unit}]: median {np.median(finite):.4g}, 2nd-98th percentile"
                  f" {np.percentile(finite, 2):.4g} .. {np.percentile(finite, 98):.4g}; written to {out_file}")


def _lights(quantity: str, light: str | None, stripes: float | None) -> dict | None:
    """The stripe fields' light set-up from --light and --stripes (InputError for other quantities or
    a malformed direction)."""
    if light is None and stripes is None:
        return None
    if quantity not in ("isophote", "reflection"):
        raise InputError(f"--light and --stripes set up the isophote and reflection fields, not {quantity}")
    if stripes is not None and quantity != "reflection":
        raise InputError("--stripes is the light lines' spacing: it applies to --quantity reflection")
    lights: dict = {"spacing": stripes}
    if light is not None:
        try:
            direction = [float(x) for x in light.split(",")]
        except ValueError:
            direction = []
        if len(direction) != 3:
            raise InputError(f"--light {light!r}: give a direction as DX,DY,DZ")
        lights["light" if quantity == "isophote" else "line_direction"] = direction
    return lights


@app.command()
def demo(out: Path = typer.Option(Path("surfcheck-demo"), "--out", help="Folder for the sample parts and results.")) -> None:
    """Build the sample parts of the demo scenario and run every command on them."""
    from surfcheck.demo.scenario import run_demo

    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: exists and is not a folder; give another --out")
    run_demo(out, say=console.print)
    console.print(f"results in {out}/")


def main() -> None:
    """Entry point: every SurfcheckError becomes `error: ...` on stderr and exit code 2."""
    try:
        app()  # usage errors print usage and exit 2 here; commands end by typer.Exit(code)
    except SurfcheckError as exc:
        print(f"error: {exc}", file=sys.stderr)
        sys.exit(2)
    except Exception as exc:  # a defect of ours: still one line, unless asked for the trace
        if os.environ.get("SURFCHECK_DEBUG"):
            raise
        print(f"error: internal error ({type(exc).__name__}: {exc}); rerun with SURFCHECK_DEBUG=1 and report it",
              file=sys.stderr)
        sys.exit(2)


if __name__ == "__main__":  # python -m surfcheck.cli, like python -m surfcheck
    main()
