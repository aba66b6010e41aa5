"""The errors a user can see: each carries a one-line message saying what is wrong and what to do."""

from __future__ import annotations

import errno
import os
from collections.abc import Iterator
from contextlib import contextmanager

NO_SPACE = (errno.ENOSPC, errno.EDQUOT, errno.EFBIG)  # full disk, quota reached, file too large


class SurfcheckError(Exception):
    """Base of every failure surfcheck reports to its user."""


class InputError(SurfcheckError):
    """A file, mesh, option or request that cannot be used as given."""


class OutputError(SurfcheckError):
    """An output that cannot be written: a full or read-only disk, a folder without permission.

    Parameters
    ----------
    path : path-like
        The output as the user named it.
    error : OSError
        The system's failure; its reason goes into the message, with what to do.
    """

    def __init__(self, path: str | os.PathLike, error: OSError) -> None:
        self.path, self.error = path, error
        reason = error.strerror or type(error).__name__
        remedy = "free some space or choose another folder" if error.errno in NO_SPACE else "choose another folder"
        super().__init__(f"cannot write {path}: {reason}; {remedy}")


@contextmanager
def writing(path: str | os.PathLike) -> Iterator[None]:
    """Turn an OSError raised while writing ``path`` into an OutputError naming it, the system's
    reason and what to do; every writer of outputs goes through this one place.

    Parameters
    ----------
    path : path-like
        The output as the user named it (not a temporary name beside it).

    Raises
    ------
    OutputError
        From any OSError of the block.
    """
    try:
        yield
    except OSError as exc:
        raise OutputError(path, exc) from None
