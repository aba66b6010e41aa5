"""The PLY header (Turk, "The PLY Polygon File Format"): its grammar and the sizes it implies.

A header is the line ``ply``, a ``format ascii|binary_little_endian|binary_big_endian 1.0`` line,
``element NAME COUNT`` lines each followed by its ``property TYPE NAME`` or
``property list COUNT_TYPE ITEM_TYPE NAME`` lines, and the line ``end_header``; ``comment`` and
``obj_info`` lines may stand anywhere (a line ``comment end_header`` is a comment, not the end).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from surfcheck.errors import InputError

TYPES = {"char": "i1", "int8": "i1", "uchar": "u1", "uint8": "u1", "short": "i2", "int16": "i2",
         "ushort": "u2", "uint16": "u2", "int": "i4", "int32": "i4", "uint": "u4", "uint32": "u4",
         "float": "f4", "float32": "f4", "double": "f8", "float64": "f8"}
FORMATS = {"ascii": "", "binary_little_endian": "<", "binary_big_endian": ">"}
END = re.compile(rb"(?:^|\n)end_header[ \t\r]*\n")


@dataclass(frozen=True)
class Property:
    """One property: its name, its numpy type code and, for a list, the type code of the count."""

    name: str
    code: str
    count_code: str | None = None

    @property
    def is_list(self) -> bool:
        return self.count_code is not None

    @property
    def integral(self) -> bool:
        return self.code[0] in "iu"


@dataclass(frozen=True)
class Element:
    """One element: its name, how many records the header claims and their properties."""

    name: str
    count: int
    properties: tuple[Property, ...]

    def least_bytes(self, binary: bool) -> int:
        """The fewest bytes its records can take: binary, each scalar and list count at its size (an
        empty list); ASCII, one character and a separator a value."""
        if binary:
            return self.count * sum(np.dtype(p.count_code or p.code).itemsize for p in self.properties)
        return self.count * 2 * len(self.properties)


@dataclass(frozen=True)
class Header:
    """A parsed PLY header: the byte order ('' for ASCII), the elements, the comments, where data starts."""

    byte_order: str
    elements: tuple[Element, ...]
    comments: tuple[str, ...]
    body_start: int

    @property
    def binary(self) -> bool:
        return self.byte_order != ""

    def element(self, name: str) -> Element | None:
        return next((e for e in self.elements if e.name == name), None)


def parse_header(data: bytes, name: str) -> Header:
    """The header of a PLY file, refused unless it follows the grammar and its element counts fit
    in the bytes that follow it (checked before anything is allocated for them)."""
    end = END.search(data)
    if not data.startswith(b"ply") or end is None:
        raise InputError(f"{name}: not a PLY file (no 'ply' first line or no 'end_header' line)")
    lines = data[:end.start()].decode("latin-1").splitlines()
    if lines[0].strip() != "ply":
        raise InputError(f"{name}: not a PLY file (the first line is not 'ply')")
    byte_order = None
    elements: list[tuple[str, int, list[Property]]] = []
    comments = []
    for number, line in enumerate(lines[1:], start=2):
        words = line.split()
        keyword = words[0] if words else ""
        if keyword in ("comment", "obj_info"):
            comments.append(line.strip()[len(keyword):].strip())
        elif keyword == "format" and len(words) == 3 and words[1] in FORMATS and byte_order is None:
            byte_order = FORMATS[words[1]]
        elif keyword == "element" and len(words) == 3 and words[2].isdigit():
            if any(words[1] == e[0] for e in elements):
                raise InputError(f"{name}: PLY header line {number} declares element {words[1][:40]!r} a second time")
            elements.append((words[1], int(words[2]), []))
        elif keyword == "property" and elements:
            elements[-1][2].append(_property(words, name, number))
        else:
            raise InputError(f"{name}: PLY header line {number} ({line.strip()[:40]!r}) is not a format,"
                             " element, property, comment or obj_info line")
    if byte_order is None:
        raise InputError(f"{name}: PLY header has no 'format ascii|binary_little_endian|binary_big_endian' line")
    header = Header(byte_order, tuple(Element(n, c, tuple(p)) for n, c, p in elements), tuple(comments),
                    end.end())
    least = sum(e.least_bytes(header.binary) for e in header.elements)
    if least > len(data) - header.body_start:
        claims = ", ".join(f"{e.count} {e.name}" for e in header.elements)
        raise InputError(f"{name}: PLY header claims {claims}, at least {least} bytes, but the data is only"
                         f" {len(data) - header.body_start} bytes; the file is truncated or corrupt")
    return header


def _property(words: list[str], name: str, number: int) -> Property:
    if len(words) == 3 and words[1] in TYPES:
        return Property(words[2], TYPES[words[1]])
    if len(words) == 5 and words[1] == "list" and words[2] in TYPES and words[3] in TYPES:
        if TYPES[words[2]][0] not in "iu":
            raise InputError(f"{name}: PLY header line {number}: a list count must be an integer type")
        return Property(words[4], TYPES[words[3]], TYPES[words[2]])
    raise InputError(f"{name}: PLY header line {number} ({' '.join(words)[:40]!r}) is not"
                     " 'property TYPE NAME' or 'property list COUNT_TYPE ITEM_TYPE NAME'")
