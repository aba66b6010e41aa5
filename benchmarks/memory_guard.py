"""The memory guard's estimate (surfcheck.io.memory) against the memory each command really takes.

The demo housing (surfcheck.demo.scenario.housing_part) is built at several edge lengths and written
as binary PLY; each command runs on it in a subprocess and its peak resident memory is read from
getrusage (ru_maxrss through wait4). What the guard compares with the free memory is the need above
what the command already holds when the guard runs, so the command is started through a wrapper that
records its resident size (/proc/self/statm) at that moment, and that is taken off the peak. Prints
per command and size: triangles, measured need, the guard's estimate and their ratio (below 1: the
guard is on the safe side).

    python benchmarks/memory_guard.py [--edges 0.4 0.2 0.1]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from surfcheck.demo.scenario import housing_part  # noqa: E402
from surfcheck.io import save_part  # noqa: E402
from surfcheck.io.memory import needed_memory  # noqa: E402
from tests.fixtures.command_line import run_measured  # noqa: E402

MIB = 2.0 ** 20
# Runs the command line with the guard wrapped: the resident bytes when it is called go to argv[1].
AT_GUARD = """
import os, sys
import surfcheck.io.reading as reading
guard, record = reading.check_memory, sys.argv[1]
def recorded(*args):
    with open(record, "w") as out:
        out.write(str(int(open("/proc/self/statm").read().split()[1]) * os.sysconf("SC_PAGE_SIZE")))
    guard(*args)
reading.check_memory = recorded
sys.argv = ["surfcheck", *sys.argv[2:]]
from surfcheck.cli import main
main()
"""
COMMANDS = {  # name: (the guard's command, arguments after the part; {out} is a scratch folder)
    "inspect": ("inspect", []),
    "grade": ("grade", ["--seam", "all"]),
    "map (PLY)": ("map", ["--quantity", "jump", "--out", "{out}/jump.ply"]),
    "map (PNG)": ("map", ["--quantity", "jump", "--out", "{out}/jump.png"]),
    "report": ("report", ["--seam", "all", "--stations", "5", "--out", "{out}/review"]),
    "segment": ("segment", ["--out", "{out}/labelled.obj"]),
}


def main() -> None:
    options = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    options.add_argument("--edges", type=float, nargs="+", default=[0.4, 0.2, 0.1])
    args = options.parse_args()
    folder = Path(tempfile.mkdtemp())
    held = folder / "held.txt"
    parts = []
    for edge in args.edges:
        part = housing_part(edge=edge)
        path = folder / f"housing-{edge:g}.ply"
        save_part(part, path)
        parts.append((part.n_faces, path))
    print(f"{'command':<12} {'triangles':>10} {'measured MiB':>13} {'estimate MiB':>13} {'ratio':>6}")
    for label, (command, rest) in COMMANDS.items():
        for triangles, path in parts:
            program = [sys.executable, "-c", AT_GUARD, str(held), command, str(path), *[a.format(out=folder) for a in rest]]
            code, err, peak = run_measured([], folder, 1800, program=program)
            if code not in (0, 1):
                raise SystemExit(f"{label} on {path.name}: {err.strip()}")
            measured = peak - int(held.read_text())
            estimate = needed_memory(command, triangles, path.stat().st_size)
            print(f"{label:<12} {triangles:>10,} {measured / MIB:>13.0f} {estimate / MIB:>13.0f} {measured / estimate:>6.2f}")


if __name__ == "__main__":
    main()
