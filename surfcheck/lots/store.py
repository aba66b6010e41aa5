"""Each part's result kept in the lot folder as it arrives: DIR/parts/NAME/result.json (the document
`grade --json` prints), DIR/parts/NAME/review/ (its review page, when drawn) and
DIR/parts/NAME/entry.json (name, source, serial, the key of what was graded, the error).
entry.json is written last, atomically, so a part counts as done only once its result is complete;
a rerun keeps a part whose key still matches (same file, same request)."""

from __future__ import annotations

import hashlib
import json
import os
import shutil
from dataclasses import asdict, dataclass
from pathlib import Path

from surfcheck.io import write_atomic
from surfcheck.grading.request import GradeRequest
from surfcheck.lots.parts import LotPart

PARTS_FOLDER, ENTRY_FILE, RESULT_FILE, REVIEW_FOLDER = "parts", "entry.json", "result.json", "review"


@dataclass(frozen=True)
class PartRecord:
    """What a lot holds for one part: its grade document or its error (one line), and ``serial``, its
    place in the order of arrival (1, 2, ...). ``key`` identifies the file and request graded."""

    name: str
    source: str
    serial: int
    key: str
    document: dict | None = None
    error: str | None = None

    def entry(self) -> dict:
        """The record without its document, as entry.json holds it."""
        return {k: v for k, v in asdict(self).items() if k != "document"}


def file_fingerprint(path: str | os.PathLike) -> dict | None:
    """Size and modification time of a file (None when it cannot be read): a changed file is
    graded again."""
    try:
        status = os.stat(path)
    except OSError:
        return None
    return {"size": status.st_size, "mtime_ns": status.st_mtime_ns}


def part_key(part: LotPart, request: GradeRequest, pages: str) -> str:
    """A hash of what grading ``part`` depends on: its file (path, size, time), the request, the
    nominal file it names and which review pages are drawn."""
    what = {"path": os.path.realpath(part.path), "file": file_fingerprint(part.path), "request": asdict(request),
            "pages": pages,
            "nominal": file_fingerprint(request.nominal) if request.nominal else None}
    return hashlib.sha256(json.dumps(what, sort_keys=True, default=str).encode()).hexdigest()[:24]


def part_folder(out: Path, name: str) -> Path:
    """The folder of one part's result."""
    return out / PARTS_FOLDER / name


def save_record(out: Path, record: PartRecord, review: dict[str, bytes] | None = None) -> None:
    """Write a part's result.json (or remove a stale one when it has an error) and its review files
    (``review``: name -> bytes; a stale review folder is removed), then its entry.json."""
    folder = part_folder(out, record.name)
    result = folder / RESULT_FILE
    if record.document is not None:
        write_atomic(result, _json_bytes(record.document))
    elif result.exists():
        result.unlink()
    if (folder / REVIEW_FOLDER).is_dir():
        shutil.rmtree(folder / REVIEW_FOLDER)
    for name, payload in (review or {}).items():
        write_atomic(folder / REVIEW_FOLDER / name, payload)
    write_atomic(folder / ENTRY_FILE, _json_bytes(record.entry()))


def load_record(out: Path, part: LotPart, key: str) -> PartRecord | None:
    """The record kept for ``part`` when it is complete and its key is ``key``; None otherwise (never
    graded, graded from another file or request, or damaged)."""
    folder = part_folder(out, part.name)
    try:
        entry = json.loads((folder / ENTRY_FILE).read_text())
        if entry.get("key") != key or entry.get("name") != part.name:
            return None
        document = None if entry.get("error") else json.loads((folder / RESULT_FILE).read_text())
        return PartRecord(entry["name"], entry["source"], int(entry["serial"]), key, document, entry.get("error"))
    except (OSError, ValueError, KeyError, TypeError):
        return None


def _json_bytes(document: dict) -> bytes:
    return (json.dumps(document, indent=2, allow_nan=False) + "\n").encode()
