"""Per-vertex scalar fields by name, with their units and sign: what `surfcheck map` writes and
render.py paints (the stripe fields, isophote and reflection, as stripes)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from surfcheck.geometry.differential import principal_curvatures
from surfcheck.errors import InputError
from surfcheck.geometry.jumpfield import jump_fields
from surfcheck.geometry.reflection import isophote_value, part_lights, reflection_parameter
from surfcheck.part import Part

# quantity -> (unit pattern, signed, description)
QUANTITIES = {
    "k1": ("1/{u}", True, "larger principal curvature"),
    "k2": ("1/{u}", True, "smaller principal curvature"),
    "mean": ("1/{u}", True, "mean curvature (k1 + k2) / 2"),
    "gaussian": ("1/{u}^2", True, "Gaussian curvature k1 k2"),
    "jump": ("1/{u}", False, "curvature jump (one-sided fits)"),
    "tangent-jump": ("deg", False, "tangent jump (one-sided normals)"),
    "isophote": ("1", True, "isophote brightness n . L (jet-fit normals)"),
    "reflection": ("{u}", False, "reflection-line parameter (jet-fit normals)"),
}
_CURVATURES = ("k1", "k2", "mean", "gaussian")
_JUMPS = ("jump", "tangent-jump")
_STRIPES = ("isophote", "reflection")


@dataclass(frozen=True)
class VertexField:
    """A named per-vertex field with its unit (in the part's units) and whether it is signed."""

    quantity: str
    values: np.ndarray
    unit: str
    signed: bool
    description: str
    radius: float = float("nan")  # neighbourhood radius of the fits that gave it (part units)
    stripes: float | None = None  # a stripe field's level spacing (in its unit), drawn as stripes


def _values(V: np.ndarray, F: np.ndarray, quantities, radius: float | None, lights: dict | None = None
            ) -> dict[str, tuple[np.ndarray, float, float | None]]:
    """The named fields, the neighbourhood radius of each and, for a stripe field, its level spacing;
    the jet fits and the jump fits each run once, whatever is asked of them. ``lights``: keywords of
    reflection.part_lights (line_direction, spacing, light) for the stripe fields."""
    unknown = [q for q in quantities if q not in QUANTITIES]
    if unknown:
        raise InputError(f"unknown quantity {unknown[0]!r}: choose one of {', '.join(QUANTITIES)}")
    out = {}
    if any(q in _CURVATURES + _STRIPES for q in quantities):
        c = principal_curvatures(V, F, radius)
        out.update({q: (v, c.radius, None) for q, v in zip(_CURVATURES, (c.k1, c.k2, c.mean, c.gaussian))})
    if any(q in _STRIPES for q in quantities):
        setup = part_lights(V, c.normals, **(lights or {}))
        out["isophote"] = (isophote_value(c.normals, setup.light), c.radius, setup.isophote_step)
        out["reflection"] = (reflection_parameter(V, c.normals, setup), c.radius, setup.spacing)
    if any(q in _JUMPS for q in quantities):
        jumps = jump_fields(V, F, radius)
        out.update({"jump": (jumps.curvature, jumps.radius, None), "tangent-jump": (jumps.tangent, jumps.radius, None)})
    return {q: out[q] for q in quantities}


def field_values(
    V: np.ndarray, F: np.ndarray, quantity: str, units: str = "mm", radius: float | None = None
) -> tuple[np.ndarray, str]:
    """The field ``quantity`` (one of QUANTITIES) at every vertex and its unit label.

    k1, k2, mean and gaussian come from the jet fits (surfcheck.geometry.differential.principal_curvatures),
    isophote and reflection from their normals (surfcheck.geometry.reflection, lights from the whole
    part), jump and tangent-jump from the one-sided fits (surfcheck.geometry.jumpfield.jump_fields). ``radius`` is the
    neighbourhood radius in part units (None: the default rule). NaN marks vertices without a value.
    """
    values = _values(V, F, [quantity], radius)[quantity][0]
    return values, QUANTITIES[quantity][0].format(u=units)


def vertex_fields(part: Part, quantities, radius: float | None = None, lights: dict | None = None
                  ) -> dict[str, VertexField]:
    """Several named fields of a part (see QUANTITIES), sharing their fits; ``lights`` sets up the
    stripe fields (keywords of reflection.part_lights)."""
    values = _values(part.vertices, part.faces, list(quantities), radius, lights)
    out = {}
    for quantity, (v, used, stripes) in values.items():
        unit, signed, description = QUANTITIES[quantity]
        out[quantity] = VertexField(quantity, v, unit.format(u=part.units), signed, description, used, stripes)
    return out


def vertex_field(part: Part, quantity: str, lights: dict | None = None) -> VertexField:
    """One named per-vertex field of a part (see QUANTITIES)."""
    return vertex_fields(part, [quantity], lights=lights)[quantity]
