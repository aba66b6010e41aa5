"""The parts of a lot: files, folders of part files, and text files listing part paths, each part with
a name of its own (its file stem, numbered when two stems agree) under which its result is kept."""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path

from surfcheck.errors import InputError
from surfcheck.io import FORMATS

LISTING_SUFFIX = ".txt"


@dataclass(frozen=True)
class LotPart:
    """One part of a lot: its ``name`` (unique in the lot, safe as a folder name) and its file."""

    name: str
    path: str


def collect_parts(arguments: list[str | os.PathLike]) -> list[LotPart]:
    """The parts named by ``arguments``, in the order given.

    Parameters
    ----------
    arguments : list of path
        Part files; folders (their part files, .stl .obj .ply .step .stp, sorted by name, not
        recursive); and .txt listings with one part path a line (blank lines and lines starting with
        ``#`` skipped; relative paths are relative to the listing's folder).

    Returns
    -------
    list of LotPart
        One per part path, first occurrence kept when a path is named twice. A path a listing names
        is kept even when it does not exist: it becomes the part's error row, not the end of the lot.

    Raises
    ------
    InputError
        When an argument does not exist, is neither a part file, a folder nor a listing, or when no
        part is found at all.
    """
    paths: list[Path] = []
    for argument in map(Path, arguments):
        if argument.is_dir():
            paths += sorted(p for p in argument.iterdir() if p.is_file() and p.suffix.lower() in FORMATS)
        elif argument.suffix.lower() == LISTING_SUFFIX and argument.is_file():
            paths += _listed(argument)
        elif not argument.exists():
            raise InputError(f"{argument}: no such file or folder; give part files, folders or a .txt listing")
        elif argument.suffix.lower() in FORMATS:
            paths.append(argument)
        else:
            raise InputError(f"{argument}: neither a part file ({', '.join(FORMATS)}), a folder nor a .txt listing")
    unique = list(dict.fromkeys(Path(os.path.normpath(p)) for p in paths))
    if not unique:
        raise InputError("no parts: the folders and listings given hold no part files")
    return _named(unique)


def _listed(listing: Path) -> list[Path]:
    """The part paths a listing names, relative ones taken from the listing's folder."""
    try:
        lines = listing.read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{listing}: cannot be read as a text listing of part paths ({type(exc).__name__})") from None
    entries = [line.strip() for line in lines]
    return [listing.parent / entry for entry in entries if entry and not entry.startswith("#")]


def _named(paths: list[Path]) -> list[LotPart]:
    """Each path with a folder-safe name: its stem, with -2, -3 ... when an earlier part took it."""
    taken: set[str] = set()
    parts = []
    for path in paths:
        stem = re.sub(r"[^A-Za-z0-9._-]+", "_", path.stem).strip(".") or "part"
        name, count = stem, 1
        while name in taken:
            count += 1
            name = f"{stem}-{count}"
        taken.add(name)
        parts.append(LotPart(name, str(path)))
    return parts
