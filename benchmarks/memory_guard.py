"""The memory guard's estimate (surfcheck.io.memory) against the memory each command really takes.

The demo housing (surfcheck.demo.scenario.housing_part) is built at several edge lengths and written
as binary PLY; each command runs on it in a subprocess and its peak resident memory is read from
getrusage (ru_maxrss through wait4). What the guard compares with the free memory is the need above
what the command already holds when it reads the part, so the peak of the same command on a tiny
part (the circular fillet of tests/fixtures/blend_parts.py, 2,928 triangles) is taken off. Prints per
command and size: triangles, measured need, the guard's estimate and their ratio (below 1: the guard
is on the safe side).

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
from tests.fixtures.blend_parts import blend_part  # noqa: E402
from tests.fixtures.command_line import run_measured  # noqa: E402

MIB = 2.0 ** 20
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
    tiny = folder / "tiny.ply"
    save_part(blend_part("fillet"), tiny)
    parts = []
    for edge in args.edges:
        part = housing_part(edge=edge)
        path = folder / f"housing-{edge:g}.ply"
        save_part(part, path)
        parts.append((part.n_faces, path))
    print(f"{'command':<12} {'triangles':>10} {'measured MiB':>13} {'estimate MiB':>13} {'ratio':>6}")
    for label, (command, rest) in COMMANDS.items():
        def peak(path: Path) -> int:
            code, err, used = run_measured([command, str(path), *[a.format(out=folder) for a in rest]], folder, 1800)
            if code not in (0, 1):
                raise SystemExit(f"{label} on {path.name}: {err.strip()}")
            return used

        base = peak(tiny)
        for triangles, path in parts:
            measured = peak(path) - base
            estimate = needed_memory(command, triangles, path.stat().st_size)
            print(f"{label:<12} {triangles:>10,} {measured / MIB:>13.0f} {estimate / MIB:>13.0f} {measured / estimate:>6.2f}")


if __name__ == "__main__":
    main()
