"""Whether a command fits in memory: an estimate from the counts a file declares (binary STL and PLY
headers) or holds (OBJ and ASCII STL records), checked against the memory the machine can give before
the mesh is parsed, so that a part too large is refused with one line instead of swapping the machine
or being killed.

The figures come from the peak resident memory of each command (getrusage ru_maxrss) less what it
held when the guard ran (benchmarks/memory_guard.py), on the demo housing at 24k, 97k and 386k
triangles (and 1.5M for inspect, map and grade, measured with ``/usr/bin/time -f %M``). The need grows
linearly: about 330 bytes per triangle for inspect (PLY; STL about 100 more), 460 grade, 690 report,
420 map, 1,130 segment and 3,400 transfer (two parts of that size). Each entry is its slope with a
quarter more or more, rounded up; blend was not measured and is given grade's figure twice (it grades
a merged copy of the part). Beside it a fixed amount whatever the part: 63-74 MiB for the modules
loaded after the part is read, 400 MiB for map's PNG and 520 MiB for report (off-screen rendering),
at 24k triangles. The file's own bytes are added: they are held while it is parsed.
"""

from __future__ import annotations

import os
import resource
from pathlib import Path

from surfcheck.errors import InputError
from surfcheck.io.plyheader import parse_header
from surfcheck.io.stl import HEADER_BYTES, RECORD

GIB = 2.0 ** 30
# Bytes per triangle of each command, and the bytes it needs whatever the part's size (the renderer).
PER_TRIANGLE = {"inspect": 800, "loops": 800, "grade": 750, "report": 900, "map": 750, "blend": 1500,
                "segment": 1500, "transfer": 4400}
FIXED = {"report": 600 * 2**20, "map": 450 * 2**20}  # with VTK and matplotlib off-screen rendering
LOADED_LATER = 100 * 2**20  # every other command: the modules loaded after the part is read
MEMINFO = Path("/proc/meminfo")
CGROUP, PROC_CGROUP = Path("/sys/fs/cgroup"), Path("/proc/self/cgroup")


def declared_triangles(data: bytes, suffix: str, name: str) -> int | None:
    """The triangles of a mesh file, before it is parsed: a binary STL's and a PLY's header count
    (PLY's validated against the bytes that follow), the ``f`` lines of an OBJ (a polygon counted
    as one), the facets of an ASCII STL; None for other files.

    Parameters
    ----------
    data : bytes
        The whole file.
    suffix : str
        Its extension, lower case with the dot.
    name : str
        The file's name, for messages.

    Returns
    -------
    int or None
        How many triangles (faces) the file holds.
    """
    if suffix == ".stl":
        count = int.from_bytes(data[80:84], "little") if len(data) >= HEADER_BYTES else 0
        return count if HEADER_BYTES + RECORD.itemsize * count == len(data) else data.count(b"endfacet")
    if suffix == ".ply":
        face = parse_header(data, name).element("face")
        return face.count if face else 0
    if suffix == ".obj":
        return _lines(data, b"f")
    return None


def _lines(data: bytes, tag: bytes) -> int:
    """How many lines of a text start with ``tag`` and a blank (a C-speed scan of the bytes)."""
    return sum(data.count(b"\n" + tag + blank) + data.startswith(tag + blank) for blank in (b" ", b"\t"))


def needed_memory(command: str, triangles: int, file_bytes: int) -> float:
    """Bytes a command is expected to need for a part of ``triangles`` read from ``file_bytes``."""
    return file_bytes + PER_TRIANGLE.get(command, max(PER_TRIANGLE.values())) * triangles + FIXED.get(command, LOADED_LATER)


def available_memory() -> float | None:
    """Bytes this process can still take: the machine's available memory (MemAvailable of
    /proc/meminfo, else sysconf SC_AVPHYS_PAGES), lowered to the room left under the control group's
    memory limit (cgroup v2 memory.max, v1 memory.limit_in_bytes) and under the address-space limit
    (RLIMIT_AS, ``ulimit -v``); None when the system tells nothing."""
    found = [_machine_available(), _cgroup_room(), _address_space_room()]
    known = [x for x in found if x is not None]
    return min(known) if known else None


def _machine_available() -> float | None:
    try:
        for line in MEMINFO.read_text().splitlines():
            if line.startswith("MemAvailable:"):
                return float(line.split()[1]) * 1024.0  # the kernel writes kB (proc(5))
    except (OSError, ValueError, IndexError):
        pass
    try:
        return float(os.sysconf("SC_AVPHYS_PAGES")) * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None


def _cgroup_room() -> float | None:
    """The limit minus the usage of this process's memory control group, v2 or v1 (cgroups(7))."""
    try:
        lines = PROC_CGROUP.read_text().splitlines()
    except OSError:
        return None
    for line in lines:
        number, controllers, path = (line.split(":", 2) + ["", ""])[:3]
        if number == "0" and controllers == "":
            files, folder = ("memory.max", "memory.current"), CGROUP
        elif "memory" in controllers.split(","):
            files, folder = ("memory.limit_in_bytes", "memory.usage_in_bytes"), CGROUP / "memory"
        else:
            continue
        for place in (folder / path.lstrip("/"), folder):  # inside a container the group is often the root
            try:
                limit, usage = ((place / f).read_text().strip() for f in files)
                if limit.isdigit() and usage.isdigit() and int(limit) < 2**60:  # "max" or 2^63: no limit
                    return float(int(limit) - int(usage))
                break
            except OSError:
                continue
    return None


def _address_space_room() -> float | None:
    limit = resource.getrlimit(resource.RLIMIT_AS)[0]
    if limit == resource.RLIM_INFINITY:
        return None
    try:
        status = Path("/proc/self/status").read_text().splitlines()
        size = next(float(line.split()[1]) * 1024.0 for line in status if line.startswith("VmSize:"))
    except (OSError, StopIteration, ValueError, IndexError):
        return None
    return limit - size


def check_memory(data: bytes, suffix: str, name: str, command: str) -> None:
    """InputError when the command would need more memory than the machine can give it.

    Parameters
    ----------
    data : bytes
        The whole file (read, not yet parsed).
    suffix : str
        Its extension, lower case with the dot.
    name : str
        The file's name, for the message.
    command : str
        The command that will work on the part (a PER_TRIANGLE key).
    """
    triangles = declared_triangles(data, suffix, name)
    free = available_memory()
    if triangles is None or free is None:
        return
    needed = needed_memory(command, triangles, len(data))
    if needed > free:
        raise InputError(f"{name}: a part of {triangles:,} triangles ({_size(len(data))}); `{command}` needs about"
                         f" {_size(needed)} and {_size(max(free, 0.0))} is free: decimate the mesh or crop it to"
                         " the seams that matter, or run on a machine with more memory")


def _size(count: float) -> str:
    return f"{count / GIB:.1f} GiB" if count >= GIB else f"{count / 2**20:.0f} MiB"
