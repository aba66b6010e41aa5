"""Per-vertex fields by name, for maps and heatmaps: the quantity, its values, unit and sign."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.differential import principal_curvatures
from surfcheck.errors import InputError
from surfcheck.part import Part

# quantity -> (unit pattern, signed, description)
QUANTITIES = {
    "k1": ("1/{u}", True, "larger principal curvature"),
    "k2": ("1/{u}", True, "smaller principal curvature"),
    "mean": ("1/{u}", True, "mean curvature (k1 + k2) / 2"),
    "gaussian": ("1/{u}^2", True, "Gaussian curvature k1 k2"),
}


@dataclass(frozen=True)
class VertexField:
    """A named per-vertex field with its unit (in the part's units) and whether it is signed."""

    quantity: str
    values: np.ndarray
    unit: str
    signed: bool
    description: str


def vertex_field(part: Part, quantity: str) -> VertexField:
    """Compute the named per-vertex field on a part (see QUANTITIES)."""
    if quantity not in QUANTITIES:
        raise InputError(f"unknown quantity {quantity!r}: use one of {', '.join(QUANTITIES)}")
    unit, signed, description = QUANTITIES[quantity]
    curvature = principal_curvatures(part.vertices, part.faces)
    values = {"k1": curvature.k1, "k2": curvature.k2, "mean": curvature.mean, "gaussian": curvature.gaussian}
    return VertexField(quantity, values[quantity], unit.format(u=part.units), signed, description)
