"""STL: binary (80-byte header, uint32 count, 50 bytes a triangle) or ASCII (solid/facet/vertex)."""

from __future__ import annotations

import numpy as np
import trimesh

from surfcheck.errors import InputError
from surfcheck.io.raw import RawMesh, single_group


def parse_stl(data: bytes, name: str) -> RawMesh:
    """Binary STL: 80-byte header, uint32 count, 50 bytes a triangle; else ASCII `facet`/`vertex`."""
    if len(data) >= 84:
        count = int(np.frombuffer(data, dtype="<u4", count=1, offset=80)[0])
        if 84 + 50 * count == len(data):
            return single_group(trimesh.load(trimesh.util.wrap_as_stream(data), file_type="stl", process=False))
    head = data[:1024].lstrip().lower()
    if head.startswith(b"solid") and b"facet" in data[:4096].lower():
        text = data.decode("ascii", errors="strict")
        if text.lower().count("endfacet") != text.lower().count("facet normal"):
            raise InputError(f"{name}: ASCII STL is truncated (an unfinished facet)")
        return single_group(trimesh.load(trimesh.util.wrap_as_stream(data), file_type="stl", process=False))
    if len(data) >= 84:
        count = int(np.frombuffer(data, dtype="<u4", count=1, offset=80)[0])
        expected = 84 + 50 * count
        raise InputError(
            f"{name}: binary STL claims {count} triangles ({expected} bytes) but the file has {len(data)} bytes;"
            " it is truncated or not an STL"
        )
    raise InputError(f"{name}: not an STL file (too short for binary, no ASCII 'solid ... facet')")


def single_group(mesh) -> RawMesh:
    if not isinstance(mesh, trimesh.Trimesh):
        mesh = mesh.to_geometry() if hasattr(mesh, "to_geometry") else mesh.dump(concatenate=True)
    F = np.asarray(mesh.faces, dtype=np.int64)
    return RawMesh(np.asarray(mesh.vertices), F, np.zeros(len(F), dtype=np.int64), ["part"])
