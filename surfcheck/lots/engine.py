"""The distributed engine of a lot: Dask distributed (https://distributed.dask.org). By default a
LocalCluster on this machine, one single-threaded worker process per core; or an existing cluster
through its scheduler's address. Tasks are submitted with retries and come back as they finish
(distributed.as_completed); a worker that dies takes its task to another worker (the scheduler
reschedules what a lost worker held)."""

from __future__ import annotations

import logging
import os
from collections.abc import Iterator
from contextlib import contextmanager

from surfcheck.errors import InputError
from surfcheck.part import Part
from surfcheck.grading.request import GradeRequest
from surfcheck.lots.parts import LotPart
from surfcheck.lots.task import TaskResult, grade_lot_part

RETRIES = 2  # a task that raised is run up to twice more before its part becomes an error row
CONNECT_TIMEOUT = "20s"


@contextmanager
def lot_client(scheduler: str | None = None, workers: int | None = None):
    """A dask.distributed Client: to the scheduler at ``scheduler`` (tcp://HOST:PORT), or to a new
    LocalCluster of ``workers`` processes (default os.cpu_count()) with one thread each, closed on exit.

    Raises
    ------
    InputError
        When ``workers`` is below 1 or the scheduler cannot be reached.
    """
    from dask.distributed import Client, LocalCluster

    if scheduler is not None:
        try:
            client = Client(scheduler, timeout=CONNECT_TIMEOUT)
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"--scheduler {scheduler}: cannot reach a Dask scheduler there ({type(exc).__name__});"
                             " start one (dask scheduler) or leave --scheduler out for a local cluster") from None
        with client:
            yield client
        return
    count = (os.cpu_count() or 1) if workers is None else workers
    if count < 1:
        raise InputError(f"--workers {workers}: give at least one worker")
    with LocalCluster(n_workers=count, threads_per_worker=1, processes=True, dashboard_address=None,
                      silence_logs=logging.ERROR) as cluster, Client(cluster) as client:
        yield client


def task_key(part: LotPart, key: str) -> str:
    """The Dask key of a part's task: the part's name and the hash of what it depends on, so the same
    part and request name one task and no result is taken for another part's."""
    return f"surfcheck-part-{part.name}-{key}"


def stream_grades(client, parts: list[tuple[LotPart, str]], request: GradeRequest, nominal: Part | None,
                  pages: str = "failing") -> Iterator[tuple[LotPart, TaskResult]]:
    """Grade parts on the cluster, one task each, and yield (part, result) as each finishes.

    Parameters
    ----------
    client : dask.distributed.Client
        From lot_client.
    parts : list of (LotPart, str)
        Each part with its key (store.part_key).
    request : GradeRequest
        The lot's request.
    nominal : Part or None
        Sent to every worker once (Client.scatter with broadcast), not once per task.
    pages : str
        Which parts' review pages the tasks draw (task.PAGES).

    Yields
    ------
    tuple of LotPart and TaskResult
        In order of completion; a task that failed after its retries (or whose workers kept dying)
        yields a TaskResult with the failure as its error.
    """
    from dask.distributed import as_completed

    shared = client.scatter(nominal, broadcast=True) if nominal is not None else None
    futures = {client.submit(grade_lot_part, part, request, shared, pages, key=task_key(part, key),
                             retries=RETRIES): part for part, key in parts}
    for future in as_completed(futures):
        part = futures.pop(future)
        try:
            result = future.result()
        except Exception as exc:  # the task raised after its retries, or lost its workers: an error row
            result = TaskResult(error=f"the task failed ({type(exc).__name__}: {exc})", of_part=False)
        future.release()
        yield part, result
