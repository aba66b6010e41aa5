"""Faults while writing outputs: a review folder is one run's complete folder or the one before it
after SIGKILL at any moment and with two runs into one folder; a read-only folder or a full disk is
one line on stderr and exit 2, with nothing half-written left behind.

The part is the small circular fillet of the blend fixtures (1,550 vertices, two seams), graded at
three stations, so that a `report` run takes a few seconds.
"""

from __future__ import annotations

import errno
import hashlib
import os
import random
import signal
import subprocess
import time
from contextlib import contextmanager
from pathlib import Path

import pytest

from surfcheck.errors import InputError
from surfcheck.io import save_part
from surfcheck.io.folders import ASIDE, STAGING, replaced_folder
from surfcheck.review.folder import OWN_FILES
from tests.fixtures.blend_parts import blend_part
from tests.fixtures.command_line import command, run_cli, run_main
from tests.fixtures.review_folders import assert_complete, leftovers, seams_of, snapshot

REPORT = ("--stations", "3")
KILLS = 4  # SIGKILLs of one report run, at fixed pseudo-random moments
WRITE_PHASE = 7.5  # seconds from the staging folder's appearance past the swap (measured: 6.9 s on 2 cores)


@pytest.fixture(scope="module")
def part(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("part") / "fillet.obj"
    save_part(blend_part("fillet"), path)
    return path


def test_sigkill_of_report_leaves_the_old_or_the_new_folder_and_the_next_run_cleans_up(part, tmp_path):
    out = tmp_path / "review"
    old = run_cli("report", str(part), "--seam", "seam-1", *REPORT, "--out", str(out))
    assert old.returncode in (0, 1), old.stderr
    before = snapshot(out)
    draws = random.Random(1789)
    moments = [("start", draws.uniform(0.3, 1.5))] + [("staging", draws.uniform(0.0, WRITE_PHASE)) for _ in range(KILLS - 1)]
    states, killed_while_staging = [], 0
    for after, delay in moments:
        process = subprocess.Popen(command("report", str(part), "--seam", "all", *REPORT, "--out", str(out)),
                                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        while after == "staging" and not leftovers(out) and process.poll() is None:
            time.sleep(0.005)
        time.sleep(delay)
        killed_while_staging += bool(leftovers(out)) and process.poll() is None
        process.send_signal(signal.SIGKILL)
        process.wait(timeout=60)
        if snapshot(out) == before:
            states.append("old")
        else:
            assert_complete(out, ["seam-1", "seam-2"])  # anything but the old folder is the new one, whole
            states.append("new")
    assert killed_while_staging >= 1, (moments, states)  # the kills did hit the writing of the folder
    again = run_cli("report", str(part), "--seam", "all", *REPORT, "--out", str(out))
    assert again.returncode in (0, 1), again.stderr
    assert_complete(out, ["seam-1", "seam-2"])
    assert leftovers(out) == []


def test_two_reports_into_one_folder_give_one_runs_folder(part, tmp_path):
    out = tmp_path / "review"
    runs = [subprocess.Popen(command("report", str(part), "--seam", seam, *REPORT, "--out", str(out)),
                             stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
            for seam in ("seam-1", "seam-2")]
    for process in runs:
        _, err = process.communicate(timeout=300)
        assert process.returncode in (0, 1), err
    seams = seams_of(out)
    assert seams in (["seam-1"], ["seam-2"])
    assert_complete(out, seams)  # its pictures are its own run's, none of the other's
    assert leftovers(out) == []


@contextmanager
def read_only_folder(base: Path):
    """A folder the commands cannot write: mode 0555 for an ordinary user; for root, whom file modes
    do not stop, a read-only tmpfs mounted there (skipped where root may not mount)."""
    folder = base / "locked"
    folder.mkdir()
    if os.geteuid() != 0:
        folder.chmod(0o555)
        try:
            yield folder
        finally:
            folder.chmod(0o755)
        return
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "ro,size=64k", "tmpfs", str(folder)], capture_output=True).returncode:
        pytest.skip("running as root without the right to mount a read-only file system")
    try:
        yield folder
    finally:
        subprocess.run(["umount", str(folder)], check=True)


@pytest.mark.skipif(not hasattr(os, "geteuid"), reason="POSIX file modes")
@pytest.mark.parametrize("args", [("report", "{part}", "--seam", "all", "--out", "{out}/review"),
                                  ("map", "{part}", "--out", "{out}/jump.png"),
                                  ("segment", "{part}", "--out", "{out}/labelled.obj")], ids=["report", "map", "segment"])
def test_a_read_only_output_folder_is_one_line_and_exit_2(part, tmp_path, args):
    with read_only_folder(tmp_path) as locked:
        run = run_cli(*[a.format(part=part, out=locked) for a in args])
        assert run.returncode == 2, run.stderr
        assert run.stderr.startswith(f"error: cannot write {locked}/") and run.stderr.count("\n") == 1, run.stderr
        assert run.stderr.endswith((": Permission denied; choose another folder\n",
                                    ": Read-only file system; choose another folder\n")), run.stderr
        assert list(locked.iterdir()) == []


def _full_disk(monkeypatch) -> None:
    """os.write fails as on a full disk (ENOSPC), for every file."""
    def no_space(fd, data):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "write", no_space)


@pytest.mark.parametrize("name", ["jump.png", "jump.ply", "labelled.obj"])
def test_a_full_disk_is_one_line_and_exit_2_and_leaves_nothing(part, tmp_path, monkeypatch, capsys, name):
    out = tmp_path / "out"
    out.mkdir()
    args = ["segment", str(part), "--out", str(out / name)] if name.endswith(".obj") else ["map", str(part), "--out", str(out / name)]
    _full_disk(monkeypatch)
    code, err = run_main(monkeypatch, capsys, *args)
    assert code == 2  # map --out x.png on a full disk must not exit 0
    assert err == f"error: cannot write {out / name}: No space left on device; free some space or choose another folder\n"
    assert list(out.iterdir()) == []  # no output and no temporary file


def test_a_full_disk_keeps_the_old_review_folder(part, tmp_path, monkeypatch, capsys):
    out = tmp_path / "review"
    code, _ = run_main(monkeypatch, capsys, "report", str(part), "--seam", "seam-1", *REPORT, "--out", str(out))
    assert code in (0, 1)
    before = snapshot(out)
    _full_disk(monkeypatch)
    code, err = run_main(monkeypatch, capsys, "report", str(part), "--seam", "all", *REPORT, "--out", str(out))
    assert code == 2 and err.count("\n") == 1
    assert err.startswith(f"error: cannot write {out}: No space left on device")
    assert snapshot(out) == before and leftovers(out) == []


def test_a_folder_with_other_files_is_not_replaced(part, tmp_path, monkeypatch, capsys):
    out = tmp_path / "work"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    (out / "index.html").write_text("<html></html>")
    code, err = run_main(monkeypatch, capsys, "report", str(part), "--seam", "all", *REPORT, "--out", str(out))
    assert code == 2 and err.count("\n") == 1 and "'notes.txt'" in err, err
    assert snapshot(out) == {"index.html": hashlib.sha256(b"<html></html>").hexdigest(),
                             "notes.txt": hashlib.sha256(b"keep me").hexdigest()}


def _write(folder: Path, files: dict[str, str]) -> None:
    with replaced_folder(folder, OWN_FILES) as staging:
        for name, text in files.items():
            (staging / name).write_text(text)


@pytest.mark.parametrize("exchange", [True, False], ids=["renameat2 exchange", "rename aside"])
def test_a_folder_is_replaced_whole_with_and_without_an_exchange(tmp_path, monkeypatch, exchange):
    if not exchange:
        monkeypatch.setattr("surfcheck.io.folders.exchange", lambda a, b: False)
    folder = tmp_path / "review"
    _write(folder, {"index.html": "old", "a.png": "old"})
    _write(folder, {"index.html": "new", "b.png": "new"})
    assert {p.name: p.read_text() for p in folder.iterdir()} == {"index.html": "new", "b.png": "new"}
    assert leftovers(folder) == []
    with pytest.raises(RuntimeError):  # a failing writer leaves the folder as it was, and no staging folder
        with replaced_folder(folder, OWN_FILES) as staging:
            (staging / "index.html").write_text("half")
            raise RuntimeError("stop")
    assert {p.name: p.read_text() for p in folder.iterdir()} == {"index.html": "new", "b.png": "new"}
    assert leftovers(folder) == []


def test_a_run_killed_between_the_two_renames_is_undone_by_the_next(tmp_path):
    # without an exchange the old folder is renamed aside before the new one takes its name: a kill
    # in between leaves no folder, the old one aside and the new one staged; the next run puts the
    # old one back before it starts, so that its own failure would leave the old folder
    folder = tmp_path / "review"
    aside = tmp_path / f".review{ASIDE}x1"
    aside.mkdir()
    (aside / "index.html").write_text("old")
    staged = tmp_path / f".review{STAGING}x2"
    staged.mkdir()
    (staged / "index.html").write_text("half")
    with pytest.raises(InputError):
        with replaced_folder(folder, ()):  # owns no file name: the restored folder is refused
            pass
    assert (folder / "index.html").read_text() == "old" and leftovers(folder) == []


def test_a_link_given_as_output_stays_a_link(part, tmp_path, monkeypatch, capsys):
    # the file (or folder) the link leads to is replaced; the link itself is kept
    target, link = tmp_path / "field.ply", tmp_path / "link.ply"
    target.write_bytes(b"old")
    link.symlink_to(target)
    code, err = run_main(monkeypatch, capsys, "map", str(part), "--out", str(link))
    assert code in (None, 0), err
    assert link.is_symlink() and target.read_bytes().startswith(b"ply\n")
    folder, folder_link = tmp_path / "review", tmp_path / "review-link"
    _write(folder, {"index.html": "old"})
    folder_link.symlink_to(folder)
    _write(folder_link, {"index.html": "new"})
    assert folder_link.is_symlink() and (folder / "index.html").read_text() == "new" and leftovers(folder) == []
