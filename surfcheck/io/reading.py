"""Reading parts: checks the file, picks the format's parser, assembles and welds the Part."""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from surfcheck.errors import InputError
from surfcheck.io.memory import check_memory
from surfcheck.io.obj import parse_obj
from surfcheck.io.ply import parse_ply
from surfcheck.io.raw import RawMesh
from surfcheck.io.stl import parse_stl
from surfcheck.io.weld import weld_vertices
from surfcheck.part import Part, check_mesh_arrays
from surfcheck.validation import clean_faces, fatal_defects

FORMATS = (".stl", ".obj", ".ply", ".step", ".stp")
STEP_FORMATS = (".step", ".stp")
COORDINATE_LIMIT = 1e12  # in file units; beyond it a part is damaged data; common practice, no published source


@dataclass
class LoadResult:
    """A loaded part and what loading did to the file's mesh."""

    part: Part
    merged_vertices: int = 0
    warnings: list[str] = field(default_factory=list)
    brep: object | None = None  # cad.step.Brep the part was tessellated from (STEP input), else None


def load_part(path: str | os.PathLike, units: str = "mm", weld: bool = True,
              deflection: float | None = None) -> Part:
    """Read a mesh file into a Part (duplicate vertices welded). InputError on unusable input.

    Parameters
    ----------
    path : str or PathLike
        An .stl (binary or ASCII), .obj, .ply or .step/.stp file.
    units : str
        Length unit of the coordinates ("mm", "in", ...).
    weld : bool
        Merge vertices closer than the weld tolerance.
    deflection : float, optional
        STEP only: chordal deflection of the tessellation (cad.tessellate; default from the part's size).

    Returns
    -------
    Part
        The mesh with its face groups (one group when the file has none).
    """
    return read_part(path, units=units, weld=weld, deflection=deflection).part


def read_part(path: str | os.PathLike, units: str = "mm", weld: bool = True,
              deflection: float | None = None, command: str = "inspect") -> LoadResult:
    """Read a mesh file and report welding and the non-fatal defects found.

    Parameters
    ----------
    path : str or PathLike
        An .stl, .obj, .ply or .step/.stp file.
    units : str
        Length unit of the coordinates.
    weld : bool
        Merge vertices closer than the weld tolerance.
    deflection : float, optional
        STEP only: chordal deflection of the tessellation (cad.tessellate; default from the part's size).
    command : str
        What will be done with the part: a mesh too large for the memory it needs (io.memory) is
        refused before it is parsed.

    Returns
    -------
    LoadResult
        The Part, how many vertices were welded and the non-fatal defects (validation.py).
    """
    path = Path(path)
    name = str(path)
    check_regular_file(path)
    suffix = path.suffix.lower()
    if suffix not in FORMATS:
        raise InputError(f"{name}: unknown extension {path.suffix!r}; use .stl, .obj, .ply, .step or .stp")
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(f"{name}: cannot be read ({exc.strerror or type(exc).__name__})") from None
    if not data.strip():
        raise InputError(f"{name}: the file is empty")
    if suffix in STEP_FORMATS:
        return _read_step(path, units, weld, deflection)
    reader = {".stl": parse_stl, ".obj": parse_obj, ".ply": parse_ply}[suffix]
    try:
        with np.errstate(over="raise", invalid="raise", divide="raise"):  # an exception, never a warning
            check_memory(data, suffix, name, command)  # from the counts, before anything is allocated for them
            raw = reader(data, name)
    except InputError:
        raise
    except Exception as exc:  # a parser's own failure on malformed bytes
        raise InputError(f"{name}: cannot be read as {suffix[1:].upper()} ({type(exc).__name__})") from None
    return _assemble(raw, name, units, weld)


def check_regular_file(path: Path) -> None:
    """InputError unless ``path`` is (or links to) a regular file; asked of os.stat before any open,
    so a FIFO, a device or a folder is refused at once instead of blocking or reading without end."""
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise InputError(f"{path}: no such file") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror or type(exc).__name__})") from None
    if stat.S_ISDIR(mode):
        raise InputError(f"{path}: is a folder, not a mesh file")
    if not stat.S_ISREG(mode):
        raise InputError(f"{path}: is not a regular file (a pipe, device or socket); give a mesh file")


def _read_step(path: Path, units: str, weld: bool, deflection: float | None) -> LoadResult:
    """A STEP file through cad/: its B-rep (in mm: the kernel's reader converts the file's length unit),
    tessellated, welded along the shared edges."""
    from surfcheck.cad.step import read_step
    from surfcheck.cad.tessellate import tessellate

    if units != "mm":
        raise InputError(f"{path}: the STEP reader gives coordinates in mm whatever the file's unit; drop --units {units}")
    brep = read_step(path)
    loaded = _assemble(tessellate(brep, deflection), str(path), units, weld)
    return LoadResult(loaded.part, loaded.merged_vertices, loaded.warnings, brep)


def _assemble(raw: RawMesh, name: str, units: str, weld: bool) -> LoadResult:
    V = np.asarray(raw.vertices, dtype=np.float64).reshape(-1, 3)
    F = np.asarray(raw.faces, dtype=np.int64).reshape(-1, 3)
    check_mesh_arrays(V, F, name)
    check_magnitude(V, name)
    merged = 0
    if weld:
        V, F, merged = weld_vertices(V, F)
    F, G, warnings = clean_faces(V, F, np.asarray(raw.face_group, dtype=np.int64))
    part = Part(V, F, G, tuple(raw.group_names), units=units, source=name)
    problem = fatal_defects(part)
    if problem:
        raise InputError(f"{name}: {problem}")
    return LoadResult(part, merged, warnings)


def check_magnitude(V: np.ndarray, name: str) -> None:
    """InputError when a (finite) coordinate lies beyond COORDINATE_LIMIT in the file's units."""
    largest = float(np.abs(V).max())
    if largest > COORDINATE_LIMIT:
        raise InputError(f"{name}: a coordinate reaches {largest:.3g}, beyond {COORDINATE_LIMIT:.0e} file units;"
                         " the file is damaged or not in length units: repair or rescale the export")
