"""Output paths that would overwrite an input: refused before anything is read or written."""

from __future__ import annotations

import os
from collections.abc import Iterable
from pathlib import Path

from surfcheck.errors import InputError


def check_outputs(outputs: Iterable[str | os.PathLike | None], inputs: Iterable[str | os.PathLike | None]) -> None:
    """InputError when an output path is an input, by name or through links.

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
    """
    sources = [Path(p) for p in inputs if p is not None]
    for output in (Path(p) for p in outputs if p is not None):
        source = next((s for s in sources if same_path(output, s)), None)
        if source is not None:
            raise InputError(f"{output}: is the input {source} (by name or through a link); writing it would"
                             " destroy the input: give another output path")


def same_path(a: Path, b: Path) -> bool:
    """Whether two paths lead to the same place: equal resolved paths, or one file."""
    if os.path.realpath(a) == os.path.realpath(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist: then they are not one file
        return False
