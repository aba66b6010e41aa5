"""The surfcheck command line: parses options, calls the library, prints or writes. No numerics here."""

from __future__ import annotations

import json
import os
import sys
from pathlib import Path
from typing import Optional

import typer
from rich.console import Console
from rich.table import Table

from surfcheck.errors import InputError, SurfcheckError
from surfcheck.io import read_part
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

PART_ARG = typer.Argument(..., help="Mesh file: .stl (ASCII or binary), .obj (g/o groups) or .ply.")
UNITS_OPT = typer.Option("mm", "--units", help="Length unit of the file's coordinates.")
JSON_OPT = typer.Option(False, "--json", help="Print one JSON document to stdout and nothing else.")


def print_json(document: dict) -> None:
    """One JSON document on stdout."""
    sys.stdout.write(json.dumps(document, indent=2, allow_nan=False) + "\n")


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def _point(p: list[float]) -> str:
    return " ".join(f"{x:.2f}" for x in p)


def _groups(names: list[str]) -> str:
    return " | ".join(names) if len(names) <= 2 else f"{len(names)} groups"


@app.command()
def inspect(part: Path = PART_ARG, units: str = UNITS_OPT, as_json: bool = JSON_OPT) -> None:
    """Size, groups, boundaries, edge lengths and defects of a part."""
    loaded = read_part(part, units=units)
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
    table = Table("group", "triangles", f"area [{u}^2]", title="face groups")
    for g in summary["groups"]:
        table.add_row(g["name"], str(g["faces"]), _fmt(g["area"]))
    console.print(table)
    d = summary["defects"]
    console.print(f"components {d['components']}, boundary loops {summary['boundary_loops']}"
              f" ({d['boundary_edges']} boundary edges), group seams {summary['group_seams']},"
              f" misoriented edges {d['misoriented_edges']}")
    for warning in summary["warnings"]:
        console.print(f"[yellow]warning:[/yellow] {warning}")


@app.command()
def loops(part: Path = PART_ARG, units: str = UNITS_OPT, as_json: bool = JSON_OPT) -> None:
    """Every boundary loop, boundary chain and group seam, with the ids other commands take."""
    index = SeamIndex(read_part(part, units=units).part)
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


@app.command()
def demo(out: Path = typer.Option(Path("surfcheck-demo"), "--out", help="Folder for the sample parts and results.")) -> None:
    """Build the sample parts of the demo scenario and run every command on them."""
    from surfcheck.demo import run_demo

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
