"""The surfcheck command line: parses options, calls the library, prints or writes. No numerics here."""

from __future__ import annotations

import sys

import typer

from surfcheck.errors import SurfcheckError

app = typer.Typer(
    name="surfcheck",
    help="Grade G0-G3 continuity of fillets and blends on triangle meshes; build blend patches.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)


def main() -> None:
    """Entry point: every SurfcheckError becomes `error: ...` on stderr and exit code 2."""
    try:
        app(standalone_mode=False)
    except SurfcheckError as exc:
        print(f"error: {exc}", file=sys.stderr)
        sys.exit(2)
