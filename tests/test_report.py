"""The review folder: index.html parses as HTML5, every picture and link it names exists beside it,
headless Chromium loads it with every picture and renders it, result.json is the document
`grade --json` prints, and the command line behaves like `grade`."""

from __future__ import annotations

import html
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path
from urllib.parse import unquote, urlparse

import html5lib
import jsonschema
import numpy as np
import pytest
from PIL import Image

from surfcheck.grading.run import GradeOptions, grade_part
from surfcheck.io import save_part
from surfcheck.review.folder import write_report
from surfcheck.grading.document import run_document
from surfcheck.seams import SeamIndex
from surfcheck.grading.tolerances import load_profile
from tests.fixtures.blend_parts import blend_part
from tests.fixtures.grade_schema import grade_document_schema

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None)
STATIONS = 3
PARAMETERS = {"seams": ["all"], "nominal": None}


def run_cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "surfcheck", *args], capture_output=True, text=True, timeout=600)


@pytest.fixture(scope="module")
def review(tmp_path_factory):
    """The review of both seams of the circular fillet part, written once."""
    part = blend_part("fillet")
    profile = load_profile("general")
    run = grade_part(part, SeamIndex(part).seams, profile, GradeOptions(stations=STATIONS))
    out = tmp_path_factory.mktemp("review")
    page = write_report(run, 2, out, parameters=PARAMETERS, quiet=True)
    return {"page": page, "out": out, "document": run_document(run, 2, PARAMETERS)}


def test_the_page_shows_the_grading_options_that_were_used(tmp_path):
    # a wider strip and a shorter reach given to the grading reach the page and result.json, and the
    # stations drawn are the graded ones (their count and the data points of each side)
    part = blend_part("fillet")
    seam = SeamIndex(part).seams[0]
    options = GradeOptions(stations=5, strip=0.9, reach=2.5)
    run = grade_part(part, [seam], load_profile("general"), options)
    write_report(run, None, tmp_path, parameters=PARAMETERS, quiet=True)
    document = json.loads((tmp_path / "result.json").read_text())
    assert document["parameters"]["strip"] == 0.9 and document["parameters"]["reach"] == 2.5
    graded = document["seams"][0]["station_values"]
    assert len(graded) == 5
    assert [s["points"] for s in graded] == [list(st.result.counts) for st in run.seams[0].stations]
    default = grade_part(part, [seam], load_profile("general"), GradeOptions(stations=5)).seams[0]
    assert [s["points"] for s in graded] != [list(st.result.counts) for st in default.stations]
    page = (tmp_path / "index.html").read_text()
    assert "<th>strip</th><td>0.9</td>" in page and "<th>reach</th><td>2.5</td>" in page


def references(page: Path) -> list[tuple[str, str]]:
    """(tag, address) of every src and href in the page, parsed by html5lib's strict HTML5 parser
    (which raises on any parse error: the WHATWG HTML standard's parsing rules)."""
    tree = html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(page.read_bytes())
    return [(el.tag, el.get(attr)) for el in tree.iter() for attr in ("src", "href") if el.get(attr) is not None]


def test_page_parses_as_html5_and_names_only_files_beside_it(review):
    refs = references(review["page"])
    files = [address for _, address in refs if not address.startswith("#")]
    images = [address for tag, address in refs if tag == "img"]
    assert len(images) == 2 + 4 * 2  # two whole-part maps, four pictures per seam
    assert "result.json" in files
    for address in files:
        parsed = urlparse(address)
        assert not parsed.scheme and not parsed.netloc, address  # nothing from outside
        assert (review["out"] / unquote(parsed.path)).is_file(), address
    anchors = {address[1:] for _, address in refs if address.startswith("#")}
    tree = html5lib.parse(review["page"].read_bytes(), namespaceHTMLElements=False)
    ids = {el.get("id") for el in tree.iter() if el.get("id")}
    assert anchors <= ids  # every in-page link has its target
    assert not [el for el in tree.iter() if el.tag in ("script", "link", "iframe")]  # self-contained


def test_page_states_verdict_seams_parameters_and_caution(review):
    text = review["page"].read_text(encoding="utf-8")
    document = review["document"]
    for seam in document["seams"]:
        assert f'id="{seam["id"]}"' in text
    assert f"Requirement G2: {document['verdict']}" in text
    assert document["caution"][:60] in text
    assert document["advice"]  # the circular fillet is G1: both seams fail G2 (curvature 1/r on one side)
    for item in document["advice"]:
        assert html.escape(item["text"]) in text  # each seam short of G3 says what to do
    assert "surfcheck 0." in text and "numpy" in text  # tool and library versions


def test_parameters_read_as_words_and_the_grey_band_is_a_length(review):
    text = review["page"].read_text(encoding="utf-8")
    table = text.split('id="parameters"', 1)[1]
    assert "<th>seams</th><td>all seams</td>" in table  # not the Python list ['all']
    assert "<th>nominal</th><td>none</td>" in table and "<th>spacing</th><td>two strip widths" in table
    assert "<th>search</th><td>off</td>" in table
    assert "None" not in table and "[&#x27;" not in table and "False" not in table
    # the band without a value is the fits' radius wide: a length in the part's units (mm), never degrees
    radii = re.findall(r"fits&#x27; radius, ([0-9.e+-]+) ([a-z]+), of an open boundary", text)
    assert radii and all(unit == "mm" for _, unit in radii), radii


def test_page_opens_with_how_to_read_it(review):
    text = review["page"].read_text(encoding="utf-8")
    box = text.split('id="reading"', 1)[1].split("</section>", 1)[0]
    assert text.index('id="reading"') < text.index('id="verdict"')
    for word in ("breaks", "kinks", "G0", "G1", "G2", "Heatmaps", "Reflection lines"):
        assert word in box


def test_result_json_is_the_grade_document(review):
    written = json.loads((review["out"] / "result.json").read_text())
    assert written == json.loads(json.dumps(review["document"]))


def test_pictures_are_pngs_that_are_not_blank(review):
    for path in review["out"].glob("*.png"):
        image = np.asarray(Image.open(path).convert("RGB")).astype(float)
        assert image.std() > 20.0, path.name  # common practice, no published source


def chromium(*args: str, timeout: int = 120) -> subprocess.CompletedProcess:
    with tempfile.TemporaryDirectory() as profile:
        flags = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync",
                 f"--user-data-dir={profile}"]
        return subprocess.run([CHROMIUM, *flags, *args], capture_output=True, text=True, timeout=timeout)


@pytest.fixture
def browser():
    if CHROMIUM is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is missing in CI: .ci/run installs the Debian package `chromium`")
        pytest.skip("chromium is not installed (apt-get install chromium)")
    return chromium


def test_chromium_loads_every_picture(review, browser, tmp_path):
    """A page beside the review loads it in a frame and lists each picture Chromium decoded (complete,
    with a natural width) or failed to; --dump-dom prints the list once the loads are done."""
    harness = tmp_path / "harness.html"
    harness.write_text(
        '<!DOCTYPE html><html><head><meta charset="utf-8"><title>check</title></head><body><pre id="out">pending</pre>'
        f'<iframe id="page" src="{review["page"].as_uri()}"></iframe><script>'
        'document.getElementById("page").addEventListener("load", function () {'
        '  var images = this.contentDocument.images, out = [];'
        '  for (var i = 0; i < images.length; i++) {'
        '    out.push((images[i].complete && images[i].naturalWidth > 0 ? "loaded " : "missing ") + images[i].getAttribute("src"));'
        '  }'
        '  document.getElementById("out").textContent = "images " + images.length + "\\n" + out.join("\\n");'
        "});</script></body></html>", encoding="utf-8")
    run = browser("--allow-file-access-from-files", "--virtual-time-budget=20000", "--dump-dom", harness.as_uri())
    listing = run.stdout.split('<pre id="out">', 1)[-1].split("</pre>", 1)[0].splitlines()
    assert listing[0] == "images 10", run.stdout[-2000:] + run.stderr[-2000:]
    assert all(line.startswith("loaded ") for line in listing[1:]), listing


def test_chromium_screenshot_is_not_blank(review, browser, tmp_path):
    shot = tmp_path / "page.png"
    run = browser(f"--screenshot={shot}", "--window-size=1280,2400", review["page"].as_uri())
    assert shot.is_file(), run.stderr[-2000:]
    image = np.asarray(Image.open(shot).convert("RGB")).astype(float)
    assert image.shape[:2] == (2400, 1280)
    assert image.std() > 20.0  # text, tables and pictures; a page that failed to load is one colour
    assert (image.min(axis=2) < 128).mean() > 0.02  # a fair share of dark pixels: text and pictures


def test_report_command_writes_the_review_and_exits_like_grade(tmp_path):
    part = tmp_path / "fillet.obj"
    save_part(blend_part("fillet"), part)
    args = [str(part), "--seam", "a:blend", "--stations", str(STATIONS), "--require", "G3"]
    graded = run_cli("grade", *args, "--json", "--report", str(tmp_path / "graded"))
    assert graded.returncode in (0, 1), graded.stderr
    document = json.loads(graded.stdout)  # stdout stays one JSON document while the review is written
    jsonschema.validate(document, grade_document_schema())  # as documented (docs/grade.schema.json)
    assert graded.returncode == (1 if document["verdict"] == "fail" else 0)  # 0 pass, 1 fails the requirement
    assert json.loads((tmp_path / "graded" / "result.json").read_text()) == document
    out = tmp_path / "review"
    reported = run_cli("report", *args, "--out", str(out))
    assert reported.returncode == graded.returncode, reported.stderr
    assert json.loads((out / "result.json").read_text()) == document
    assert (out / "index.html").is_file() and "review page:" in reported.stdout


def test_report_into_a_file_is_a_one_line_error(tmp_path):
    part = tmp_path / "fillet.obj"
    save_part(blend_part("fillet"), part)
    taken = tmp_path / "taken"
    taken.write_text("keep me")
    run = run_cli("report", str(part), "--seam", "all", "--out", str(taken))
    assert run.returncode == 2
    assert run.stderr.startswith("error: ") and len(run.stderr.strip().splitlines()) == 1
    assert taken.read_text() == "keep me"


def test_report_of_a_scan_through_its_nominal_names_the_nominal_groups(tmp_path):
    # the demo's scan (no groups) and its nominal part (surfcheck.demo.scenario): the review grades the seam the
    # user named by the nominal's group names, and records the alignment it used
    samples = Path(__file__).resolve().parents[1] / "sample_meshes"
    out = tmp_path / "review"
    run = run_cli("report", str(samples / "housing-scan.stl"), "--nominal", str(samples / "housing.obj"),
                  "--seam", "top:front-blend", "--tolerance", "scan", "--out", str(out))
    assert run.returncode == 0, run.stderr
    document = json.loads((out / "result.json").read_text())
    jsonschema.validate(document, grade_document_schema())
    assert [seam["groups"] for seam in document["seams"]] == [["top", "front-blend"]]
    assert document["parameters"]["nominal"].endswith("housing.obj")
    assert document["parameters"]["alignment"]["rms"] < 0.05  # a 0.01 mm noise scan (demo.SCAN_NOISE)
