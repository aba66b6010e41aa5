"""Writing the lot page: per seam its run chart and histogram of the worst G0, G1 and G2 values
(charts.py) beside DIR/index.html (page.py)."""

from __future__ import annotations

from datetime import datetime, timezone
from pathlib import Path

from surfcheck.version import __version__
from surfcheck.io import write_atomic
from surfcheck.review.page import Picture
from surfcheck.lots.charts import plot_histogram, plot_run_chart
from surfcheck.lots.control import individuals_limits
from surfcheck.lots.page import SeamReview, lot_page
from surfcheck.lots.series import seam_series, worst_parts
from surfcheck.lots.store import REVIEW_FOLDER, PartRecord, part_folder
from surfcheck.lots.yields import seam_yields

PAGE_FILE = "index.html"
CHARTED_ORDERS = ("G0", "G1", "G2")  # G0: a shell moving off its face drifts in the gap alone


def write_lot_page(out: Path, records: list[PartRecord], required: int | None, summary: dict,
                   context: dict) -> Path:
    """Draw each seam's charts into ``out`` and write the lot page ``out``/index.html.

    Parameters
    ----------
    out : Path
        The lot folder.
    records : list of PartRecord
        Every part of the lot, in lot order (the order the parts were given).
    required : int or None
        The required order.
    summary : dict
        run.LotResult.summary() of the lot.
    context : dict
        The request and the tool, shown as a table.

    Returns
    -------
    Path
        The page.
    """
    reviews = []
    for number, seam in enumerate(seam_yields(records, required), start=1):
        series = [seam_series(records, seam.seam, order) for order in CHARTED_ORDERS]
        run_file, histogram_file = f"seam-{number}-run.png", f"seam-{number}-histogram.png"
        plot_run_chart(series, out / run_file)
        plot_histogram(series, out / histogram_file)
        pictures = (
            Picture(run_file, f"{seam.seam}: the worst station's G0 gap, G1 angle and G2 curvature jump of each part, in"
                    " lot order, coloured by status (green ok, red fail, grey not resolved); red: the tolerance;"
                    " grey: the centre line; dashed: the control limits.", f"{seam.seam} run chart"),
            Picture(histogram_file, f"{seam.seam}: distribution of the worst G0, G1 and G2 values over the lot, with"
                    " the tolerance.", f"{seam.seam} histogram"),
        )
        limits = {s.order: individuals_limits(s.values) for s in series}
        beyond = {s.order: tuple(p for p, far in zip(s.parts, limits[s.order].outside(s.values)) if far)
                  if limits[s.order] else () for s in series}
        reviews.append(SeamReview(seam, pictures, limits, beyond))
    context = {**context, "surfcheck": __version__,
               "written": datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")}
    reviewed = {r.name for r in records if (part_folder(out, r.name) / REVIEW_FOLDER / PAGE_FILE).is_file()}
    page = lot_page(summary, reviews, worst_parts(records, required), context, reviewed)
    write_atomic(out / PAGE_FILE, page.encode("utf-8"))
    return out / PAGE_FILE
