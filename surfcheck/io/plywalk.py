"""Binary PLY records whose lists differ in length (triangles mixed with quads and n-gons): where each
record and each property starts, found by one compiled pass over the records (a record starts where
the one before it ends, so no array operation can find it), then read as numpy views."""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

import surfcheck.geometry  # noqa: F401  (numba's cache folder is chosen there, before this kernel is defined)
from surfcheck.errors import InputError
from surfcheck.io.plyheader import Element


@dataclass(frozen=True)
class Lists:
    """The values of a list property: each record's list length and all items, record after record."""

    sizes: np.ndarray
    items: np.ndarray


@numba.njit(cache=True)
def property_starts(buffer, start, count, sizes, count_sizes, big_endian):
    """(count, p) byte position of each property of each record, (count, p) list lengths (0 for a
    scalar) and the end of the last record; end -1 when the records run past the buffer.

    ``sizes[j]`` is property j's size (a list's item size), ``count_sizes[j]`` the size of its
    length field (0 for a scalar); lengths are read as unsigned integers in the given byte order."""
    p = len(sizes)
    starts = np.zeros((count, p), dtype=np.int64)
    lengths = np.zeros((count, p), dtype=np.int64)
    at = start
    for record in range(count):
        for j in range(p):
            starts[record, j] = at
            if count_sizes[j] == 0:
                at += sizes[j]
            else:
                if at + count_sizes[j] > len(buffer):
                    return starts, lengths, -1
                value = 0
                for k in range(count_sizes[j]):
                    byte = buffer[at + (count_sizes[j] - 1 - k if big_endian else k)]
                    value += np.int64(byte) << (8 * k)
                lengths[record, j] = value
                at += count_sizes[j] + value * sizes[j]
            if at > len(buffer):
                return starts, lengths, -1
    return starts, lengths, at


def walk_records(data: bytes, offset: int, element: Element, order: str, name: str):
    """The columns of ``element`` (scalars as arrays, lists as Lists) and where its records end."""
    buffer = np.frombuffer(data, dtype=np.uint8)
    sizes = np.array([np.dtype(p.code).itemsize for p in element.properties], dtype=np.int64)
    count_sizes = np.array([np.dtype(p.count_code).itemsize if p.is_list else 0 for p in element.properties],
                           dtype=np.int64)
    starts, lengths, end = property_starts(buffer, offset, element.count, sizes, count_sizes, order == ">")
    if end < 0:
        raise InputError(f"{name}: binary PLY is truncated inside element {element.name}")
    columns = {}
    for j, prop in enumerate(element.properties):
        dtype = np.dtype(order + prop.code)
        if prop.is_list:
            first = starts[:, j] + count_sizes[j]
            n = lengths[:, j]
            item = np.arange(int(n.sum())) - np.repeat(np.cumsum(n) - n, n)
            at = np.repeat(first, n) + item * sizes[j]
            columns[prop.name] = Lists(n, _gather(buffer, at, dtype).astype(np.float64))
        else:
            columns[prop.name] = _gather(buffer, starts[:, j], dtype)
    return columns, int(end)


def _gather(buffer: np.ndarray, at: np.ndarray, dtype: np.dtype) -> np.ndarray:
    """The values of ``dtype`` whose bytes start at positions ``at``."""
    raw = buffer[at[:, None] + np.arange(dtype.itemsize)]
    return np.ascontiguousarray(raw).view(dtype).reshape(-1)
