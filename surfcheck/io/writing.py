"""Writing parts and vertex fields: OBJ, PLY (binary), STL (binary), CSV; atomic (temp name, rename)."""

from __future__ import annotations

import io
import os
import tempfile
from pathlib import Path

import numpy as np

from surfcheck.errors import InputError, writing
from surfcheck.part import Part


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
    """Write bytes to a temporary file beside ``path`` and rename it into place: the file is complete
    or as it was, whenever the process stops. A link is followed (the file it leads to is replaced).
    OutputError (errors.writing) naming ``path`` when the disk is full, read-only or not permitted."""
    path = Path(path)
    target = Path(os.path.realpath(path))
    with writing(path):
        target.parent.mkdir(parents=True, exist_ok=True)
        handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", dir=target.parent)
        try:
            try:
                _write_all(handle, payload)
            finally:
                os.close(handle)
            os.chmod(temporary, 0o666 & ~current_umask())  # mkstemp makes 0600; a written part is an ordinary file
            os.replace(temporary, target)
        except BaseException:
            if os.path.exists(temporary):
                os.unlink(temporary)
            raise


def _write_all(handle: int, payload: bytes) -> None:
    """os.write until every byte is written (a write may take fewer bytes than it is given)."""
    view = memoryview(payload)
    while view:
        view = view[os.write(handle, view):]


def current_umask() -> int:
    """The process's file mode creation mask (os.umask can only be read by setting it)."""
    mask = os.umask(0)
    os.umask(mask)
    return mask


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
