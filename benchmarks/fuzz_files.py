"""Run many damaged mesh files through the reader and count what happens.

The corpus is tests/fixtures/hostile_files.py (seeded mutations of small STL, OBJ and PLY files). Each
file goes through surfcheck.io.read_part in this process, with its time (perf_counter) and its peak of
traced allocations (tracemalloc, numpy's included) measured, stderr and warnings captured; a sample
also goes through `surfcheck inspect` in a subprocess. Prints: accepted, clean errors (one-line
InputError; of them how many only by the reader's catch-all), internal errors (any other exception),
tracebacks, multi-line output, warnings, the slowest file and the largest peak.

    python benchmarks/fuzz_files.py [--files 10000] [--seed 17] [--cli 30]
"""

from __future__ import annotations

import argparse
import contextlib
import io
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
import warnings
from collections import Counter
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.errors import InputError  # noqa: E402
from surfcheck.io import read_part  # noqa: E402
from surfcheck.io.plywalk import property_starts  # noqa: E402
from tests.fixtures.hostile_files import hostile_files  # noqa: E402


def read_one(path: Path) -> tuple[str, str, float, int]:
    """Outcome ('accepted', 'clean', 'catch-all', 'internal'), captured output, seconds, and the peak
    of traced allocations above what was held before the file."""
    captured = io.StringIO()
    tracemalloc.reset_peak()
    before = tracemalloc.get_traced_memory()[0]  # what is held already is not this file's
    start = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught, contextlib.redirect_stderr(captured):
        warnings.simplefilter("always")
        try:
            read_part(path)
            outcome, message = "accepted", ""
        except InputError as exc:
            outcome, message = ("catch-all" if "cannot be read as" in str(exc) else "clean"), str(exc)
        except Exception as exc:  # what the command line would call an internal error
            outcome, message = "internal", f"{type(exc).__name__}: {exc}"
    seconds = time.perf_counter() - start
    peak = tracemalloc.get_traced_memory()[1] - before
    output = captured.getvalue() + "".join(f"{w.category.__name__}: {w.message}\n" for w in caught)
    if message:
        output += f"error: {message}\n"
    return outcome, output, seconds, peak


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--files", type=int, default=10_000)
    parser.add_argument("--seed", type=int, default=17)
    parser.add_argument("--cli", type=int, default=30, help="files also run through `surfcheck inspect`")
    args = parser.parse_args()

    start = time.perf_counter()  # the compiled record walk loads (or compiles) once, not per file
    property_starts(np.frombuffer(bytes(4), np.uint8), 0, 1, np.array([1], np.int64), np.array([1], np.int64), False)
    warm_up = time.perf_counter() - start
    counts = Counter()
    slowest = (0.0, "")
    largest = (0, "")
    examples = {}
    tracemalloc.start()
    with tempfile.TemporaryDirectory() as folder:
        for number, sample in enumerate(hostile_files(args.files, seed=args.seed)):
            path = Path(folder) / f"{number}{sample.suffix}"
            path.write_bytes(sample.data)
            outcome, output, seconds, peak = read_one(path)
            counts[outcome] += 1
            counts["traceback"] += "Traceback" in output
            counts["multi-line"] += output.count("\n") > 1
            counts["warning"] += "Warning" in output
            counts["changed input"] += path.read_bytes() != sample.data
            if outcome in ("internal", "catch-all"):
                examples.setdefault(output.strip()[:160], f"{sample.encoding} {sample.mutation}")
            what = f"{sample.encoding} {sample.mutation} ({len(sample.data)} bytes)"
            slowest = max(slowest, (seconds, what))
            largest = max(largest, (peak, what))
            path.unlink()
        tracemalloc.stop()
        cli = Counter()
        for number, sample in enumerate(hostile_files(args.cli, seed=args.seed + 1)):
            path = Path(folder) / f"cli{number}{sample.suffix}"
            path.write_bytes(sample.data)
            result = subprocess.run([sys.executable, "-m", "surfcheck", "inspect", str(path)], capture_output=True,
                                    text=True, timeout=120, cwd=Path(__file__).resolve().parents[1])
            cli[f"exit {result.returncode}"] += 1
            cli["traceback"] += "Traceback" in result.stderr
            cli["internal error"] += "internal error" in result.stderr
            cli["multi-line"] += result.stderr.count("\n") > 1
            cli["changed input"] += path.read_bytes() != sample.data

    total = sum(counts[k] for k in ("accepted", "clean", "catch-all", "internal"))
    print(f"files read in process: {total} (seed {args.seed})")
    print(f"  accepted {counts['accepted']}, clean errors {counts['clean'] + counts['catch-all']}"
          f" (of which by the reader's catch-all {counts['catch-all']}), internal errors {counts['internal']}")
    print(f"  tracebacks {counts['traceback']}, multi-line {counts['multi-line']}, warnings {counts['warning']},"
          f" inputs changed {counts['changed input']}")
    print(f"  max time {slowest[0] * 1e3:.1f} ms ({slowest[1]}), max traced peak above baseline {largest[0] / 1e6:.2f} MB"
          f" ({largest[1]})")
    print(f"  loading the compiled PLY record walk, once before the files: {warm_up * 1e3:.0f} ms")
    print(f"  process peak resident size {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")
    for text, where in list(examples.items())[:10]:
        print(f"  example [{where}]: {text}")
    print(f"command line `inspect` on {args.cli} files: " + ", ".join(f"{k} {v}" for k, v in sorted(cli.items())))


if __name__ == "__main__":
    main()
