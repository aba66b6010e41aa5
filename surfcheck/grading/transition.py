"""The true transition along a seam's section: on scanned parts the group labels may sit an edge or
two off the place where the geometry changes.

The section's points (both sides, each vertex once) are split at candidate positions within
+-SEARCH_EDGES edge lengths of the labelled seam, and each part is fitted with a cubic height over
its side's first reference (sidefit.initial_reference): a segmented regression with an unknown
breakpoint (Hudson 1966, J. Amer. Statist. Assoc. 61:1097). Every candidate splits the same points, so
the residual sums of squares compare. The split moves only when it lowers the sum by more than
SEARCH_THRESHOLD residual variances (about the 0.99 quantile of chi-squared with the two cubics' 8
coefficients); ties go to the smaller shift.
"""

from __future__ import annotations

import numpy as np

from surfcheck.grading import sidefit
from surfcheck.grading.sections import Section

SEARCH_EDGES = 2.0  # the transition search spans +-2 edge lengths
SEARCH_STEP_EDGES = 0.25
SEARCH_WINDOW_EDGES = 8.0
SEARCH_FLOOR = 1e-3  # a shift must beat residuals of this fraction of an edge length: a cubic over
# a few edges misfits a clean, curving surface by about as much, and that is no evidence of a shift
SEARCH_THRESHOLD = 20.0  # ~ chi-squared(8) 0.99 quantile; in units of the residual variance


def _merged(section: Section) -> np.ndarray:
    """Both sides' section points, each vertex once."""
    _, first = np.unique(np.concatenate([section.ids_a, section.ids_b]), return_index=True)
    return np.concatenate([section.side_a, section.side_b])[first]


def find_transition(section: Section) -> float:
    """Offset along the section's x of the best split between the sides (see the module docstring);
    0.0 when no shift is significant."""
    h = section.edge
    xy = _merged(section)
    window = SEARCH_WINDOW_EDGES * h
    xy = xy[np.abs(xy[:, 0]) <= window + SEARCH_EDGES * h]
    x = xy[:, 0]
    if len(x) < 24:
        return 0.0
    # each side's overall direction (one pass): a corner inside a side's data must not turn it
    heights = [sidefit.heights(xy, sidefit.initial_reference(xy[x <= 0.0], np.zeros(2), -1.0, h, passes=1)),
               sidefit.heights(xy, sidefit.initial_reference(xy[x >= 0.0], np.zeros(2), 1.0, h, passes=1))]

    def rss(delta: float) -> float:
        total = 0.0
        for (t, w), part in zip(heights, (x < delta, x >= delta)):
            if part.sum() < 8:
                return np.inf
            A = np.vander(t[part] / window, 4, increasing=True)
            r = w[part] - A @ np.linalg.lstsq(A, w[part], rcond=None)[0]
            total += float(r @ r)
        return total

    steps = np.arange(-SEARCH_EDGES, SEARCH_EDGES + 1e-9, SEARCH_STEP_EDGES) * h
    steps = steps[np.argsort(np.abs(steps), kind="stable")]
    scores = np.array([rss(float(delta)) for delta in steps])
    best = float(scores.min())
    if not np.isfinite(best):
        return 0.0
    sigma2 = max(best / (len(x) - 8), (SEARCH_FLOOR * h) ** 2)
    k = int(np.flatnonzero(scores <= best + sigma2)[0])
    return float(steps[k]) if scores[0] - scores[k] > SEARCH_THRESHOLD * sigma2 else 0.0


def split_at(section: Section, delta: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Both sides' data re-split at x = delta (each vertex once), and the data point nearest the split."""
    xy = _merged(section)
    below = xy[:, 0] < delta
    return xy[below], xy[~below], xy[np.argmin(np.abs(xy[:, 0] - delta))]
