"""The memory guard (io.memory): the triangle counts it reads before parsing are the counts written
(truth by construction), the memory it sees free is bounded by the machine's physical memory
(sysconf SC_PHYS_PAGES, POSIX) and by a control group's limit, and a part too large for the memory
left is refused with one line naming its size and what to do, before its mesh is parsed."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest
import trimesh

import surfcheck.io.memory as memory
from surfcheck.io import save_part
from tests.fixtures.blend_parts import blend_part
from tests.fixtures.command_line import run_main


@pytest.fixture(scope="module")
def part():
    return blend_part("fillet")


@pytest.mark.parametrize("suffix", [".ply", ".obj", ".stl", "ascii.stl"])
def test_the_counts_read_before_parsing_are_the_ones_written(part, tmp_path, suffix):
    path = tmp_path / f"part{suffix}"
    if suffix == "ascii.stl":  # written by trimesh's ASCII STL exporter, not by surfcheck
        path.write_text(trimesh.exchange.stl.export_stl_ascii(trimesh.Trimesh(part.vertices, part.faces, process=False)))
    else:
        save_part(part, path)
    assert memory.declared_triangles(path.read_bytes(), path.suffix, str(path)) == part.n_faces == 2928


def test_the_memory_seen_free_is_at_most_the_physical_memory():
    free = memory.available_memory()
    assert free is not None and 0 < free <= os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")


@pytest.mark.parametrize("version", ["v2", "v1"])
def test_a_control_groups_limit_bounds_the_memory_seen_free(tmp_path, monkeypatch, version):
    # cgroups(7): v2 lists "0::PATH" and keeps memory.max and memory.current; v1 lists
    # "N:memory:PATH" and keeps memory.limit_in_bytes and memory.usage_in_bytes under memory/
    group = tmp_path / ("" if version == "v2" else "memory") / "batch"
    group.mkdir(parents=True)
    limit, usage = ("memory.max", "memory.current") if version == "v2" else ("memory.limit_in_bytes", "memory.usage_in_bytes")
    (group / limit).write_text("1000000000\n")
    (group / usage).write_text("400000000\n")
    (tmp_path / "self-cgroup").write_text("0::/batch\n" if version == "v2" else "7:cpu:/\n4:memory:/batch\n")
    monkeypatch.setattr(memory, "CGROUP", tmp_path)
    monkeypatch.setattr(memory, "PROC_CGROUP", tmp_path / "self-cgroup")
    assert memory.available_memory() == 600000000.0  # the 1 GB limit less the 0.4 GB in use


def test_an_address_space_limit_bounds_the_memory_seen_free():
    # ulimit -v (RLIMIT_AS, setrlimit(2)) of 6 GiB: what is left is that less the process's own size
    code = ("import resource; resource.setrlimit(resource.RLIMIT_AS, (6 * 2**30, 6 * 2**30));"
            "import surfcheck.io.memory as m; print(m.available_memory())")
    free = float(subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout)
    assert 0 < free < 6 * 2**30


@pytest.mark.parametrize("command", [["inspect"], ["grade", "--seam", "all"], ["map", "--out", "{out}/mean.png"]])
def test_a_part_too_large_for_the_memory_left_is_refused_before_parsing(part, tmp_path, monkeypatch, capsys, command):
    path = tmp_path / "fillet.ply"
    save_part(part, path)
    monkeypatch.setattr(memory, "available_memory", lambda: 2.0 * 2**20)  # 2 MiB left

    def never(*args):
        raise AssertionError("the mesh was parsed")

    monkeypatch.setattr("surfcheck.io.reading.parse_ply", never)
    args = [a.format(out=tmp_path) for a in command]
    code, err = run_main(monkeypatch, capsys, args[0], str(path), *args[1:])
    assert code == 2 and err.count("\n") == 1, err
    assert err.startswith(f"error: {path}: a part of 2,928 triangles (") and f"`{args[0]}` needs about" in err
    assert "decimate" in err and "crop" in err and "more memory" in err
    assert not (tmp_path / "mean.png").exists()


def test_a_part_that_fits_is_read(part, tmp_path, monkeypatch, capsys):
    path = tmp_path / "fillet.ply"
    save_part(part, path)
    needed = memory.needed_memory("inspect", part.n_faces, path.stat().st_size)
    monkeypatch.setattr(memory, "available_memory", lambda: 1.01 * needed)
    code, err = run_main(monkeypatch, capsys, "inspect", str(path))
    assert code is None or code == 0, err
    monkeypatch.setattr(memory, "available_memory", lambda: 0.99 * needed)
    code, err = run_main(monkeypatch, capsys, "inspect", str(path))
    assert code == 2, err
