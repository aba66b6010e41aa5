"""The lot table: one row per part x seam x order, as Apache Parquet (pyarrow) and CSV. A part
that could not be graded has one row with its error; a seam that could not be graded has one row
with its reason and no order."""

from __future__ import annotations

from pathlib import Path

from surfcheck.io import write_atomic
from surfcheck.grading.continuity import ORDERS
from surfcheck.lots.store import PartRecord

TABLE_FILE, CSV_FILE = "lot.parquet", "lot.csv"
NOT_GRADED = "not graded"
COLUMNS = ("part", "serial", "source", "seam", "groups", "order", "value", "u", "tolerance", "status", "achieved",
           "error")


def lot_rows(records: list[PartRecord]) -> list[dict]:
    """The rows of the lot table, parts in order of arrival (serial), seams as graded, G0..G3.

    Parameters
    ----------
    records : list of PartRecord
        Every part of the lot.

    Returns
    -------
    list of dict
        One dict per row with the keys of COLUMNS; ``u`` is the standard uncertainty of the
        governing station's value, ``achieved`` the seam's highest order with G0..Gk holding (-1: none).
    """
    rows = []
    for record in sorted(records, key=lambda r: r.serial):
        base = {column: None for column in COLUMNS} | {"part": record.name, "serial": record.serial,
                                                      "source": record.source}
        if record.document is None:
            rows.append(base | {"error": record.error})
            continue
        for seam in record.document["seams"]:
            for order in ORDERS:
                grade = seam["orders"][order]
                rows.append(base | {"seam": seam["id"], "groups": " | ".join(seam["groups"]), "order": order,
                                    "value": grade["value"], "u": grade["uncertainty"],
                                    "tolerance": grade["tolerance"], "status": grade["status"],
                                    "achieved": seam["achieved"]})
        for seam in record.document["not_graded"]:
            rows.append(base | {"seam": seam["id"], "groups": " | ".join(seam["groups"]), "status": NOT_GRADED,
                                "error": seam["reason"]})
    return rows


def lot_table(records: list[PartRecord]):
    """The lot table as a pyarrow.Table with a fixed schema (typed columns even when empty)."""
    import pyarrow as pa

    types = {"part": pa.string(), "serial": pa.int64(), "source": pa.string(), "seam": pa.string(),
             "groups": pa.string(), "order": pa.string(), "value": pa.float64(), "u": pa.float64(),
             "tolerance": pa.float64(), "status": pa.string(), "achieved": pa.int64(), "error": pa.string()}
    schema = pa.schema([(column, types[column]) for column in COLUMNS])
    return pa.Table.from_pylist(lot_rows(records), schema=schema)


def write_tables(out: Path, records: list[PartRecord]) -> tuple[Path, Path]:
    """Write DIR/lot.parquet and DIR/lot.csv (each to a temporary name, then renamed).

    Returns
    -------
    tuple of Path
        The Parquet file and the CSV file.
    """
    import pyarrow as pa
    import pyarrow.csv as csv
    import pyarrow.parquet as pq

    table = lot_table(records)
    for name, write in ((TABLE_FILE, pq.write_table), (CSV_FILE, csv.write_csv)):
        sink = pa.BufferOutputStream()
        write(table, sink)
        write_atomic(out / name, sink.getvalue().to_pybytes())
    return out / TABLE_FILE, out / CSV_FILE
