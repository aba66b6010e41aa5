"""The jump fields on synthetic fillets whose continuity is known by construction.

Profiles are built from a prescribed curvature along arc length (the natural equation of a plane curve)
and extruded: plane, circular arc of radius r, plane (curvature jumps from 0 to 1/r at the two tangent
lines: a handbook fact of the circle, G1 but not G2); plane, smooth-step curvature ramp, plane
(curvature continuous with a continuous derivative: G3); and a sharp 90 degree edge (G0 only).
"""

from __future__ import annotations

import numpy as np
import pytest

from surfcheck.geometry.differential import vertex_normals
from surfcheck.errors import InputError
from surfcheck.geometry.jumpfield import curvature_jump_field, jump_fields, tangent_jump_field
from tests.fixtures.surfaces import extruded_profile, random_rotation, smooth_step

r = 1.0  # fillet radius
FLAT = 2.0  # length of each plane beside the blend
EDGE = 0.04  # spacing of the profile stations (about r / 25)
ACROSS = 50  # stations along the extrusion


def arc(s):
    return np.where((s >= FLAT) & (s <= FLAT + 0.5 * np.pi * r), 1.0 / r, 0.0)


RAMP = 0.5 * np.pi * r  # each ramp: the curvature rises to 1/r over this length, then falls back


def ramp(s):
    return (smooth_step((s - FLAT) / RAMP) - smooth_step((s - FLAT - RAMP) / RAMP)) / r


def sharp(s):
    return np.where(np.abs(s - FLAT) < 5e-4, 0.5 * np.pi / 1e-3, 0.0)  # 90 degrees within 1 micron


def build(curvature, length, spacing=EDGE, noise=0.0, seed=3):
    stations = int(round(length / spacing)) + 1
    V, F, s = extruded_profile(curvature, length, 2.0, stations, ACROSS)
    if noise:
        V = V + np.random.default_rng(seed).normal(0.0, noise, len(V))[:, None] * vertex_normals(V, F)
    middle = np.tile((np.arange(ACROSS) > 12) & (np.arange(ACROSS) < ACROSS - 13), stations)
    return V @ random_rotation(seed).T, F, s, middle  # randomly rotated: no axis is special


def per_station(field, s, middle):
    """Largest value at each profile station over the middle of the extrusion; -inf where none."""
    stations, where = np.unique(np.round(s[middle], 9), return_inverse=True)
    best = np.full(len(stations), -np.inf)
    np.fmax.at(best, where, field[middle])  # NaN (no trusted cut, at the open ends) is skipped
    return stations, best


@pytest.mark.parametrize("spacing", [EDGE, 1.09 * EDGE])  # tangent lines on a vertex row, and between rows
def test_circular_fillet_jump_peaks_on_both_tangent_lines(spacing):
    V, F, s, middle = build(arc, 2 * FLAT + 0.5 * np.pi * r, spacing)
    jf = jump_fields(V, F)
    stations, jump = per_station(jf.curvature, s, middle)
    near = lambda line: np.abs(stations - line) <= spacing  # noqa: E731
    first, second = FLAT, FLAT + 0.5 * np.pi * r
    # the true jump is 1/r at each tangent line (circle of radius r against a plane)
    assert jump[near(first)].max() > 0.75 / r and jump[near(second)].max() > 0.75 / r
    away = ~(np.abs(stations - first) <= jf.radius) & ~(np.abs(stations - second) <= jf.radius)
    assert jump[away].max() < 0.1 / r  # no jump on the arc or on the planes
    # the jump runs across the tangent lines: 'across' is perpendicular to the extrusion
    axis = random_rotation(3) @ np.array([0.0, 0.0, 1.0])
    on_line = middle & (np.abs(s - first) <= spacing / 2 + 1e-9)
    assert np.abs(jf.across[on_line] @ axis).max() < 0.1


def test_smooth_step_blend_shows_no_curvature_jump():
    V, F, s, middle = build(ramp, 2 * FLAT + 2 * RAMP)
    stations, jump = per_station(curvature_jump_field(V, F), s, middle)
    # curvature is continuous (G3 by construction); the field must stay far below the 1/r it reaches
    assert jump.max() < 0.1 / r
    for line in (FLAT, FLAT + 2 * RAMP):  # where the ramps start and end: no peak either
        assert jump[np.abs(stations - line) <= EDGE].max() < 0.05 / r


def test_tangent_jump_finds_a_sharp_edge_and_not_a_fillet():
    V, F, s, middle = build(sharp, 2 * FLAT)
    stations, angle = per_station(tangent_jump_field(V, F), s, middle)
    at_edge = np.abs(stations - FLAT) <= EDGE
    assert angle[at_edge].max() == pytest.approx(90.0, abs=3.0)  # the edge's angle, by construction
    assert angle[np.abs(stations - FLAT) > 0.5].max() < 1.0
    V, F, s, middle = build(arc, 2 * FLAT + 0.5 * np.pi * r)
    assert np.nanmax(tangent_jump_field(V, F)[middle]) < 2.0  # tangent continuous (G1) fillet


def test_fillet_peaks_survive_mild_noise():
    noise = 0.0005 * r  # 1/80 of an edge along the normal
    V, F, s, middle = build(arc, 2 * FLAT + 0.5 * np.pi * r, noise=noise)
    jf = jump_fields(V, F)
    stations, jump = per_station(jf.curvature, s, middle)
    lines = (np.abs(stations - FLAT) <= EDGE) | (np.abs(stations - FLAT - 0.5 * np.pi * r) <= EDGE)
    far = ~(np.abs(stations - FLAT) <= jf.radius) & ~(np.abs(stations - FLAT - 0.5 * np.pi * r) <= jf.radius)
    assert jump[lines].min() > 2.0 * np.percentile(jump[far], 95)
    V, F, s, middle = build(ramp, 2 * FLAT + 2 * RAMP, noise=noise)
    _, smooth = per_station(curvature_jump_field(V, F), s, middle)
    assert smooth.max() < jump[lines].min()


def test_open_boundary_yields_no_spurious_jump():
    V, F, s, middle = build(ramp, 2 * FLAT + 2 * RAMP)
    field = curvature_jump_field(V, F)
    # all vertices, the open edges of the curved blend included: the curvature is continuous there too
    assert np.nanmax(field) < 0.1 / r
    # where no cut has trusted data on both sides (at the open edges) the field is NaN, not a guess
    inner = middle & (s > 0.5) & (s < s.max() - 0.5)  # half a unit away from the profile's open ends
    assert np.isfinite(field[inner]).all() and np.isnan(field).mean() < 0.25


def test_bad_arguments_are_input_errors():
    V, F, _, _ = build(arc, 2 * FLAT + 0.5 * np.pi * r)
    with pytest.raises(InputError):
        jump_fields(V, F, directions=0)
    with pytest.raises(InputError):
        jump_fields(V, F, degree=6)
    with pytest.raises(InputError):
        jump_fields(V, F, radius=0.0)


def test_vertex_field_names_and_units():
    from surfcheck.geometry.fields import QUANTITIES
    from surfcheck.geometry.fields import field_values as vertex_field
    from tests.fixtures.surfaces import sphere

    s = sphere(2.0, 4)
    for quantity in QUANTITIES:
        values, unit = vertex_field(s.V, s.F, quantity, units="mm")
        assert values.shape == (len(s.V),) and unit in ("1/mm", "1/mm^2", "deg", "1", "mm")
    gaussian, unit = vertex_field(s.V, s.F, "gaussian")
    assert unit == "1/mm^2" and np.median(gaussian) == pytest.approx(0.25, rel=0.02)  # K = 1/R^2
    with pytest.raises(InputError):
        vertex_field(s.V, s.F, "torsion")
