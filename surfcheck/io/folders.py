"""A folder written as one: one run's complete folder or the one before it, never a mix.

The folder is written into a hidden staging sibling (same parent, so the same file system), then
swapped into place: on Linux in one step by renameat2(2) with RENAME_EXCHANGE, elsewhere by renaming
the old folder aside and the new one into its name. The old folder is removed after. A lock
(flock(2) on a hidden file beside the folder) keeps two runs from swapping into one folder at once;
staging and aside folders that a killed run left behind are removed by the next run, under the lock.
"""

from __future__ import annotations

import ctypes
import errno
import fcntl
import fnmatch
import os
import shutil
import sys
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from surfcheck.errors import InputError, OutputError, writing
from surfcheck.io.writing import current_umask

STAGING, ASIDE, LOCK = ".staging-", ".aside-", ".lock"  # suffixes of the hidden siblings of a folder
AT_FDCWD, RENAME_EXCHANGE = -100, 2  # from <fcntl.h> and <linux/fs.h>
NO_EXCHANGE = (errno.ENOSYS, errno.EINVAL, errno.EOPNOTSUPP)  # the kernel or file system offers none


def check_replaceable(folder: str | os.PathLike, owned: tuple[str, ...]) -> Path:
    """The folder as a Path; InputError when it is a file or holds an entry of another kind than its own.

    Parameters
    ----------
    folder : path-like
        The folder to be replaced (it need not exist).
    owned : tuple of str
        Glob patterns (fnmatch) of the file names such a folder holds; anything else in it (a
        subfolder, a file by another name) is someone's work that replacing the folder would delete.

    Returns
    -------
    Path
        ``folder``.
    """
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise InputError(f"{folder}: exists and is not a folder; give another folder")
    if not folder.is_dir():
        return folder
    foreign = sorted(entry.name for entry in os.scandir(folder)
                     if entry.is_dir(follow_symlinks=False) or not any(fnmatch.fnmatchcase(entry.name, p) for p in owned))
    if foreign:
        more = f" and {len(foreign) - 1} more" if len(foreign) > 1 else ""
        raise InputError(f"{folder}: holds {foreign[0]!r}{more}, which this command does not write, and the folder"
                         " is replaced as a whole: give a new or empty folder")
    return folder


@contextmanager
def replaced_folder(folder: str | os.PathLike, owned: tuple[str, ...]) -> Iterator[Path]:
    """Write a folder as a whole: yields an empty staging folder, which replaces ``folder`` when the
    block ends without an exception (and is removed when it raises).

    Parameters
    ----------
    folder : path-like
        The folder to write; created when missing. A link to a folder is followed: the folder it
        leads to is replaced and the link stays.
    owned : tuple of str
        check_replaceable's patterns: ``folder`` is only replaced when it holds nothing else.

    Yields
    ------
    Path
        The staging folder to write into.

    Raises
    ------
    InputError
        When ``folder`` is a file or holds other entries (check_replaceable).
    OutputError
        When the folder, its staging sibling or its lock cannot be written (errors.writing).
    """
    given = Path(folder)
    target = Path(os.path.realpath(given))
    with _locked(target, given):
        staging = _fresh_staging(target, given, owned)
        try:
            try:
                yield staging
            except OutputError as failure:  # a file of the staging folder: name the folder the user gave
                raise OutputError(given, failure.error) from None
            with writing(given):
                _swap_into_place(staging, target)
        finally:
            shutil.rmtree(staging, ignore_errors=True)  # the new folder on failure, the old one after a swap


def _fresh_staging(target: Path, given: Path, owned: tuple[str, ...]) -> Path:
    """Under the lock: a killed run's leftovers removed, the folder checked (check_replaceable), and
    an empty staging sibling made with an ordinary folder's mode (mkdtemp makes 0700)."""
    with writing(given):
        _remove_leftovers(target)
        check_replaceable(target, owned)
        staging = Path(tempfile.mkdtemp(prefix=f".{target.name}{STAGING}", dir=target.parent))
        os.chmod(staging, 0o777 & ~current_umask())
    return staging


@contextmanager
def _locked(target: Path, given: Path) -> Iterator[None]:
    """Hold an exclusive flock(2) on the folder's lock file; released when the process ends, so a
    killed run never leaves the folder locked. The file stays (removing it would race a waiter)."""
    with writing(given):
        target.parent.mkdir(parents=True, exist_ok=True)
        handle = os.open(target.parent / f".{target.name}{LOCK}", os.O_RDWR | os.O_CREAT, 0o666)
    try:
        fcntl.flock(handle, fcntl.LOCK_EX)
        yield
    finally:
        os.close(handle)


def _remove_leftovers(target: Path) -> None:
    """Undo what a killed run left: an old folder renamed aside comes back when the folder is
    missing; the other staging and aside siblings are removed. Called under the lock."""
    siblings = [p for p in target.parent.iterdir() if p.name.startswith((f".{target.name}{STAGING}", f".{target.name}{ASIDE}"))]
    aside = [p for p in siblings if p.name.startswith(f".{target.name}{ASIDE}")]
    if not os.path.lexists(target) and len(aside) == 1:
        os.rename(aside[0], target)
        siblings.remove(aside[0])
    for sibling in siblings:
        shutil.rmtree(sibling, ignore_errors=True)


def _swap_into_place(staging: Path, target: Path) -> None:
    """Put the staging folder at ``target``; the old folder, if any, ends up at ``staging``."""
    if not os.path.lexists(target):
        os.rename(staging, target)
        return
    if exchange(staging, target):
        return
    aside = Path(tempfile.mkdtemp(prefix=f".{target.name}{ASIDE}", dir=target.parent))
    os.rename(target, aside)  # onto the empty folder mkdtemp made, which rename(2) may replace
    os.rename(staging, target)
    os.rename(aside, staging)


def exchange(a: Path, b: Path) -> bool:
    """Swap two paths in one step: renameat2(2) with RENAME_EXCHANGE (Linux 3.15, glibc 2.28).

    Returns
    -------
    bool
        True when swapped; False when the system or the file system offers no exchange.

    Raises
    ------
    OSError
        Any other failure of renameat2.
    """
    if not sys.platform.startswith("linux"):
        return False
    libc = ctypes.CDLL(None, use_errno=True)
    renameat2 = getattr(libc, "renameat2", None)
    if renameat2 is None:
        return False
    renameat2.argtypes = (ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint)
    if renameat2(AT_FDCWD, os.fsencode(a), AT_FDCWD, os.fsencode(b), RENAME_EXCHANGE) == 0:
        return True
    code = ctypes.get_errno()
    if code in NO_EXCHANGE:
        return False
    raise OSError(code, os.strerror(code), str(b))
