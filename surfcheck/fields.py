"""Per-vertex scalar fields by name, with their units: what `surfcheck map` writes and render.py paints."""

from __future__ import annotations

import numpy as np

from surfcheck.differential import principal_curvatures
from surfcheck.errors import InputError
from surfcheck.jumpfield import jump_fields

QUANTITIES = ("k1", "k2", "mean", "gaussian", "jump", "tangent-jump")


def vertex_field(
    V: np.ndarray, F: np.ndarray, quantity: str, units: str = "mm", radius: float | None = None
) -> tuple[np.ndarray, str]:
    """The field ``quantity`` (one of QUANTITIES) at every vertex and its unit label.

    k1, k2, mean and gaussian come from the jet fits (surfcheck.differential.principal_curvatures),
    jump and tangent-jump from the one-sided fits (surfcheck.jumpfield.jump_fields). ``radius`` is the
    neighbourhood radius in part units (None: the default rule). NaN marks vertices without a value.
    """
    if quantity not in QUANTITIES:
        raise InputError(f"unknown quantity {quantity!r}: choose one of {', '.join(QUANTITIES)}")
    if quantity in ("jump", "tangent-jump"):
        jumps = jump_fields(V, F, radius)
        return (jumps.curvature, f"1/{units}") if quantity == "jump" else (jumps.tangent, "deg")
    c = principal_curvatures(V, F, radius)
    values = {"k1": c.k1, "k2": c.k2, "mean": c.mean, "gaussian": c.gaussian}[quantity]
    return values, (f"1/{units}^2" if quantity == "gaussian" else f"1/{units}")
