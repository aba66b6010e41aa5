"""The lot page's charts (matplotlib): per seam a run chart of its worst G0, G1 and G2 values over the
parts in lot order, with the tolerance and the individuals chart's control limits (control.py,
ISO 7870-2), and a histogram of the same values against the tolerance."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from surfcheck.grading.status import Status
from surfcheck.review.render import STATUS_COLOURS, save_figure
from surfcheck.lots.control import individuals_limits
from surfcheck.lots.series import SeamSeries

DPI = 100
TOLERANCE_COLOUR, LIMIT_COLOUR, CENTRE_COLOUR, NO_DATA = "#d7263d", "#3a6fb0", "#5f6368", "#9aa0a6"
STATUS_OF_TEXT = {s.value: s for s in Status}


def _figure(rows: int, columns: int = 1):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(10.0, 2.9 * rows + (0.6 if columns > 1 else 0.0)), dpi=DPI, layout="constrained")
    return fig, fig.subplots(rows, columns, squeeze=False).ravel()


def plot_run_chart(series: list[SeamSeries], path: str | os.PathLike) -> Path:
    """One panel per series (G0, G1, G2): the values over the parts in lot order, each point coloured by
    its status, the tolerance (a step line: relative tolerances vary by part), the centre line and
    the control limits of an individuals chart; parts beyond a control limit are named."""
    fig, axes = _figure(len(series))
    for ax, s in zip(axes, series):
        x = s.positions
        ax.plot(x, s.values, color=NO_DATA, linewidth=0.8, zorder=1)
        colours = [STATUS_COLOURS.get(STATUS_OF_TEXT.get(st), NO_DATA) for st in s.statuses]
        ax.scatter(x, s.values, c=colours, s=22, zorder=2)
        ax.step(x, s.tolerances, where="mid", color=TOLERANCE_COLOUR, linewidth=1.2, label="tolerance")
        limits = individuals_limits(s.values)
        if limits is not None:
            ax.axhline(limits.centre, color=CENTRE_COLOUR, linewidth=1.0, label=f"centre {limits.centre:.3g}")
            # the values are magnitudes (>= 0): a lower limit at or below zero is no limit, and is not drawn
            drawn = [v for v in (limits.upper, limits.lower) if v > 0]
            label = (f"control limits {limits.lower:.3g} .. {limits.upper:.3g}" if len(drawn) == 2
                     else f"upper control limit {limits.upper:.3g}")
            for value in drawn:
                ax.axhline(value, color=LIMIT_COLOUR, linestyle="--", linewidth=1.0, label=label)
                label = None  # one legend entry for both limits
            for i in np.flatnonzero(limits.outside(s.values)):
                ax.annotate(s.parts[i], (x[i], s.values[i]), textcoords="offset points", xytext=(4, 4), fontsize=8)
        ax.set_xlabel("part, in lot order")
        ax.set_ylabel(f"worst {s.order} [{s.unit}]")
        ax.set_title(f"{s.seam}: {s.order}")
        ax.legend(loc="upper left", fontsize=8, framealpha=0.8)
    return save_figure(fig, path, DPI)


def plot_histogram(series: list[SeamSeries], path: str | os.PathLike) -> Path:
    """Side by side, the distribution of each series' decided values with the tolerance (the
    smallest over the lot, where relative tolerances vary)."""
    fig, axes = _figure(1, len(series))
    for ax, s in zip(axes, series):
        values = s.values[np.isfinite(s.values)]
        if len(values):
            ax.hist(values, bins="auto", color="#3a6fb0", alpha=0.8)
        if np.isfinite(s.tolerances).any():
            ax.axvline(np.nanmin(s.tolerances), color=TOLERANCE_COLOUR, linewidth=1.2, label="tolerance")
            ax.legend(fontsize=8)
        ax.set_xlabel(f"worst {s.order} [{s.unit}]")
        ax.set_ylabel("parts")
        ax.set_title(f"{s.order}, {len(values)} parts")
    if series:  # the seam once over the panels: three long titles side by side ran off the figure
        fig.suptitle(series[0].seam)
    return save_figure(fig, path, DPI)
