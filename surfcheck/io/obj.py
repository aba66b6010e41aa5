"""Wavefront OBJ: `v` and `f` records, `g`/`o` names as face groups on one shared vertex array."""

from __future__ import annotations

import numpy as np

from surfcheck.errors import InputError
from surfcheck.io.raw import RawMesh


def parse_obj(data: bytes, name: str) -> RawMesh:
    """OBJ `v`, `f` (v, v/vt, v//vn, v/vt/vn; 1-based or negative; polygons as fans), `g`/`o` names."""
    try:
        text = data.decode("utf-8-sig")  # a byte-order mark at the start is allowed and dropped
    except UnicodeDecodeError:
        raise InputError(f"{name}: not a text OBJ file (bytes that are not UTF-8)") from None
    vertices: list[list[float]] = []
    faces: list[tuple[int, int, int]] = []
    groups: list[int] = []
    names: list[str] = []
    number_of: dict[str, int] = {}  # group name -> its index in names (a file may hold one group per face)
    current = -1
    for number, line in enumerate(text.splitlines(), start=1):
        fields = line.split("#", 1)[0].split()
        if not fields:
            continue
        tag = fields[0]
        if tag == "v":
            if len(fields) < 4:
                raise InputError(f"{name}: line {number}: a vertex needs three coordinates")
            vertices.append(_numbers(fields[1:4], float, name, number, "vertex coordinate"))
        elif tag == "f":
            if len(fields) < 4:
                raise InputError(f"{name}: line {number}: a face needs at least three vertices")
            index = _numbers([f.split("/", 1)[0] for f in fields[1:]], int, name, number, "face index")
            index = [i - 1 if i > 0 else len(vertices) + i for i in index]
            if min(index) < 0 or max(index) >= len(vertices):
                raise InputError(f"{name}: line {number}: a face refers to a vertex not defined before it")
            if current < 0:
                current = _group_number(names, number_of, "part")
            faces.extend((index[0], index[k], index[k + 1]) for k in range(1, len(index) - 1))
            groups.extend([current] * (len(index) - 2))
        elif tag in ("g", "o"):
            current = _group_number(names, number_of, " ".join(fields[1:]) or "part")
    used = sorted(set(groups))
    renumber = np.zeros(max(len(names), 1), dtype=np.int64)
    renumber[used] = np.arange(len(used))
    return RawMesh(
        np.array(vertices, dtype=np.float64).reshape(-1, 3),
        np.array(faces, dtype=np.int64).reshape(-1, 3),
        renumber[np.array(groups, dtype=np.int64)],
        [names[g] for g in used],
    )


def _group_number(names: list[str], number_of: dict[str, int], group: str) -> int:
    if group not in number_of:
        number_of[group] = len(names)
        names.append(group)
    return number_of[group]


def _numbers(words: list[str], kind: type, name: str, number: int, what: str) -> list:
    """The words as numbers of ``kind`` (int or float); InputError naming the line otherwise."""
    numbers = []
    for word in words:
        try:
            numbers.append(kind(word))
        except ValueError:
            raise InputError(f"{name}: line {number}: {what} {word[:20]!r} is not a"
                             f" {'whole number' if kind is int else 'number'}") from None
    return numbers
