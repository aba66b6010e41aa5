"""SIGKILL `report` at many moments and count what its review folder is afterwards.

The part is the circular fillet of tests/fixtures/blend_parts.py (two seams, three stations). It is
reported for both seams once (to time a run), then for one seam (the old folder); then `report` of
both seams is started again and again
and killed (SIGKILL) at a moment drawn uniformly over one full run's measured duration. After each
kill the folder is the old one (byte for byte), the new one complete (tests/fixtures/review_folders),
or anything else (mixed or damaged: the failure this guards against); the kills that came while a
staging folder of that run existed are counted. After the last, one run completes and what is left
beside the folder (staging or aside folders) is counted.

    python benchmarks/report_kills.py [--kills 30] [--seed 5]
"""

from __future__ import annotations

import argparse
import random
import signal
import subprocess
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.io import save_part  # noqa: E402
from tests.fixtures.blend_parts import blend_part  # noqa: E402
from tests.fixtures.command_line import command  # noqa: E402
from tests.fixtures.review_folders import assert_complete, leftovers, snapshot  # noqa: E402

REPORT = ("--stations", "3")


def classify(out: Path, old: dict[str, str]) -> str:
    """'old', 'new' (complete, both seams) or 'other'."""
    if out.is_dir() and snapshot(out) == old:
        return "old"
    try:
        assert_complete(out, ["seam-1", "seam-2"])
    except (AssertionError, OSError, ValueError):
        return "other"
    return "new"


def main() -> None:
    options = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    options.add_argument("--kills", type=int, default=30)
    options.add_argument("--seed", type=int, default=5)
    args = options.parse_args()
    folder = Path(tempfile.mkdtemp())
    part, out = folder / "fillet.obj", folder / "review"
    save_part(blend_part("fillet"), part)
    new_run = command("report", str(part), "--seam", "all", *REPORT, "--out", str(out))
    subprocess.run(new_run, capture_output=True, check=False)  # compiles and caches the kernels
    started = time.perf_counter()
    subprocess.run(new_run, capture_output=True, check=False)
    duration = time.perf_counter() - started
    subprocess.run(command("report", str(part), "--seam", "seam-1", *REPORT, "--out", str(out)),
                   capture_output=True, check=False)  # the old folder: one seam
    old = snapshot(out)
    draws = random.Random(args.seed)
    states, writing = Counter(), 0
    for _ in range(args.kills):
        before = set(leftovers(out))  # a former kill's, removed when this run starts writing
        process = subprocess.Popen(new_run, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        time.sleep(draws.uniform(0.0, duration))
        writing += bool(set(leftovers(out)) - before) and process.poll() is None
        process.send_signal(signal.SIGKILL)
        process.wait()
        states[classify(out, old)] += 1
    subprocess.run(new_run, capture_output=True, check=False)
    print(f"one full run {duration:.1f} s; {args.kills} kills at uniform moments within it")
    print(f"after a kill: old folder {states['old']}, new complete {states['new']}, other {states['other']};"
          f" {writing} kills while the folder was being written")
    print(f"after the next complete run: {classify(out, old)} folder, {len(leftovers(out))} staging or aside left")


if __name__ == "__main__":
    main()
