"""PLY (ASCII and binary), with face groups from an integer face property."""

from __future__ import annotations

import re

import numpy as np
import trimesh

from surfcheck.errors import InputError
from surfcheck.io.raw import RawMesh

GROUP_PROPERTIES = ("group", "label", "face_group", "region", "patch")


_PLY_SIZES = {"char": 1, "uchar": 1, "int8": 1, "uint8": 1, "short": 2, "ushort": 2, "int16": 2,
              "uint16": 2, "int": 4, "uint": 4, "int32": 4, "uint32": 4, "float": 4, "float32": 4,
              "double": 8, "float64": 8}


def parse_ply(data: bytes, name: str) -> RawMesh:
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
