"""Progress of a command's long steps (reading, fields, stations, segmentation, rendering) as bars on
the terminal: one live display (rich) on stderr that each step adds its own bar to, nested steps
below the step that runs them. Where stderr is not a terminal (a pipe, a file, a test) nothing is
shown, and nothing ever goes to stdout, so `--json` output stays as it was."""

from __future__ import annotations

import sys
from contextlib import contextmanager
from typing import Callable, Iterable, Iterator, Sequence, TypeVar

Item = TypeVar("Item")

_live = {"display": None, "depth": 0}  # the running display and how many steps share it


def shown() -> bool:
    """Whether steps show a bar: stderr is a terminal."""
    return bool(getattr(sys.stderr, "isatty", lambda: False)())


@contextmanager
def step(description: str, total: float | None = None) -> Iterator[Callable[..., None]]:
    """A bar for one step while the block runs: yields ``advance(amount=1)``; without a ``total`` the
    bar pulses (a step whose size is not known ahead, e.g. reading a file)."""
    if not shown():
        yield _ignore
        return
    display = _live["display"]
    if display is None:
        display = _live["display"] = _display()
        display.start()
    task = display.add_task(description, total=total)
    _live["depth"] += 1
    try:
        yield lambda amount=1.0: display.advance(task, amount)
    finally:
        display.remove_task(task)
        _live["depth"] -= 1
        if _live["depth"] == 0:
            display.stop()
            _live["display"] = None


def track(items: Sequence[Item] | Iterable[Item], description: str) -> Iterator[Item]:
    """The items, one at a time, with a bar of how many are done (a total where ``items`` has a length)."""
    total = len(items) if hasattr(items, "__len__") else None
    with step(description, total) as advance:
        for item in items:
            yield item
            advance()


def _display():
    from rich.console import Console
    from rich.progress import BarColumn, Progress, SpinnerColumn, TaskProgressColumn, TextColumn, TimeElapsedColumn

    return Progress(SpinnerColumn(), TextColumn("{task.description}"), BarColumn(), TaskProgressColumn(),
                    TimeElapsedColumn(), console=Console(stderr=True), transient=True)


def _ignore(amount: float = 1.0) -> None:
    """advance() where no bar is shown."""
