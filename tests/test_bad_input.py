"""Bad input: a one-line error on stderr, exit code 2, no traceback, the file unchanged."""

from __future__ import annotations

import hashlib
import os
import struct
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest
import trimesh
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from surfcheck import InputError
from surfcheck.io import load_part, read_part
from tests.fixtures.command_line import run_main


def run_cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "surfcheck", *args], capture_output=True, text=True, timeout=120)


def digest(path: Path) -> str | None:
    return hashlib.sha256(path.read_bytes()).hexdigest() if path.is_file() else None


def _cube_stl_bytes() -> bytes:
    box = trimesh.creation.box()
    return trimesh.exchange.stl.export_stl(box)


def _bad_files(tmp: Path) -> dict[str, Path]:
    files = {}
    files["empty"] = tmp / "empty.stl"
    files["empty"].write_bytes(b"")
    stl = _cube_stl_bytes()
    files["truncated"] = tmp / "truncated.stl"
    files["truncated"].write_bytes(stl[: len(stl) - 37])  # binary STL: 84 + 50 n bytes, now short
    files["garbage"] = tmp / "garbage.stl"
    files["garbage"].write_bytes(np.random.default_rng(1).integers(0, 256, 3000, dtype=np.uint8).tobytes())
    files["huge_ply"] = tmp / "huge.ply"
    files["huge_ply"].write_bytes(
        b"ply\nformat binary_little_endian 1.0\nelement vertex 3\nproperty float x\nproperty float y\n"
        b"property float z\nelement face 1000000000000\nproperty list uchar int vertex_indices\nend_header\n"
        + struct.pack("<9f", 0, 0, 0, 1, 0, 0, 0, 1, 0))
    files["nan"] = tmp / "nan.obj"
    files["nan"].write_text("v 0 0 0\nv nan 0 0\nv 0 1 0\nf 1 2 3\n")
    files["non_manifold"] = tmp / "fin.obj"
    files["non_manifold"].write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nv 0 -1 0\nv 0 0 1\nf 1 2 3\nf 2 1 4\nf 1 2 5\n")
    files["no_faces"] = tmp / "points.obj"
    files["no_faces"].write_text("v 0 0 0\nv 1 0 0\n")
    files["unknown_ext"] = tmp / "part.step"
    files["unknown_ext"].write_text("ISO-10303-21;\n")
    files["folder"] = tmp / "a_folder.stl"
    files["folder"].mkdir()
    files["missing"] = tmp / "does_not_exist.obj"
    return files


BAD = ["empty", "truncated", "garbage", "huge_ply", "nan", "non_manifold", "no_faces", "unknown_ext",
       "folder", "missing"]


SAMPLE = Path(__file__).resolve().parents[1] / "sample_meshes" / "housing.obj"
# Every command that reads a part; {p} is the bad file, {o} an output path.
COMMANDS = {
    "inspect": ["inspect", "{p}"],
    "loops": ["loops", "{p}"],
    "grade": ["grade", "{p}", "--seam", "all"],
    "map": ["map", "{p}", "--out", "{o}.csv"],
    "report": ["report", "{p}", "--seam", "all", "--out", "{o}"],
    "blend": ["blend", "{p}", "--from", "chain-1.1", "--to", "chain-1.2", "--order", "2"],
    "segment": ["segment", "{p}", "--out", "{o}.obj"],
    "transfer": ["transfer", str(SAMPLE), "{p}", "--out", "{o}.obj"],
}
FULL = ("inspect", "loops")  # every bad file; the other commands share the loader, so a sample of them
SOME = ["garbage", "nan", "non_manifold", "folder", "missing"]


@pytest.mark.parametrize("command", list(COMMANDS))
def test_bad_inputs_exit_2_with_one_line(tmp_path, command):
    files = _bad_files(tmp_path)
    for key in BAD if command in FULL else SOME:
        path = files[key]
        before = digest(path)
        args = [a.format(p=path, o=tmp_path / "out") for a in COMMANDS[command]]
        result = run_cli(*args)
        assert result.returncode == 2, (key, result.stderr)
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("error: "), (key, result.stderr)
        assert "Traceback" not in result.stderr + result.stdout
        assert str(path) in lines[0], key
        assert digest(path) == before, key


def test_huge_ply_header_fails_fast_without_allocating(tmp_path):
    path = _bad_files(tmp_path)["huge_ply"]
    with pytest.raises(InputError, match="truncated or corrupt"):
        load_part(path)


def test_unknown_option_is_a_usage_error():
    assert run_cli("inspect", "--no-such-option", "x.stl").returncode == 2


@pytest.mark.parametrize("args, message", [
    (["grade", str(SAMPLE), "--seam", "top:no-such-group"], "no group named 'no-such-group'"),
    (["grade", str(SAMPLE), "--seam", "flange:top"], "do not meet"),
    (["grade", str(SAMPLE), "--seam", "loop-1"], "not a seam"),
    (["grade", str(SAMPLE), "--seam", "all", "--require", "G7"], "--require"),
    (["grade", str(SAMPLE), "--seam", "all", "--tolerance", "lenient"], "unknown tolerance profile"),
    (["blend", str(SAMPLE), "--from", "chain-1.1", "--to", "chain-1.1", "--order", "2"], "same"),
    (["blend", str(SAMPLE), "--from", "chain-1.1", "--to", "chain-1.2", "--order", "4"], "order"),
    (["blend", str(SAMPLE), "--from", "seam-1", "--to", "chain-1.2", "--order", "2"], "not a boundary chain"),
    (["map", str(SAMPLE), "--quantity", "torsion", "--out", "x.png"], "unknown quantity"),
])
def test_bad_requests_on_a_good_part_exit_2(args, message):
    before = digest(SAMPLE)
    result = run_cli(*args)
    assert result.returncode == 2, result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and message in lines[0], result.stderr
    assert digest(SAMPLE) == before


@pytest.mark.parametrize("command", ["", *COMMANDS, "demo"])
def test_every_command_has_help(command):
    result = run_cli(*([command] if command else []), "--help")
    assert result.returncode == 0 and "Usage" in result.stdout


_SEEDS = {
    "obj": b"v 0 0 0\nv 1 0 0\nv 1 1 0\nv 0 1 0\ng a\nf 1 2 3\ng b\nf 1 3 4\n",
    "stl": None,  # filled lazily (binary STL of a cube)
    "ply": b"ply\nformat ascii 1.0\nelement vertex 3\nproperty float x\nproperty float y\nproperty float z\n"
           b"element face 1\nproperty list uchar int vertex_indices\nproperty int group\nend_header\n"
           b"0 0 0\n1 0 0\n0 1 0\n3 0 1 2 4\n",
}


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(kind=st.sampled_from(["obj", "stl", "ply"]), data=st.data())
def test_fuzzed_files_load_or_raise_input_error(tmp_path, kind, data):
    seed = _SEEDS[kind] if _SEEDS[kind] is not None else _cube_stl_bytes()
    blob = bytearray(seed)
    for _ in range(data.draw(st.integers(1, 8))):
        action = data.draw(st.sampled_from(["flip", "cut", "insert"]))
        at = data.draw(st.integers(0, max(len(blob) - 1, 0)))
        if action == "flip" and blob:
            blob[at] = data.draw(st.integers(0, 255))
        elif action == "cut":
            del blob[at:at + data.draw(st.integers(1, 64))]
        else:
            blob[at:at] = data.draw(st.binary(min_size=1, max_size=16))
    path = tmp_path / f"fuzz.{kind}"
    path.write_bytes(bytes(blob))
    try:
        part = load_part(path)
    except InputError as exc:
        assert "\n" not in str(exc)
    else:
        assert np.isfinite(part.vertices).all() and part.n_faces > 0


def test_a_field_without_values_is_said_not_crashed(tmp_path):
    # a tetrahedron (4 vertices) leaves no vertex enough neighbours for a one-sided jump fit: the map
    # is written (all NaN) and the command says so instead of failing on an empty percentile
    part = tmp_path / "tet.obj"
    part.write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nv 0 0 1\nf 1 3 2\nf 1 2 4\nf 2 3 4\nf 1 4 3\n")
    result = run_cli("map", str(part), "--quantity", "jump", "--out", str(tmp_path / "tet.csv"))
    assert result.returncode == 0, result.stderr
    assert "no vertex has a value" in result.stdout
    assert (tmp_path / "tet.csv").exists()


@pytest.mark.parametrize("coordinate, message", [
    ("nan", "NaN or infinite"), ("inf", "NaN or infinite"), ("-1e400", "NaN or infinite"),
    ("1e308", "beyond 1e\\+12 file units"), ("2e12", "beyond 1e\\+12 file units"),
])
@pytest.mark.parametrize("kind", ["obj", "stl", "ply"])
def test_absurd_coordinates_give_one_clean_line_without_warnings(tmp_path, kind, coordinate, message):
    # The coordinate limit 1e12 is common practice, no published source.
    corners = [("0", "0", "0"), (coordinate, "0", "0"), ("0", "1", "0")]
    if kind == "obj":
        text = "".join(f"v {x} {y} {z}\n" for x, y, z in corners) + "f 1 2 3\n"
    elif kind == "stl":
        text = ("solid s\nfacet normal 0 0 1\nouter loop\n" + "".join(f"vertex {x} {y} {z}\n" for x, y, z in corners)
                + "endloop\nendfacet\nendsolid s\n")
    else:
        text = ("ply\nformat ascii 1.0\nelement vertex 3\nproperty double x\nproperty double y\nproperty double z\n"
                "element face 1\nproperty list uchar int vertex_indices\nend_header\n"
                + "".join(f"{x} {y} {z}\n" for x, y, z in corners) + "3 0 1 2\n")
    path = tmp_path / f"far.{kind}"
    path.write_text(text)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a numpy RuntimeWarning would fail here
        with pytest.raises(InputError, match=message):
            load_part(path)
    if coordinate != "1e308":
        return  # the command line once per format (it takes seconds to start)
    result = run_cli("inspect", str(path))
    assert result.returncode == 2
    assert result.stderr.count("\n") == 1 and str(path) in result.stderr and message.split()[0].strip("\\") in result.stderr
    assert "Warning" not in result.stderr and "internal error" not in result.stderr


def test_a_far_stray_vertex_does_not_widen_the_weld(tmp_path):
    # Two unit squares 1e-3 apart (not the same edge) and one stray corner at 1e12: a tolerance from the
    # bounding box (1e-7 of 1.7e12) would merge the squares' near corners; the median edge's does not.
    text = ("v 0 0 0\nv 1 0 0\nv 1 1 0\nv 0 1 0\nv 1.001 0 0\nv 2 0 0\nv 2 1 0\nv 1.001 1 0\n"
            "v 1e12 -1e12 1e12\nf 1 2 3\nf 1 3 4\nf 5 6 7\nf 5 7 8\nf 6 9 7\n")
    (tmp_path / "stray.obj").write_text(text)
    loaded = read_part(tmp_path / "stray.obj")
    assert loaded.merged_vertices == 0 and loaded.part.n_vertices == 9
    assert loaded.warnings == []  # nor does it make the squares' triangles look like zero-area ones
    assert loaded.part.face_components.max() == 1  # two components: the squares stay apart


def test_a_fifo_is_refused_without_opening_it(tmp_path):
    fifo = tmp_path / "pipe.stl"
    os.mkfifo(fifo)  # opening it for read would block forever with no writer
    with pytest.raises(InputError, match="not a regular file"):
        load_part(fifo)
    result = run_cli("inspect", str(fifo))
    assert result.returncode == 2 and "not a regular file" in result.stderr


def test_a_device_is_refused(tmp_path):
    with pytest.raises(InputError, match="not a regular file"):
        load_part("/dev/zero")  # reading it would never end


# Each command with an output path, {i} the input part, {o} the output path that turns out to be it.
OUTPUTS = {
    "map": ["map", "{i}", "--out", "{o}"],
    "blend --out": ["blend", "{i}", "--from", "chain-1.1", "--to", "chain-1.2", "--order", "2", "--out", "{o}"],
    "blend --merged": ["blend", "{i}", "--from", "chain-1.1", "--to", "chain-1.2", "--order", "2", "--merged", "{o}"],
    "segment": ["segment", "{i}", "--out", "{o}"],
    "transfer scan": ["transfer", str(SAMPLE), "{i}", "--out", "{o}"],
    "transfer nominal": ["transfer", "{i}", str(SAMPLE), "--out", "{o}"],
    "report": ["report", "{i}", "--seam", "all", "--out", "{o}"],
    "grade --report": ["grade", "{i}", "--seam", "all", "--report", "{o}"],
}


@pytest.mark.parametrize("how", ["same name", "symlink", "hard link", "dotted path"])
@pytest.mark.parametrize("command", list(OUTPUTS))
def test_an_output_that_is_an_input_is_refused_and_the_input_kept(tmp_path, monkeypatch, capsys, command, how):
    source = tmp_path / "part.ply"
    source.write_bytes((SAMPLE.parent / "housing.ply").read_bytes())
    before = digest(source)
    output = {"same name": source, "symlink": tmp_path / "link.ply", "hard link": tmp_path / "hard.ply",
              "dotted path": tmp_path / "sub" / ".." / "part.ply"}[how]
    (tmp_path / "sub").mkdir()
    if how == "symlink":
        output.symlink_to(source)
    elif how == "hard link":
        os.link(source, output)
    code, err = run_main(monkeypatch, capsys, *[a.format(i=source, o=output) for a in OUTPUTS[command]])
    assert code == 2 and err.count("\n") == 1 and err.startswith("error: "), err
    assert "is the input" in err, err
    assert digest(source) == before


def test_ctrl_c_while_starting_gives_one_line_and_exit_130():
    # 130 = 128 + SIGINT (2): the exit status shells give a command ended by Ctrl-C (POSIX shell convention).
    import signal
    import time

    process = subprocess.Popen([sys.executable, "-m", "surfcheck", "inspect", str(SAMPLE)], stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True)
    time.sleep(0.5)  # the entry point has set its handler; the command line's imports take longer
    process.send_signal(signal.SIGINT)
    _, err = process.communicate(timeout=60)
    assert process.returncode == 130 and err == "error: interrupted\n"


def test_numba_cache_falls_back_to_a_temporary_folder(tmp_path, monkeypatch):
    import numba

    from surfcheck.geometry import kernelcache

    blocked = tmp_path / "a-file"
    blocked.write_text("")  # nothing can be made below a file, even by root
    monkeypatch.setenv("NUMBA_CACHE_DIR", "")  # unset for numba, and restored after the test
    monkeypatch.setattr(numba.config, "CACHE_DIR", "")
    monkeypatch.setenv("XDG_CACHE_HOME", str(blocked / "cache"))  # numba's user-wide cache folder
    monkeypatch.setenv("HOME", str(blocked))
    monkeypatch.setattr(kernelcache.tempfile, "tempdir", str(tmp_path / "tmp"))
    folder = kernelcache.use_writable_cache(blocked / "package")
    assert folder is not None and folder.parent == tmp_path / "tmp" and folder.is_dir()
    assert os.environ["NUMBA_CACHE_DIR"] == str(folder) == numba.config.CACHE_DIR


def test_numba_cache_is_left_alone_when_the_package_folder_is_writable(tmp_path, monkeypatch):
    import numba

    from surfcheck.geometry import kernelcache

    monkeypatch.setenv("NUMBA_CACHE_DIR", "")  # unset for numba, and restored after the test
    monkeypatch.setattr(numba.config, "CACHE_DIR", "")
    assert kernelcache.use_writable_cache(tmp_path) is None and os.environ["NUMBA_CACHE_DIR"] == ""
