"""The interactive 3D view: one self-contained HTML file (vtk.js and the scene inline, nothing fetched
from outside) that headless Chromium draws offline: the canvas shows the field's colours and the
failing seam's red tube, and the console shows no error."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile

import numpy as np
import pytest
from PIL import Image

from surfcheck.geometry.fields import vertex_field
from surfcheck.review.render import SeamOverlay, colour_limits, overview_views
from surfcheck.seams import SeamIndex
from tests.fixtures.blend_parts import blend_part

view3d = pytest.importorskip("surfcheck.review.view3d")
CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None)


@pytest.fixture(scope="module")
def page(tmp_path_factory):
    if not view3d.available():
        pytest.skip("trame-vtk is not installed")
    part = blend_part("fillet")
    field = vertex_field(part, "jump")
    seams = [SeamOverlay(s.points, tuple("fail" if i % 2 else "ok" for i in range(len(s.points))), s.id)
             for s in SeamIndex(part).seams]
    path = tmp_path_factory.mktemp("view") / "part-3d.html"
    return view3d.write_view(part.vertices, part.faces, field.values, path, seams=seams,
                             limits=colour_limits(field.values, False), view=overview_views(part.vertices, part.faces)[0])


def test_the_view_is_one_file_that_fetches_nothing(page):
    text = page.read_text(encoding="utf-8")
    assert not re.search(r"<(script|img|iframe)[^>]*\ssrc=", text)  # every script inline
    assert not re.search(r"<link[^>]*\shref=", text)
    assert "kitware.github.io/vtk-js/icon" not in text  # the viewer's favicon address, replaced
    assert "OfflineLocalView.load" in text and len(text) > 100_000  # vtk.js and the scene embedded


def test_chromium_draws_the_part_and_the_seams_offline(page, tmp_path):
    if CHROMIUM is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is missing in CI: .ci/run installs the Debian package `chromium`")
        pytest.skip("chromium is not installed (apt-get install chromium)")
    shot = tmp_path / "view.png"
    with tempfile.TemporaryDirectory() as profile:
        flags = ["--headless", "--no-sandbox", "--use-angle=swiftshader", "--enable-unsafe-swiftshader",
                 "--no-first-run", "--disable-background-networking", "--disable-component-update",
                 "--disable-sync", "--enable-logging=stderr", "--v=0",
                 f"--user-data-dir={profile}", "--window-size=1000,700", "--virtual-time-budget=20000"]
        run = subprocess.run([CHROMIUM, *flags, f"--screenshot={shot}", page.as_uri()], capture_output=True,
                             text=True, timeout=180)
    assert shot.is_file(), run.stderr[-2000:]
    console = [line for line in run.stderr.splitlines() if ":CONSOLE" in line]
    assert not [line for line in console if re.search(r"error|uncaught", line, re.I)], console
    image = np.asarray(Image.open(shot).convert("RGB")).astype(float)
    r, g, b = image[..., 0], image[..., 1], image[..., 2]
    coloured = image.max(axis=2) - image.min(axis=2) > 40  # the field (viridis, lit): saturated, not white or grey
    assert coloured.mean() > 0.05  # a blank or failed canvas is all white; common practice, no published source
    red = (r > 120) & (g < 0.5 * r) & (b < 0.6 * r)  # the failing stations' tube (#d7263d, lit); viridis has no red
    assert red.sum() > 5
