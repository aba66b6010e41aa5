"""A lot from start to end: collect the parts, keep those already graded with the same file and
request, grade the rest on the cluster (results kept per part as they arrive, numbered by arrival),
then write the lot table and the lot page."""

from __future__ import annotations

import os
from dataclasses import dataclass, replace
from pathlib import Path

from surfcheck.errors import InputError
from surfcheck.io import check_outputs
from surfcheck.grading.continuity import ORDERS
from surfcheck.grading.document import CAUTION
from surfcheck.grading.request import GradeRequest
from surfcheck.lots.engine import lot_client, stream_grades
from surfcheck.lots.parts import LotPart, collect_parts
from surfcheck.lots.review import PAGE_FILE, write_lot_page
from surfcheck.lots.task import PAGES
from surfcheck.lots.store import PARTS_FOLDER, PartRecord, load_record, part_key, save_record
from surfcheck.lots.table import CSV_FILE, TABLE_FILE, write_tables
from surfcheck.lots.yields import ERROR, lot_verdict, part_verdict, proven_defective, seam_yields


@dataclass(frozen=True)
class LotResult:
    """A finished lot: every part's record (in order of arrival), the names of the parts kept from an
    earlier run, and the files written."""

    out: Path
    records: tuple[PartRecord, ...]
    kept: tuple[str, ...]
    required: int | None
    files: dict[str, Path]

    @property
    def verdict(self) -> str:
        return lot_verdict(list(self.records), self.required)

    @property
    def errors(self) -> list[PartRecord]:
        return [r for r in self.records if r.document is None]

    def summary(self) -> dict:
        """The JSON-ready summary `surfcheck lot --json` prints."""
        records = list(self.records)
        return {
            "out": str(self.out),
            "require": None if self.required is None else ORDERS[self.required],
            "verdict": self.verdict,
            "parts": len(records),
            "graded": len(records) - len(self.errors),
            "kept": len(self.kept),
            "errors": [{"part": r.name, "source": r.source, "error": r.error} for r in self.errors],
            "failing": [r.name for r in records if part_verdict(r) == "fail"],
            "defective": [r.name for r in records if proven_defective(r)],
            "seams": [y.to_dict() for y in seam_yields(records, self.required)],
            "files": {name: str(path) for name, path in self.files.items()},
            "caution": CAUTION,
        }


def run_lot(arguments: list[str | os.PathLike], request: GradeRequest, out: str | os.PathLike, *,
            scheduler: str | None = None, workers: int | None = None, force: bool = False,
            pages: str = "failing", progress=None) -> LotResult:
    """Grade a production lot: every part as `surfcheck grade` grades it, one Dask task each.

    Parameters
    ----------
    arguments : list of path
        Part files, folders and .txt listings (parts.collect_parts).
    request : GradeRequest
        The grading request every part is graded by (usually through a nominal part).
    out : path
        The lot folder: parts/NAME/result.json per part, lot.parquet, lot.csv, index.html and its
        charts.
    scheduler : str, optional
        Address of a running Dask scheduler (tcp://HOST:PORT); a LocalCluster when None.
    workers : int, optional
        Worker processes of the LocalCluster (default os.cpu_count()).
    force : bool
        Grade every part again, even those the folder holds for the same file, request and pages.
    pages : str
        Which graded parts get their own review page in parts/NAME/review/: "failing" (those that
        fail the requirement), "all" or "none" (task.PAGES).
    progress : callable, optional
        progress(total) returns a callable advance(name) called as each part arrives.

    Returns
    -------
    LotResult
        The records, the parts kept and the files written.
    """
    out = Path(out)
    if pages not in PAGES:
        raise InputError(f"--pages {pages!r}: use one of {', '.join(PAGES)}")
    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: exists and is not a folder; give another --out")
    parts = collect_parts(arguments)
    check_outputs([out, out / PARTS_FOLDER, out / TABLE_FILE, out / CSV_FILE, out / PAGE_FILE],
                  [*(p.path for p in parts), request.nominal])
    request.profile()
    nominal = request.read_nominal()
    keyed = [(part, part_key(part, request, pages)) for part in parts]
    records: dict[str, PartRecord] = {}
    if not force:
        for part, key in keyed:
            record = load_record(out, part, key)
            if record is not None:
                records[part.name] = record
    kept = tuple(records)
    todo = [(part, key) for part, key in keyed if part.name not in records]
    if todo:
        records |= _grade_on_cluster(out, todo, request, nominal, next_serial(records), progress,
                                     scheduler=scheduler, workers=workers, pages=pages)
    ordered = tuple(sorted(records.values(), key=lambda r: r.serial))
    table, csv = write_tables(out, list(ordered))
    result = LotResult(out, ordered, kept, request.required, {"table": table, "csv": csv})
    context = {"nominal": request.nominal or "none", "seams": ", ".join(request.seams),
               "tolerance profile": request.tolerance, "requirement": request.require or "none"}
    page = write_lot_page(out, [records[p.name] for p in parts], request.required, result.summary(), context)
    return replace(result, files={**result.files, "page": page})


def next_serial(records: dict[str, PartRecord]) -> int:
    """The serial the next arriving part takes: one past the highest kept."""
    return max((r.serial for r in records.values()), default=0) + 1


def _grade_on_cluster(out: Path, todo: list[tuple[LotPart, str]], request: GradeRequest, nominal, serial: int,
                      progress, *, scheduler: str | None, workers: int | None, pages: str) -> dict[str, PartRecord]:
    """Grade the parts still to do, saving each record as it arrives; a part arrives once."""
    keys = dict((part.name, key) for part, key in todo)
    advance = progress(len(todo)) if progress else None
    arrived: dict[str, PartRecord] = {}
    with lot_client(scheduler, workers) as client:
        for part, result in stream_grades(client, todo, request, nominal, pages):
            if part.name in arrived:
                continue
            record = PartRecord(part.name, part.path, serial, keys[part.name], result.document, result.error)
            serial += 1
            if result.of_part:
                save_record(out, record, result.review)
            arrived[part.name] = record
            if advance:
                advance(f"{part.name}: {ERROR if record.document is None else part_verdict(record)}")
    return arrived
