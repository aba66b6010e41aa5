"""Control limits of an individuals chart (Shewhart chart of single values with the moving range of
two consecutive values), ISO 7870-2:2023, "Control charts - Part 2: Shewhart control charts":
centre line the mean, limits centre +/- E2 * mean moving range, where E2 = 3 / d2 and d2 = 1.128 is
the mean range of two normal values in standard deviations."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

D2_OF_TWO = 1.128  # ISO 7870-2, table of control chart factors, n = 2
E2 = 3.0 / D2_OF_TWO  # 2.66


@dataclass(frozen=True)
class IndividualsLimits:
    """Centre line, mean moving range and the lower and upper control limits."""

    centre: float
    mean_moving_range: float
    lower: float
    upper: float

    def outside(self, values: np.ndarray) -> np.ndarray:
        """(n,) bool: the value lies beyond a control limit (NaN: never)."""
        values = np.asarray(values, dtype=float)
        with np.errstate(invalid="ignore"):
            return (values > self.upper) | (values < self.lower)


def individuals_limits(values) -> IndividualsLimits | None:
    """The individuals chart's limits of values in production order (ISO 7870-2).

    Parameters
    ----------
    values : array_like
        One value per part in lot order; NaN (not decided) values are left out, and the moving
        range runs over the values that remain, in order.

    Returns
    -------
    IndividualsLimits or None
        None with fewer than two values (no moving range).
    """
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    if len(x) < 2:
        return None
    centre = float(x.mean())
    moving = float(np.abs(np.diff(x)).mean())
    return IndividualsLimits(centre, moving, centre - E2 * moving, centre + E2 * moving)
