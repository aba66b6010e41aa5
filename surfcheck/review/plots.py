"""Profile plots of a graded seam (matplotlib, Agg): the curvature across it at its worst stations, and
each continuity order along it against its tolerance.

Across the seam, each side's one-sided estimate (continuity.fit_side: position, tangent heading,
curvature kappa and curvature rate at the seam point) is drawn as its local model curve, the plane
curve whose curvature runs linearly, kappa(s) = kappa + rate s, from the seam point into that side
(an Euler spiral; its points by the trapezoidal rule on the heading). Under it, the vertices' normal
curvature in the section direction, from the two-sided jet fits, by Euler's formula
k_n = k1 cos^2 t + k2 sin^2 t (do Carmo, Differential Geometry of Curves and Surfaces, 3-2), shows
what a two-sided estimate makes of the seam.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from surfcheck.grading.continuity import ORDERS, UNITS, SeamGrade, StationResult
from surfcheck.grading.run import SeamRun
from surfcheck.grading.sections import Section
from surfcheck.grading.sidefit import CURVATURE, RATE, SideEstimate
from surfcheck.grading.status import Status
from surfcheck.review.render import STATUS_COLOURS, STATUS_TEXT, save_figure

SIDE_COLOURS = ("#3a6fb0", "#e08a1e")  # side A, side B
MODEL_SAMPLES = 200
MODEL_TURN = np.pi / 4  # a model curve is drawn until it turns this far from its tangent at the seam
LOG_ABOVE = 20.0  # the along-seam axis turns logarithmic above the tolerance past this many tolerances


def model_curve(side: SideEstimate, sign: float, length: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A side's local model curve from its seam point into the side (``sign`` -1 for side A, whose
    data lies before the seam, +1 for side B) over ``length`` of arc: points (n, 2), arc length s (n,)
    (signed like ``sign``) and curvature kappa + rate s (surfcheck's sign). The curve stops early
    where it has turned MODEL_TURN from its tangent: a local model says little beyond that."""
    kappa0, rate = side.curvature, side.rate
    s = np.linspace(0.0, sign * length, 4 * MODEL_SAMPLES)
    turned = np.abs(kappa0 * s + 0.5 * rate * s * s) > MODEL_TURN
    if turned.any():
        length = max(abs(float(s[np.argmax(turned)])), 1e-12)
    s = np.linspace(0.0, sign * length, MODEL_SAMPLES)
    # a plane curve turns left with positive signed curvature; surfcheck's curvature is positive where
    # the curve bends away from the outward normal (+y), turning it right: heading' = -kappa
    heading = side.heading - (kappa0 * s + 0.5 * rate * s * s)
    tangents = np.column_stack([np.cos(heading), np.sin(heading)])
    steps = np.diff(s)[:, None] * 0.5 * (tangents[1:] + tangents[:-1])
    points = side.point + np.vstack([np.zeros((1, 2)), np.cumsum(steps, axis=0)])
    return points, s, kappa0 + rate * s


def section_curvature(section: Section, curvature) -> tuple[np.ndarray, np.ndarray]:
    """Section x and the normal curvature across the seam of the station's strip vertices: in the
    direction of the section's cross vector projected into each vertex's tangent plane, from the
    per-vertex principal curvatures (k1, k2, d1, d2) by Euler's formula."""
    ids = np.concatenate([section.ids_a, section.ids_b])
    x = np.concatenate([section.side_a[:, 0], section.side_b[:, 0]])
    c1, c2 = curvature.d1[ids] @ section.cross, curvature.d2[ids] @ section.cross
    # the cross direction projected into each vertex's tangent plane (spanned by d1, d2), unit length
    return x, (curvature.k1[ids] * c1**2 + curvature.k2[ids] * c2**2) / (c1**2 + c2**2)


def worst_stations(grade: SeamGrade, count: int = 2) -> list[int]:
    """Indices (into grade.stations) of the stations to plot: the governing station of the first order
    that does not hold (G2 when all hold), then the largest G2, G3, G1 values against their tolerances."""
    first = grade.achieved + 1 if grade.achieved < 3 else 2
    first = max(first, 1)
    index = {s.index: k for k, s in enumerate(grade.stations)}
    chosen = [index[grade.orders[first].worst_station]] if grade.orders[first].worst_station in index else []
    for order in (2, 3, 1):
        ratios = [s.orders[order].value / s.orders[order].tolerance for s in grade.stations]
        for k in np.argsort(ratios)[::-1]:
            if len(chosen) >= count:
                return chosen
            if int(k) not in chosen:
                chosen.append(int(k))
                break
    return chosen[:count]


def _figure(width: float, height: float):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    plt.rcParams.update({"font.size": 11, "axes.titlesize": 12, "axes.labelsize": 11})
    return plt, plt.figure(figsize=(width, height), dpi=100)


def _save(plt, fig, path: str | os.PathLike) -> Path:
    return save_figure(fig, path, 100, tight=True)  # a one-station figure is narrower than its legend


def plot_profiles(seam: SeamRun, path: str | os.PathLike, *, coverage: float, curvature=None,
                  count: int = 2) -> Path:
    """The seam's worst stations side by side: on top the section data of each side with its one-sided
    model curve and the seam point; below, the curvature across the seam: each side's model
    curvature with its expanded uncertainty band, the vertices' two-sided curvature (when
    ``curvature``, a differential.Curvature, is given), and the G2 jump with its uncertainty."""
    grade = seam.grade
    picks = [seam.stations[k] for k in worst_stations(grade, count)]
    u = grade.units
    plt, fig = _figure(6.2 * max(1, len(picks)), 8.2)
    grid = fig.add_gridspec(2, max(1, len(picks)), height_ratios=[1.0, 1.25], hspace=0.32, wspace=0.28,
                            left=0.09 if len(picks) < 2 else 0.07, right=0.98, top=0.88, bottom=0.16)
    for column, graded in enumerate(picks):
        _profile_column(fig, grid, column, graded.section, graded.result, graded.sides, coverage, curvature, u)
    fig.suptitle(f"{grade.id} ({grade.groups[0]} | {grade.groups[1]}): curvature across the seam at the worst"
                 " stations", fontsize=13, x=0.02, ha="left")
    if picks:
        fig.legend(handles=_profile_legend(curvature is not None), loc="upper left", bbox_to_anchor=(0.02, 0.955),
                   ncols=6, fontsize=10, frameon=False)
    fig.text(0.02, 0.015, "Lines: each side's one-sided fit at the seam point (position, tangent, curvature,"
             " curvature rate), drawn as the curve whose curvature runs linearly from there.\nBands and ±: expanded"
             f" uncertainty U (k = {coverage:g}). Grey dots: the vertices' normal curvature across the seam from"
             " two-sided surface fits. Side A < 0 < side B.", fontsize=10, ha="left", va="bottom")
    return _save(plt, fig, path)


def _profile_legend(with_vertices: bool) -> list:
    from matplotlib.lines import Line2D

    handles = []
    for name, colour in zip("AB", SIDE_COLOURS):
        handles.append(Line2D([], [], color=colour, marker=".", ms=8, ls="none", alpha=0.6, label=f"side {name} data"))
        handles.append(Line2D([], [], color=colour, lw=2.0, label=f"side {name} fit"))
    handles.append(Line2D([], [], color="#222222", marker="*", ms=11, ls="none", label="seam point"))
    if with_vertices:
        handles.append(Line2D([], [], color="#555555", marker=".", ms=8, ls="none", alpha=0.6,
                              label="vertices (two-sided)"))
    return handles


def _profile_column(fig, grid, column, section, station, sides, coverage, curvature, u) -> None:
    top = fig.add_subplot(grid[0, column])
    low = fig.add_subplot(grid[1, column], sharex=top)
    reach = float(np.clip(1.5 * max(sides.a.windows[CURVATURE], sides.b.windows[CURVATURE]), 6.0 * section.edge, 20.0 * section.edge))
    seam = 0.5 * (sides.a.point + sides.b.point)
    shown = [np.asarray(station.curvature, dtype=float)]
    for data, side, sign, colour in ((sides.data_a, sides.a, -1.0, SIDE_COLOURS[0]),
                                     (sides.data_b, sides.b, 1.0, SIDE_COLOURS[1])):
        near = np.abs(data[:, 0] - seam[0]) <= reach
        top.plot(data[near, 0], data[near, 1], ".", ms=2.5, alpha=0.35, color=colour, zorder=1)
        if not np.isfinite(side.variances[CURVATURE]):
            continue
        points, s, kappa = model_curve(side, sign, max(side.windows[CURVATURE], 2.0 * section.edge))
        top.plot(points[:, 0], points[:, 1], "-", lw=2.0, color=colour)
        band = coverage * np.sqrt(side.variances[CURVATURE] + s**2 * side.variances[RATE])
        low.fill_between(points[:, 0], kappa - band, kappa + band, color=colour, alpha=0.18, lw=0)
        low.plot(points[:, 0], kappa, "-", lw=2.0, color=colour)
        shown.append(kappa[np.abs(points[:, 0] - seam[0]) <= reach])
    if curvature is not None:
        x, k = section_curvature(section, curvature)
        near = np.abs(x - seam[0]) <= reach
        low.plot(x[near], k[near], ".", ms=2.5, color="#555555", alpha=0.35, zorder=0)
        shown.append(k[near])
    for ax in (top, low):
        ax.axvline(seam[0], color="#222222", lw=0.8, ls=":")
        ax.grid(alpha=0.3)
    top.plot([seam[0]], [seam[1]], marker="*", ms=13, color="#222222", ls="none", zorder=3)
    top.set_xlim(seam[0] - reach, seam[0] + reach)
    top.set_title(f"station {station.index} at s = {station.s:.3g} {u}", fontsize=12)
    top.set_ylabel(f"height along the\nnormal [{u}]")
    low.set_ylim(*_limits(np.concatenate(shown)))
    low.set_xlabel(f"across the seam, x [{u}]")
    low.set_ylabel(f"curvature [1/{u}]")
    _annotate_jump(low, station, seam[0])
    _annotate_orders(top, station, (0, 1), coverage, u)
    _annotate_orders(low, station, (2, 3), coverage, u)


def _limits(values: np.ndarray) -> tuple[float, float]:
    """Axis limits that hold the finite values with a margin (more above, for the annotation)."""
    values = values[np.isfinite(values)]
    low, high = (float(values.min()), float(values.max())) if values.size else (0.0, 1.0)
    margin = 0.12 * max(high - low, 1e-3 * max(abs(low), abs(high), 1e-12))
    return low - margin, high + 3.0 * margin


def _annotate_jump(ax, station: StationResult, x0: float) -> None:
    """A double arrow between the two sides' curvatures at the seam."""
    ka, kb = station.curvature
    ax.annotate("", xy=(x0, kb), xytext=(x0, ka), arrowprops={"arrowstyle": "<->", "color": "#222222", "lw": 1.4})


def _annotate_orders(ax, station: StationResult, orders: tuple[int, ...], coverage: float, u: str) -> None:
    """The station's value ± expanded uncertainty, tolerance and decision of the given orders, in a box
    framed in the colour of the worst decision, where it covers the least of what is drawn (a legend
    without symbols, placed by matplotlib's "best" rule)."""
    from matplotlib.lines import Line2D

    lines = []
    for k in orders:
        r = station.orders[k]
        unit = UNITS[k].format(u=u)
        lines.append(f"{ORDERS[k]} {r.value:.3g} ± {coverage * r.uncertainty:.2g} {unit}, tol {r.tolerance:.3g}: {r.status}")
    worst = Status.combine(station.orders[k].status for k in orders)
    box = ax.legend([Line2D([], [], ls="none")], ["\n".join(lines)], loc="best", handlelength=0, handletextpad=0,
                    fontsize=9.5, framealpha=0.9, edgecolor=STATUS_TEXT[worst])
    for text in box.get_texts():
        text.set_color(STATUS_TEXT[worst])


def plot_along_seam(grade: SeamGrade, path: str | os.PathLike, *, coverage: float) -> Path:
    """G0..G3 at every station along the seam: value with its expanded uncertainty, coloured by the
    decision, over the band from zero to the tolerance."""
    from matplotlib.lines import Line2D

    u = grade.units
    s = np.array([st.s for st in grade.stations])
    plt, fig = _figure(11.0, 9.0)
    axes = fig.subplots(4, 1, sharex=True, gridspec_kw={"hspace": 0.12, "left": 0.1, "right": 0.85,
                                                        "top": 0.91, "bottom": 0.07})
    names = ("gap", "angle", "curvature jump", "curvature-rate jump")
    for k, ax in enumerate(axes):
        results = [st.orders[k] for st in grade.stations]
        value = np.array([r.value for r in results])
        expanded = coverage * np.array([r.uncertainty for r in results])
        tolerance = np.array([r.tolerance for r in results])
        top = float(np.nanmax(np.where(np.isfinite(value + expanded), value + expanded, value)))
        edges = np.concatenate([[0.0], 0.5 * (s[1:] + s[:-1]), [max(grade.length, float(s[-1]))]])
        steps = np.append(tolerance, tolerance[-1])
        ax.fill_between(edges, 0.0, steps, step="post", color=STATUS_COLOURS[Status.OK], alpha=0.12, lw=0)
        ax.step(edges, steps, where="post", color=STATUS_COLOURS[Status.OK], lw=1.4)
        for status, colour in STATUS_COLOURS.items():
            pick = np.array([r.status == status for r in results])
            if pick.any():
                ax.errorbar(s[pick], value[pick], yerr=np.where(np.isfinite(expanded[pick]), expanded[pick], 0.0),
                            fmt="o", ms=5, color=colour, capsize=3, lw=1.2)
        unit = UNITS[k].format(u=u)
        ax.set_ylabel(f"{ORDERS[k]} {names[k]}\n[{unit}]")
        ax.grid(alpha=0.3)
        tol = float(np.nanmin(tolerance))
        if np.isfinite(top) and top > LOG_ABOVE * tol:
            ax.set_yscale("symlog", linthresh=tol, linscale=1.0)
            ax.set_ylim(0.0, 2.0 * top)
        else:
            ax.set_ylim(0.0, 1.15 * max(top if np.isfinite(top) else 0.0, float(np.nanmax(tolerance))))
        ax.text(1.015, 0.5, f"seam:\n{grade.orders[k].status}", transform=ax.transAxes, fontsize=11, va="center",
                color=STATUS_TEXT[grade.orders[k].status], fontweight="bold")
    axes[-1].set_xlabel(f"station position along the seam, s [{u}]")
    axes[-1].set_xlim(0.0, max(grade.length, float(s.max()) if len(s) else 0.0))
    handles = [Line2D([], [], color=STATUS_COLOURS[Status.OK], lw=1.4, label="tolerance (band: within)")]
    handles += [Line2D([], [], color=c, marker="o", ls="none", label=f"station {st}") for st, c in STATUS_COLOURS.items()]
    fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.1, 0.955), fontsize=10, frameon=False, ncols=4)
    fig.suptitle(f"{grade.id} ({grade.groups[0]} | {grade.groups[1]}): G0..G3 along the seam; error bars:"
                 f" expanded uncertainty (k = {coverage:g})", fontsize=12, x=0.02, ha="left")
    return _save(plt, fig, path)
