"""STL, binary or ASCII (3D Systems 1989, "StereoLithography Interface Specification").

Binary: an 80-byte header, a uint32 little-endian triangle count n, then n records of 50 bytes (normal
and three corners as 12 float32, a uint16 attribute count), so the file has exactly 84 + 50 n bytes.
ASCII: ``solid NAME``, then per triangle ``facet normal nx ny nz``, ``outer loop``, three
``vertex x y z``, ``endloop``, ``endfacet``, and ``endsolid NAME``. Both are read here, vectorised,
with every record checked as it is read: a damaged file is refused, never shifted into other triangles.
"""

from __future__ import annotations

import numpy as np

from surfcheck.errors import InputError
from surfcheck.io.raw import RawMesh, single_group

HEADER_BYTES = 84
RECORD = np.dtype([("normal", "<f4", (3,)), ("corners", "<f4", (3, 3)), ("attribute", "<u2")])
# One ASCII facet as words: the keyword expected at each position; None where a number stands.
FACET_WORDS = (b"facet", b"normal", None, None, None, b"outer", b"loop",
               b"vertex", None, None, None, b"vertex", None, None, None, b"vertex", None, None, None,
               b"endloop", b"endfacet")
CORNER_WORDS = (8, 9, 10, 12, 13, 14, 16, 17, 18)


def parse_stl(data: bytes, name: str) -> RawMesh:
    """Read binary STL when the size is exactly 84 + 50 n, ASCII STL when the text says ``solid``.

    Parameters
    ----------
    data : bytes
        The whole file.
    name : str
        The file's name, for messages.

    Returns
    -------
    RawMesh
        Three corners per triangle (welding joins them later) in one group.
    """
    count = int(np.frombuffer(data, dtype="<u4", count=1, offset=80)[0]) if len(data) >= HEADER_BYTES else None
    if count is not None and HEADER_BYTES + RECORD.itemsize * count == len(data):
        records = np.frombuffer(data, dtype=RECORD, count=count, offset=HEADER_BYTES)
        return single_group(records["corners"].reshape(-1, 3).astype(np.float64))
    if _looks_ascii(data):
        return single_group(_ascii_corners(data, name))
    if count is None:
        raise InputError(f"{name}: not an STL file (too short for binary STL, and no ASCII 'solid')")
    raise InputError(
        f"{name}: truncated or padded binary STL: header says {count} triangles ="
        f" {HEADER_BYTES + RECORD.itemsize * count} bytes, file has {len(data)}"
    )


def _looks_ascii(data: bytes) -> bool:
    """Starts with ``solid`` and has no control bytes in its first kilobyte (a binary header may say
    ``solid`` too; its count and floats soon hold such bytes)."""
    head = data[:1024]
    return head.lstrip().lower().startswith(b"solid") and not any(b < 9 for b in head)


def _ascii_corners(data: bytes, name: str) -> np.ndarray:
    """(3 n, 3) corners of the ASCII facets; InputError naming the first facet that breaks the layout."""
    words = data.lower().split()
    if b"endsolid" not in words:
        raise InputError(f"{name}: ASCII STL is truncated (no 'endsolid' line)")
    end = len(words) - 1 - words[::-1].index(b"endsolid")
    start = words.index(b"facet") if b"facet" in words[:end] else end
    body = words[start:end]
    stride = len(FACET_WORDS)
    n = -(-len(body) // stride)
    if n == 0:
        raise InputError(f"{name}: ASCII STL holds no facets")
    intact = len(body) == n * stride and all(
        body[at::stride].count(word) == n for at, word in enumerate(FACET_WORDS) if word is not None)
    if not intact:
        raise InputError(f"{name}: ASCII STL facet {_first_broken_facet(body) + 1} is not 'facet normal,"
                         " outer loop, 3 vertex lines, endloop, endfacet'; the file is damaged or truncated")
    try:
        corners = np.array([body[at::stride] for at in CORNER_WORDS], dtype=np.float64)
    except ValueError:
        raise InputError(f"{name}: ASCII STL has a vertex coordinate that is not a number") from None
    return corners.T.reshape(-1, 3)


def _first_broken_facet(body: list[bytes]) -> int:
    """Index of the first facet whose words do not follow FACET_WORDS (only called on a broken file)."""
    stride = len(FACET_WORDS)
    for facet in range(-(-len(body) // stride)):
        words = body[facet * stride:(facet + 1) * stride]
        if len(words) < stride or any(w is not None and w != got for w, got in zip(FACET_WORDS, words)):
            return facet
    return 0
