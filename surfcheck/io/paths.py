"""Output paths checked before anything is read or written: one that would overwrite an input is
refused, and so is one in a folder that cannot be written."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterable
from pathlib import Path

from surfcheck.errors import InputError, writing


def check_outputs(outputs: Iterable[str | os.PathLike | None], inputs: Iterable[str | os.PathLike | None]) -> None:
    """InputError when an output path is an input, by name or through links; OutputError when its
    folder cannot be written (check_writable).

    Parameters
    ----------
    outputs : iterable of path or None
        The paths a command will write (None: not asked for).
    inputs : iterable of path or None
        The paths it reads.

    Raises
    ------
    InputError
        When an output resolves (os.path.realpath) to an input's path or names the same file
        (os.path.samefile, which also sees hard links).
    OutputError
        When an output's folder is read-only or not permitted.
    """
    sources = [Path(p) for p in inputs if p is not None]
    for output in (Path(p) for p in outputs if p is not None):
        source = next((s for s in sources if same_path(output, s)), None)
        if source is not None:
            raise InputError(f"{output}: is the input {source} (by name or through a link); writing it would"
                             " destroy the input: give another output path")
        check_writable(output)


def check_writable(output: Path) -> None:
    """OutputError when the folder ``output`` goes into cannot be written: a nameless temporary file
    (tempfile.TemporaryFile, O_TMPFILE on Linux) is made and dropped in its nearest existing folder
    so a read-only disk or a folder without permission is found before the work, not after it."""
    folder = Path(os.path.realpath(output)).parent
    while not folder.is_dir():  # missing folders are made on writing; a file in the way is the writer's to refuse
        folder = folder.parent
    with writing(output):
        tempfile.TemporaryFile(dir=folder).close()


def same_path(a: Path, b: Path) -> bool:
    """Whether two paths lead to the same place: equal resolved paths, or one file."""
    if os.path.realpath(a) == os.path.realpath(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist: then they are not one file
        return False
