"""Damaged files from a seeded mutation corpus (tests/fixtures/hostile_files.py): the reader loads a
part or raises a one-line InputError naming the file, with no warning, and leaves the file as it was;
the command line (inspect, grade, map) exits 0 or 2 with at most one line on stderr and never a
traceback, within bounded time and memory."""

from __future__ import annotations

import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from surfcheck import InputError
from surfcheck.io import load_part
from tests.fixtures.command_line import run_measured
from tests.fixtures.hostile_files import ENCODINGS, SUFFIX, hostile_files, seed_file

LIBRARY_FILES = 600  # in-process, a few seconds
COMMAND_LINE_FILES = 6  # each starts an interpreter, about two seconds


@pytest.mark.parametrize("encoding", ENCODINGS)
def test_the_seed_files_load(tmp_path, encoding):
    path = tmp_path / f"seed{SUFFIX[encoding]}"
    path.write_bytes(seed_file(encoding))
    assert load_part(path).n_faces == 80  # icosphere of one subdivision: 20 * 4 triangles


def test_mutated_files_load_or_give_one_clean_line(tmp_path):
    outcomes = {"loaded": 0, "refused": 0}
    for number, sample in enumerate(hostile_files(LIBRARY_FILES, seed=17)):
        path = tmp_path / f"{number}{sample.suffix}"
        path.write_bytes(sample.data)
        with warnings.catch_warnings():
            warnings.simplefilter("error")  # any warning (numpy's RuntimeWarning among them) fails
            try:
                part = load_part(path)
            except InputError as exc:
                message = str(exc)
                assert "\n" not in message and message.startswith(str(path)), (sample.mutation, message)
                outcomes["refused"] += 1
            else:
                assert np.isfinite(part.vertices).all() and part.n_faces > 0, sample.mutation
                outcomes["loaded"] += 1
        assert path.read_bytes() == sample.data, sample.mutation
    assert outcomes["refused"] > LIBRARY_FILES // 2 and outcomes["loaded"] > 0  # the corpus does both


def test_mutated_files_through_inspect(tmp_path):
    for number, sample in enumerate(hostile_files(COMMAND_LINE_FILES, seed=1789)):
        path = tmp_path / f"{number}{sample.suffix}"
        path.write_bytes(sample.data)
        result = subprocess.run([sys.executable, "-m", "surfcheck", "inspect", str(path)], capture_output=True,
                                text=True, timeout=120)
        assert result.returncode in (0, 2), (sample.mutation, result.stderr)
        assert result.stderr.count("\n") <= 1, (sample.mutation, result.stderr)
        assert "Traceback" not in result.stderr and "internal error" not in result.stderr, sample.mutation
        assert path.read_bytes() == sample.data, sample.mutation


LOADING_FILES, REFUSED_FILES = 3, 2  # through grade and map: mutated files the reader accepts, and refuses
PEAK_LIMIT = 2**30  # bytes of resident memory a command may take on a file under 10 MB (the bound)


def _loads(sample, folder: Path) -> bool:
    path = folder / f"probe{sample.suffix}"
    path.write_bytes(sample.data)
    try:
        load_part(path)
    except InputError:
        return False
    return True


def test_mutated_files_through_grade_and_map(tmp_path):
    # a few files of the corpus that the reader accepts (grading and mapping then run on damaged but
    # readable geometry) and a few it refuses: exit 0 or 2, at most one line on stderr and never a
    # traceback, the input unchanged, map's output complete or absent, bounded time and memory
    wanted = {True: LOADING_FILES, False: REFUSED_FILES}
    chosen = []
    for sample in hostile_files(400, seed=2024):
        loads = _loads(sample, tmp_path)
        if wanted[loads]:
            wanted[loads] -= 1
            chosen.append(sample)
        if not any(wanted.values()):
            break
    assert len(chosen) == LOADING_FILES + REFUSED_FILES
    for number, sample in enumerate(chosen):
        path = tmp_path / f"{number}{sample.suffix}"
        path.write_bytes(sample.data)
        field = tmp_path / f"{number}-jump.ply"
        for args in (["grade", str(path), "--seam", "all"], ["map", str(path), "--quantity", "jump", "--out", str(field)]):
            code, err, peak = run_measured(args, tmp_path)
            what = (sample.mutation, args[0], err)
            assert code in (0, 2), what
            assert err.count("\n") <= 1 and "Traceback" not in err and "internal error" not in err, what
            assert peak < PEAK_LIMIT, (what, peak)
            assert path.read_bytes() == sample.data, what
        if code == 0:
            assert load_part(field).n_vertices > 0, sample.mutation
        else:
            assert not field.exists(), sample.mutation
        assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(f".{number}-")) == []  # no temporary left
