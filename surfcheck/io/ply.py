"""PLY bodies, ASCII and binary (Turk, "The PLY Polygon File Format"), read into a RawMesh.

The header (plyheader.py) fixes what each record holds. Binary records take exactly the bytes their
property types say, so the file's size is checked exactly; ASCII records are one a line, so the file
must hold exactly as many non-blank lines as the header claims records, each with its number of values.
Faces with more than three corners become triangle fans; an integer face property named like a group
gives the face groups, named by ``comment group N NAME`` lines.
"""

from __future__ import annotations

import re
import numpy as np

from surfcheck.errors import InputError
from surfcheck.io.plyheader import Element, Header, parse_header
from surfcheck.io.plywalk import Lists, walk_records
from surfcheck.io.raw import RawMesh, fan_triangles

GROUP_PROPERTIES = ("group", "label", "face_group", "region", "patch")
INDEX_PROPERTIES = ("vertex_indices", "vertex_index")
WHITESPACE = np.frombuffer(b" \t\n\r\x0b\x0c", dtype=np.uint8)  # what bytes.split() splits on


def parse_ply(data: bytes, name: str) -> RawMesh:
    """Read an ASCII or binary PLY file's vertices, faces and face groups.

    Parameters
    ----------
    data : bytes
        The whole file.
    name : str
        The file's name, for messages.

    Returns
    -------
    RawMesh
        Vertices, triangles (polygons fanned), and the groups of the triangles.
    """
    header = parse_header(data, name)
    records = _binary_records(data, header, name) if header.binary else _ascii_records(data, header, name)
    vertex, face = records.get("vertex", {}), records.get("face", {})
    if not all(isinstance(vertex.get(axis), np.ndarray) for axis in "xyz"):
        raise InputError(f"{name}: PLY has no vertex element with x, y and z properties")
    V = np.column_stack([np.asarray(vertex[axis], dtype=np.float64) for axis in "xyz"])
    polygons = next((face[p] for p in INDEX_PROPERTIES if p in face), None)
    if not isinstance(polygons, Lists):
        raise InputError(f"{name}: PLY has no face element with a vertex_indices list; it holds no triangles")
    F, polygon = fan_triangles(polygons.sizes, _indices(polygons, header, len(V), name))
    labels, names = _groups(face, header, len(polygons.sizes))
    return RawMesh(V, F, labels[polygon], names)


def _indices(polygons: Lists, header: Header, n_vertices: int, name: str) -> np.ndarray:
    """The corner indices as int64, refused unless integers naming existing vertices, 3 or more a face."""
    element = header.element("face")
    code = next(p.code for p in element.properties if p.name in INDEX_PROPERTIES)
    items = polygons.items
    if code[0] == "f" or not np.array_equal(items, np.floor(items)):
        raise InputError(f"{name}: PLY face indices are not whole numbers; the file is damaged")
    if len(polygons.sizes) and polygons.sizes.min() < 3:
        face = int(np.argmax(polygons.sizes < 3))
        raise InputError(f"{name}: PLY face {face} has {int(polygons.sizes[face])} corners; a face needs 3 or more")
    if len(items) and (items.min() < 0 or items.max() >= n_vertices):
        raise InputError(f"{name}: a PLY face refers to a vertex that does not exist (the file has"
                         f" {n_vertices} vertices)")
    return items.astype(np.int64)


def _groups(face: dict, header: Header, n_faces: int) -> tuple[np.ndarray, list[str]]:
    """The first integer face property named like a group; names from `comment group N NAME` lines."""
    integral = {p.name for p in header.element("face").properties if p.integral and not p.is_list}
    prop = next((p for p in GROUP_PROPERTIES if p in integral), None)
    if prop is None:
        return np.zeros(n_faces, dtype=np.int64), ["part"]
    labels = np.asarray(face[prop]).astype(np.int64)
    named = {}
    for comment in header.comments:
        match = re.match(r"group\s+(-?\d+)\s+(.+)$", comment)
        if match:
            named[int(match.group(1))] = match.group(2).strip()
    values, inverse = np.unique(labels, return_inverse=True)
    return inverse.reshape(-1), [named.get(int(v), f"group-{int(v)}") for v in values]


# ------------------------------------------------------------------------------------------ binary

def _binary_records(data: bytes, header: Header, name: str) -> dict[str, dict]:
    """Each element's properties, read as numpy views; the records must end exactly at the file's end."""
    records = {}
    offset = header.body_start
    for element in header.elements:
        layout, lengths = _binary_layout(data, offset, element, header.byte_order, name)
        end = offset + layout.itemsize * element.count
        columns = None
        if end <= len(data):
            table = np.frombuffer(data, dtype=layout, count=element.count, offset=offset)
            columns = _binary_columns(table, element, lengths)
        elif not lengths:
            raise InputError(f"{name}: binary PLY is truncated: element {element.name} needs"
                             f" {end - offset} bytes, {len(data) - offset} are left")
        if columns is None:  # lists of different lengths: walk the records one after the other
            columns, end = walk_records(data, offset, element, header.byte_order, name)
        records[element.name] = columns
        offset = end
    if offset != len(data):
        raise InputError(f"{name}: binary PLY has {len(data) - offset} bytes after its last element;"
                         " the header's counts do not match the data")
    return records


def _binary_layout(data: bytes, offset: int, element: Element, order: str, name: str):
    """The numpy record type of an element when each list has the length it has in the first record,
    and those lengths."""
    fields, lengths = [], []
    position = offset
    for i, prop in enumerate(element.properties):
        if not prop.is_list:
            fields.append((f"p{i}", order + prop.code))
            position += np.dtype(prop.code).itemsize
            continue
        length = 0
        if element.count:
            if position + np.dtype(prop.count_code).itemsize > len(data):
                raise InputError(f"{name}: binary PLY is truncated inside element {element.name}")
            length = int(np.frombuffer(data, dtype=order + prop.count_code, count=1, offset=position)[0])
        fields += [(f"n{i}", order + prop.count_code), (f"p{i}", order + prop.code, (max(length, 0),))]
        lengths.append(length)
        position += np.dtype(prop.count_code).itemsize + max(length, 0) * np.dtype(prop.code).itemsize
    return np.dtype(fields), lengths


def _binary_columns(table: np.ndarray, element: Element, lengths: list[int]) -> dict | None:
    """The element's properties from its record table; None when a list's length varies."""
    columns = {}
    lists = iter(lengths)
    for i, prop in enumerate(element.properties):
        if not prop.is_list:
            columns[prop.name] = table[f"p{i}"]
            continue
        length = next(lists)
        if not (table[f"n{i}"] == length).all():
            return None
        sizes = np.full(element.count, length, dtype=np.int64)
        columns[prop.name] = Lists(sizes, table[f"p{i}"].reshape(-1).astype(np.float64))
    return columns


# ------------------------------------------------------------------------------------------- ASCII

def _ascii_records(data: bytes, header: Header, name: str) -> dict[str, dict]:
    """Each element's properties from its lines; the file must hold exactly the records claimed."""
    lines = data[header.body_start:].splitlines()
    while lines and not lines[-1].strip():
        lines.pop()
    claimed = sum(e.count for e in header.elements)
    if len(lines) != claimed:
        raise InputError(f"{name}: ASCII PLY has {len(lines)} record lines but its header claims {claimed};"
                         " the file is cut short or has records missing or added")
    records = {}
    start = 0
    for element in header.elements:
        block = b"\n".join(lines[start:start + element.count])
        records[element.name] = _ascii_columns(block, element, name)
        start += element.count
    return records


def _ascii_columns(block: bytes, element: Element, name: str) -> dict:
    """The properties of ``element.count`` lines of values, each line one record."""
    raw = np.frombuffer(block, dtype=np.uint8)
    blank = np.isin(raw, WHITESPACE)
    starts = np.flatnonzero(~blank & np.concatenate([[True], blank[:-1]]))
    per_record = np.bincount(np.cumsum(raw == ord("\n"))[starts], minlength=element.count)
    try:
        values = np.array(block.split(), dtype=np.float64)
    except ValueError:
        raise InputError(f"{name}: ASCII PLY element {element.name} has a value that is not a number") from None
    first = np.cumsum(per_record) - per_record
    at = first.copy()
    columns = {}
    for prop in element.properties:
        _check_room(at - first, per_record, 1, element, name)
        head = values[np.minimum(at, len(values) - 1)] if len(values) else np.zeros(element.count)
        _check_whole(head, prop.count_code or prop.code, prop.name, name)
        if prop.is_list:
            _check_room(at - first, per_record, 1 + np.maximum(head, 0), element, name)
            sizes = head.astype(np.int64)
            begin = np.cumsum(sizes) - sizes
            items = np.arange(int(sizes.sum())) + np.repeat(at + 1 - begin, sizes)
            columns[prop.name] = Lists(sizes, values[items])
            at = at + 1 + sizes
        else:
            columns[prop.name] = head
            at = at + 1
    _check_room(at - first, per_record, 0, element, name, exact=True)
    return columns


def _check_whole(values: np.ndarray, code: str, prop: str, name: str) -> None:
    """InputError unless an integer-typed value (a list length included) is whole and in its type's range."""
    if code[0] in "iu":
        limits = np.iinfo(code)
        if not (np.array_equal(values, np.floor(values)) and (values >= limits.min).all()
                and (values <= limits.max).all()):
            raise InputError(f"{name}: ASCII PLY property {prop} is an integer type but holds a value that is"
                             " not a whole number in its range")


def _check_room(used: np.ndarray, per_record: np.ndarray, needed, element: Element, name: str,
                exact: bool = False) -> None:
    """InputError naming the first record with too few values (or, when exact, not exactly ``used``)."""
    bad = (used != per_record) if exact else (used + needed > per_record)
    if bad.any():
        record = int(np.argmax(bad))
        raise InputError(f"{name}: ASCII PLY {element.name} record {record + 1} has {int(per_record[record])}"
                         " values, not the number its header's properties call for")
