"""Reflection lines and isophotes across seams of known class, measured from the per-vertex fields.

Truth by construction (surfcheck.demo.shapes): a sharp corner is G0 (the normal jumps), an arc after a
line G1 (the curvature jumps from 0 to 1/r), a Hermite C^2 smooth-step curvature ramp after a line G3.
A reflection line or an isophote follows the normal, one order less continuous than the surface
(Klass 1980, CAD 12(2); Poeschl 1984, CAGD 1(2)): at the corner the stripe phase jumps, at the arc it
is continuous but its slope across the seam jumps (a kink), at the ramp both run on smoothly.

The phase and its slope at the seam are read on each side by a quadratic least-squares fit of the
per-vertex field along one row of the extrusion, from 1.5 fit radii to 1.5 fit radii + 1.5 mm away
from the seam (inside 1.5 radii the jet fits straddle the seam and round the break off). The same
reading of the field computed from the exact normals (the profile's heading) is the reference.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from PIL import Image
from scipy.spatial import cKDTree

from surfcheck.demo import shapes as S
from surfcheck.errors import InputError
from surfcheck.geometry.differential import principal_curvatures
from surfcheck.geometry.reflection import choose_lights, isophote_value, part_lights, reflection_parameter
from surfcheck.io import read_part, save_part
from surfcheck.part import Part
from surfcheck.review.render import STRIPE_COLOURS

EDGE, DEPTH, REACH = 0.2, 6.0, 3.0  # mm
WINDOW = 1.5  # mm of data per side beyond the fits' reach
PROFILES = {
    "corner": (S.line(8, "a"), S.corner(20), S.line(8, "b")),
    "arc": (S.line(8, "a"), S.arc(10, "b", angle_deg=40)),
    "smooth-step": (S.line(8, "a"), S.ramp(12, 0.0, 0.1, "b", order=2)),
}


def one_sided(s: np.ndarray, f: np.ndarray, gap: float) -> tuple[float, float]:
    """(jump, slope jump) of f at s = 0: side B's quadratic fit minus side A's, value and derivative."""
    ends = []
    for side in (-1.0, 1.0):
        pick = (side * s > gap) & (side * s < gap + WINDOW) & np.isfinite(f)
        coef = np.polyfit(s[pick], f[pick], 2)
        ends.append((coef[2], coef[1]))
    return ends[1][0] - ends[0][0], ends[1][1] - ends[0][1]


@pytest.fixture(scope="module")
def readings():
    """Per class: (jump, slope jump) of the reflection phase (stripes, stripes/mm) and the brightness
    (1, 1/mm) across the seam, from the jet-fit normals and from the exact normals."""
    out = {}
    for name, pieces in PROFILES.items():
        profile = S.Profile(pieces)
        mesh = S.extrude(profile, DEPTH, EDGE)
        V, F = mesh.vertices, mesh.faces
        fitted = principal_curvatures(V, F)
        s0 = mesh.seams[0].profile_s
        fine = np.linspace(0.0, sum(p.length for p in profile.body), 40001)
        levels = np.unique(V[:, 2])
        row = np.flatnonzero(np.abs(V[:, 2] - levels[len(levels) // 2]) < 1e-9)
        s = fine[cKDTree(profile.points(fine)).query(V[row, :2])[1]]
        heading = profile.heading(s)
        exact = np.column_stack([np.sin(heading), -np.cos(heading), np.zeros_like(s)])  # outward: right-hand
        centre = np.array([*profile.points(np.array([s0]))[0], V[row[0], 2]])
        near = np.linalg.norm(V - centre, axis=1) < REACH
        lights = choose_lights(V[near], fitted.normals[near], np.array([0.0, 0.0, 1.0]), centre, REACH)
        for label, normals in (("jet", fitted.normals[row]), ("exact", exact)):
            phase = reflection_parameter(V[row], normals, lights) / lights.spacing
            brightness = isophote_value(normals, lights.light)
            gap = 1.5 * fitted.radius
            out[name, label] = (one_sided(s - s0, phase, gap), one_sided(s - s0, brightness, gap))
    return out


def test_the_stripe_phase_breaks_at_the_corner(readings):
    (jump, _), (brightness, _) = readings["corner", "jet"]
    (exact, _), _ = readings["corner", "exact"]
    assert abs(jump) > 0.5  # more than half a stripe sideways: a visible break (measured 1.54)
    assert jump == pytest.approx(exact, abs=0.02)
    assert abs(brightness) > 0.1  # the brightness jumps with the normal (20 deg turn)


def test_the_stripe_kinks_at_the_arc(readings):
    (jump, slope), (_, brightness_slope) = readings["arc", "jet"]
    (_, exact_slope), (_, exact_brightness_slope) = readings["arc", "exact"]
    assert abs(jump) < 0.1  # continuous: no break (measured 0.045)
    assert abs(slope) > 0.2  # stripes per mm (measured 0.34)
    assert slope == pytest.approx(exact_slope, rel=0.05)
    assert brightness_slope == pytest.approx(exact_brightness_slope, rel=0.05)


def test_the_stripe_runs_on_smoothly_over_the_smooth_step(readings):
    (jump, slope), (brightness_jump, brightness_slope) = readings["smooth-step", "jet"]
    (_, arc_slope), (_, arc_brightness_slope) = readings["arc", "jet"]
    assert abs(jump) < 0.02  # stripes (measured 0.007)
    assert abs(slope) < 0.1 * abs(arc_slope)  # no kink: a tenth of the arc's (measured 0.014 against 0.34)
    assert abs(brightness_jump) < 0.002 and abs(brightness_slope) < 0.25 * abs(arc_brightness_slope)


def test_a_ray_that_misses_the_light_plane_has_no_value():
    lights = choose_lights(np.zeros((1, 3)), np.array([[0.0, 0.0, 1.0]]), np.array([1.0, 0.0, 0.0]),
                           np.zeros(3), 2.0)
    # a face turned past 45 deg mirrors the vertical view ray downwards, away from the plane above
    t = reflection_parameter(np.zeros((2, 3)), np.array([[0.0, 0.0, 1.0], [0.0, np.sin(1.0), np.cos(1.0)]]), lights)
    assert t[0] == pytest.approx(0.0, abs=1e-12) and np.isnan(t[1])


def test_bad_light_settings_are_input_errors():
    args = (np.zeros((1, 3)), np.array([[0.0, 0.0, 1.0]]), np.array([1.0, 0.0, 0.0]), np.zeros(3))
    for kwargs in ({"reach": 0.0}, {"reach": 1.0, "spacing": -1.0}, {"reach": 1.0, "line_direction": [0, 0, 1]},
                   {"reach": 1.0, "line_direction": [np.nan, 0, 0]}):
        with pytest.raises(InputError):
            choose_lights(*args, **kwargs)


def run_cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "surfcheck", *args], capture_output=True, text=True, timeout=600)


def test_map_writes_the_stripe_fields_as_the_other_quantities(tmp_path):
    # the CSV holds, per vertex, the reflection parameter of the part's default lights from its jet normals
    part = tmp_path / "arc.obj"
    mesh = S.extrude(S.Profile(PROFILES["arc"]), DEPTH, 0.4)
    save_part(Part(mesh.vertices, mesh.faces, mesh.face_group, mesh.group_names, "mm", "arc.obj"), part)
    for quantity in ("reflection", "isophote"):
        for suffix in (".csv", ".ply", ".png"):
            out = tmp_path / f"{quantity}{suffix}"
            run = run_cli("map", str(part), "--quantity", quantity, "--out", str(out))
            assert run.returncode == 0 and out.is_file(), run.stderr
    table = np.genfromtxt(tmp_path / "reflection.csv", delimiter=",", names=True)
    loaded = read_part(part).part
    normals = principal_curvatures(loaded.vertices, loaded.faces).normals
    expected = reflection_parameter(loaded.vertices, normals, part_lights(loaded.vertices, normals))
    np.testing.assert_allclose(table["reflection"], expected, rtol=1e-7, atol=1e-7)
    image = np.asarray(Image.open(tmp_path / "reflection.png").convert("RGB")).astype(float)
    stripe = np.array([int(STRIPE_COLOURS[0][k:k + 2], 16) for k in (1, 3, 5)], float)
    assert (np.linalg.norm(image - stripe, axis=2) < 40).sum() > 2000  # dark bands drawn (shaded at most a little)
    given = run_cli("map", str(part), "--quantity", "reflection", "--light", "0,0,1", "--stripes", "0.5",
                    "--out", str(tmp_path / "given.csv"))
    assert given.returncode == 0, given.stderr
    for bad in (["--light", "1,0"], ["--stripes", "-1"], ["--light", "0,0,0"]):
        run = run_cli("map", str(part), "--quantity", "reflection", *bad, "--out", str(tmp_path / "bad.csv"))
        assert run.returncode == 2 and run.stderr.startswith("error: ") and len(run.stderr.splitlines()) == 1
    run = run_cli("map", str(part), "--quantity", "mean", "--light", "0,0,1", "--out", str(tmp_path / "bad.csv"))
    assert run.returncode == 2 and not (tmp_path / "bad.csv").exists()
