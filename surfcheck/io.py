"""Reading and writing parts: STL (ASCII and binary), OBJ (g/o groups), PLY (ASCII and binary); STEP
is read through cad/ (one group per B-rep face, tessellated within a chordal deflection).

trimesh parses STL and PLY; OBJ is read here because its group records must become face groups on
one shared vertex array. Every reader checks the file before parsing, so a truncated, garbage or
absurd file fails fast with a one-line InputError. Writers go to a temporary name, then rename.
"""

from __future__ import annotations

import io
import os
import re
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import scipy.sparse as sp
import trimesh
from scipy.spatial import cKDTree

from surfcheck.errors import InputError
from surfcheck.part import Part, check_mesh_arrays
from surfcheck.validation import clean_faces, fatal_defects

FORMATS = (".stl", ".obj", ".ply", ".step", ".stp")
STEP_FORMATS = (".step", ".stp")
WELD_RELATIVE_TOLERANCE = 1e-7  # of the bounding-box diagonal; common practice, no published source
GROUP_PROPERTIES = ("group", "label", "face_group", "region", "patch")


@dataclass
class RawMesh:
    vertices: np.ndarray
    faces: np.ndarray
    face_group: np.ndarray
    group_names: list[str]


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
              deflection: float | None = None) -> LoadResult:
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

    Returns
    -------
    LoadResult
        The Part, how many vertices were welded and the non-fatal defects (validation.py).
    """
    path = Path(path)
    name = str(path)
    if not path.exists():
        raise InputError(f"{name}: no such file")
    if path.is_dir():
        raise InputError(f"{name}: is a folder, not a mesh file")
    suffix = path.suffix.lower()
    if suffix not in FORMATS:
        raise InputError(f"{name}: unknown extension {path.suffix!r}; use .stl, .obj, .ply, .step or .stp")
    data = path.read_bytes()
    if not data.strip():
        raise InputError(f"{name}: the file is empty")
    if suffix in STEP_FORMATS:
        return _read_step(path, units, weld, deflection)
    reader = {".stl": _parse_stl, ".obj": _parse_obj, ".ply": _parse_ply}[suffix]
    try:
        raw = reader(data, name)
    except InputError:
        raise
    except Exception as exc:  # a parser's own failure on malformed bytes
        raise InputError(f"{name}: cannot be read as {suffix[1:].upper()} ({type(exc).__name__})") from None
    return _assemble(raw, name, units, weld)


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
    merged = 0
    if weld:
        V, F, merged = weld_vertices(V, F)
    F, G, warnings = clean_faces(V, F, np.asarray(raw.face_group, dtype=np.int64))
    part = Part(V, F, G, tuple(raw.group_names), units=units, source=name)
    problem = fatal_defects(part)
    if problem:
        raise InputError(f"{name}: {problem}")
    return LoadResult(part, merged, warnings)


def weld_vertices(V: np.ndarray, F: np.ndarray, tolerance: float | None = None):
    """Merge vertices closer than ``tolerance`` (default: 1e-7 of the bounding-box diagonal).

    Returns the used vertices, re-indexed faces and how many vertices were merged away.
    """
    if tolerance is None:
        tolerance = WELD_RELATIVE_TOLERANCE * float(np.linalg.norm(np.ptp(V, axis=0)) or 1.0)
    pairs = cKDTree(V).query_pairs(tolerance, output_type="ndarray")
    representative = np.arange(len(V))
    if len(pairs):
        graph = sp.coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(len(V), len(V)))
        _, labels = sp.csgraph.connected_components(graph, directed=False)
        first = np.full(labels.max() + 1, len(V))
        np.minimum.at(first, labels, np.arange(len(V)))
        representative = first[labels]
    merged = len(V) - len(np.unique(representative))
    used, new_index = np.unique(representative[F.reshape(-1)], return_inverse=True)
    return V[used], new_index.reshape(-1, 3).astype(np.int64), merged


# ----------------------------------------------------------------------------------------- STL

def _parse_stl(data: bytes, name: str) -> RawMesh:
    """Binary STL: 80-byte header, uint32 count, 50 bytes a triangle; else ASCII `facet`/`vertex`."""
    if len(data) >= 84:
        count = int(np.frombuffer(data, dtype="<u4", count=1, offset=80)[0])
        if 84 + 50 * count == len(data):
            return _single_group(trimesh.load(trimesh.util.wrap_as_stream(data), file_type="stl", process=False))
    head = data[:1024].lstrip().lower()
    if head.startswith(b"solid") and b"facet" in data[:4096].lower():
        text = data.decode("ascii", errors="strict")
        if text.lower().count("endfacet") != text.lower().count("facet normal"):
            raise InputError(f"{name}: ASCII STL is truncated (an unfinished facet)")
        return _single_group(trimesh.load(trimesh.util.wrap_as_stream(data), file_type="stl", process=False))
    if len(data) >= 84:
        count = int(np.frombuffer(data, dtype="<u4", count=1, offset=80)[0])
        expected = 84 + 50 * count
        raise InputError(
            f"{name}: binary STL claims {count} triangles ({expected} bytes) but the file has {len(data)} bytes;"
            " it is truncated or not an STL"
        )
    raise InputError(f"{name}: not an STL file (too short for binary, no ASCII 'solid ... facet')")


def _single_group(mesh) -> RawMesh:
    if not isinstance(mesh, trimesh.Trimesh):
        mesh = mesh.to_geometry() if hasattr(mesh, "to_geometry") else mesh.dump(concatenate=True)
    F = np.asarray(mesh.faces, dtype=np.int64)
    return RawMesh(np.asarray(mesh.vertices), F, np.zeros(len(F), dtype=np.int64), ["part"])


# ----------------------------------------------------------------------------------------- OBJ

def _parse_obj(data: bytes, name: str) -> RawMesh:
    """OBJ `v`, `f` (v, v/vt, v//vn, v/vt/vn; 1-based or negative; polygons as fans), `g`/`o` names."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(f"{name}: not a text OBJ file (bytes that are not UTF-8)") from None
    vertices: list[list[float]] = []
    faces: list[tuple[int, int, int]] = []
    groups: list[int] = []
    names: list[str] = []
    current = -1
    for number, line in enumerate(text.splitlines(), start=1):
        fields = line.split("#", 1)[0].split()
        if not fields:
            continue
        tag = fields[0]
        if tag == "v":
            if len(fields) < 4:
                raise InputError(f"{name}: line {number}: a vertex needs three coordinates")
            vertices.append([float(x) for x in fields[1:4]])
        elif tag == "f":
            if len(fields) < 4:
                raise InputError(f"{name}: line {number}: a face needs at least three vertices")
            index = [int(f.split("/", 1)[0]) for f in fields[1:]]
            index = [i - 1 if i > 0 else len(vertices) + i for i in index]
            if min(index) < 0 or max(index) >= len(vertices):
                raise InputError(f"{name}: line {number}: a face refers to a vertex not defined before it")
            if current < 0:
                current = _group_number(names, "part")
            faces.extend((index[0], index[k], index[k + 1]) for k in range(1, len(index) - 1))
            groups.extend([current] * (len(index) - 2))
        elif tag in ("g", "o"):
            current = _group_number(names, " ".join(fields[1:]) or "part")
    used = sorted(set(groups))
    renumber = np.zeros(max(len(names), 1), dtype=np.int64)
    renumber[used] = np.arange(len(used))
    return RawMesh(
        np.array(vertices, dtype=np.float64).reshape(-1, 3),
        np.array(faces, dtype=np.int64).reshape(-1, 3),
        renumber[np.array(groups, dtype=np.int64)],
        [names[g] for g in used],
    )


def _group_number(names: list[str], group: str) -> int:
    if group not in names:
        names.append(group)
    return names.index(group)


# ----------------------------------------------------------------------------------------- PLY

_PLY_SIZES = {"char": 1, "uchar": 1, "int8": 1, "uint8": 1, "short": 2, "ushort": 2, "int16": 2,
              "uint16": 2, "int": 4, "uint": 4, "int32": 4, "uint32": 4, "float": 4, "float32": 4,
              "double": 8, "float64": 8}


def _parse_ply(data: bytes, name: str) -> RawMesh:
    """PLY per its header grammar (`ply`, `format`, `element`, `property`, `end_header`)."""
    end = data.find(b"end_header")
    if not data.startswith(b"ply") or end < 0:
        raise InputError(f"{name}: not a PLY file (no 'ply' magic or no 'end_header')")
    header = data[:end].decode("ascii", errors="replace").splitlines()
    fmt = next((line.split()[1] for line in header if line.startswith("format")), "")
    counts = {}
    for line in header:
        words = line.split()
        if words[:1] == ["element"] and len(words) == 3:
            counts[words[1]] = int(words[2])
    body = len(data) - end
    # Each vertex takes at least 3 bytes in binary (or ~6 characters in ASCII), each face at least 4:
    # a header claiming more than the body can hold is truncated or absurd; refuse before allocating.
    least = 3 * counts.get("vertex", 0) + 4 * counts.get("face", 0)
    if least > body:
        raise InputError(
            f"{name}: PLY header claims {counts.get('vertex', 0)} vertices and {counts.get('face', 0)} faces"
            f" but the data is only {body} bytes; the file is truncated or corrupt"
        )
    if fmt not in ("ascii", "binary_little_endian", "binary_big_endian"):
        raise InputError(f"{name}: PLY format {fmt!r} is not ascii or binary")
    mesh = trimesh.load(trimesh.util.wrap_as_stream(data), file_type="ply", process=False)
    if not isinstance(mesh, trimesh.Trimesh) or len(mesh.faces) == 0:
        raise InputError(f"{name}: the PLY holds no triangles")
    F = np.asarray(mesh.faces, dtype=np.int64)
    labels, names = _ply_groups(mesh, header, len(F))
    return RawMesh(np.asarray(mesh.vertices), F, labels, names)


def _ply_groups(mesh, header: list[str], n_faces: int) -> tuple[np.ndarray, list[str]]:
    """The first integer face property named like a group; names from `comment group N NAME` lines."""
    raw = mesh.metadata.get("_ply_raw", {}).get("face", {}).get("data")
    # trimesh gives a structured array for binary PLY and a dict of arrays for ASCII PLY.
    names = raw.dtype.names if hasattr(raw, "dtype") else tuple(raw) if isinstance(raw, dict) else ()
    labels = None
    for prop in GROUP_PROPERTIES:
        if prop in (names or ()) and np.issubdtype(np.asarray(raw[prop]).dtype, np.integer):
            labels = np.asarray(raw[prop]).reshape(-1).astype(np.int64)
            break
    if labels is None or len(labels) != n_faces:
        return np.zeros(n_faces, dtype=np.int64), ["part"]
    named = {}
    for line in header:
        match = re.match(r"comment\s+group\s+(-?\d+)\s+(.+)$", line.strip())
        if match:
            named[int(match.group(1))] = match.group(2).strip()
    values, inverse = np.unique(labels, return_inverse=True)
    return inverse.reshape(-1), [named.get(int(v), f"group-{int(v)}") for v in values]


# ---------------------------------------------------------------------------------------- write

def save_part(part: Part, path: str | os.PathLike) -> Path:
    """Write a part as .obj (groups as `g`), .ply (binary, int `group` face property and
    `comment group N NAME` lines) or .stl (binary; groups are lost). Atomic: temp name, then rename.

    Parameters
    ----------
    part : Part
        The mesh to write.
    path : str or PathLike
        Target file; its suffix chooses the format.

    Returns
    -------
    Path
        The path written.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    writers = {".obj": _obj_bytes, ".ply": _ply_bytes, ".stl": _stl_bytes}
    if suffix not in writers:
        raise InputError(f"{path}: unknown extension {path.suffix!r}; use .stl, .obj or .ply")
    if path.is_dir():
        raise InputError(f"{path}: is a folder; give a file name")
    payload = writers[suffix](part)
    write_atomic(path, payload)
    return path


def write_atomic(path: Path, payload: bytes) -> None:
    """Write bytes to a temporary file beside ``path`` and rename it into place."""
    path.parent.mkdir(parents=True, exist_ok=True)
    handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(payload)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temporary, 0o666 & ~umask)  # mkstemp makes 0600; a written part is an ordinary file
        os.replace(temporary, path)
    except BaseException:
        if os.path.exists(temporary):
            os.unlink(temporary)
        raise


def _obj_bytes(part: Part) -> bytes:
    """Wavefront OBJ text: the vertices (shortest round-trip decimals), then each group's faces under
    a ``g`` line; rows are formatted by numpy's string operations, not a Python loop per face."""
    blocks = [f"# surfcheck part, units {part.units}", _rows("v", part.vertices.astype(str))]
    for group, name in enumerate(part.group_names):
        faces = part.faces[part.face_group == group]
        if len(faces):
            blocks += [f"g {name}", _rows("f", (faces + 1).astype(str))]
    return ("\n".join(b for b in blocks if b) + "\n").encode()


def _rows(keyword: str, cells: np.ndarray) -> str:
    """Lines "keyword c0 c1 c2" of an (n, 3) array of strings."""
    line = np.char.add(keyword + " ", cells[:, 0])
    for column in range(1, cells.shape[1]):
        line = np.char.add(np.char.add(line, " "), cells[:, column])
    return "\n".join(line.tolist())


def _ply_bytes(part: Part, vertex_fields: dict[str, np.ndarray] | None = None) -> bytes:
    vertex_fields = vertex_fields or {}
    header = ["ply", "format binary_little_endian 1.0", f"comment units {part.units}"]
    header += [f"comment group {i} {name}" for i, name in enumerate(part.group_names)]
    header += [f"element vertex {part.n_vertices}", "property double x", "property double y", "property double z"]
    header += [f"property double {name}" for name in vertex_fields]
    header += [f"element face {part.n_faces}", "property list uchar int vertex_indices", "property int group",
               "end_header"]
    vertex = np.column_stack([part.vertices, *[np.asarray(v, dtype=float) for v in vertex_fields.values()]])
    face = np.zeros(part.n_faces, dtype=[("n", "u1"), ("v", "<i4", (3,)), ("group", "<i4")])
    face["n"] = 3
    face["v"] = part.faces
    face["group"] = part.face_group
    text = ("\n".join(header) + "\n").encode("ascii")
    return text + vertex.astype("<f8").tobytes() + face.tobytes()


def save_vertex_field(part: Part, values: np.ndarray, name: str, path: str | os.PathLike) -> Path:
    """Write a per-vertex field: .ply (the part with a vertex property ``name``) or .csv (vertex
    index, x, y, z, value; NaN where the field is undefined). Atomic like save_part."""
    path = Path(path)
    values = np.asarray(values, dtype=float).reshape(-1)
    if len(values) != part.n_vertices:
        raise InputError(f"{name}: {len(values)} values for {part.n_vertices} vertices")
    suffix = path.suffix.lower()
    if suffix == ".ply":
        payload = _ply_bytes(part, {name.replace("-", "_"): values})
    elif suffix == ".csv":
        table = np.column_stack([np.arange(part.n_vertices), part.vertices, values])
        stream = io.StringIO()
        np.savetxt(stream, table, fmt=["%d", "%.9g", "%.9g", "%.9g", "%.9g"], delimiter=",",
                   header=f"vertex,x,y,z,{name}", comments="")
        payload = stream.getvalue().encode()
    else:
        raise InputError(f"{path}: a field is written as .ply, .csv or .png")
    write_atomic(path, payload)
    return path


def _stl_bytes(part: Part) -> bytes:
    triangles = part.vertices[part.faces]
    normals = np.cross(triangles[:, 1] - triangles[:, 0], triangles[:, 2] - triangles[:, 0])
    length = np.linalg.norm(normals, axis=1, keepdims=True)
    normals = np.divide(normals, length, out=np.zeros_like(normals), where=length > 0)
    record = np.zeros(part.n_faces, dtype=[("n", "<f4", (3,)), ("v", "<f4", (3, 3)), ("attr", "<u2")])
    record["n"] = normals
    record["v"] = triangles
    header = f"surfcheck part, units {part.units}".encode().ljust(80, b" ")[:80]
    return header + np.uint32(part.n_faces).tobytes() + record.tobytes()
