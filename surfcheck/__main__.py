"""The `surfcheck` command and `python -m surfcheck`: the command line, with Ctrl-C answered by one line
on stderr and exit code 130 (128 + SIGINT, the shells' convention) at any moment, imports included."""

import signal
import sys


class Interrupted(BaseException):
    """Ctrl-C. Not a KeyboardInterrupt, which the option parser would turn into 'Aborted!' and exit 1;
    a BaseException, so that nothing on the way out takes it for an error (writers still clean up)."""


def _interrupt(signum, frame):
    raise Interrupted()


def run() -> None:
    """Run the command line; exit 130 with `error: interrupted` on Ctrl-C."""
    signal.signal(signal.SIGINT, _interrupt)
    try:
        from surfcheck.cli import main

        main()
    except Interrupted:
        print("error: interrupted", file=sys.stderr)
        sys.exit(130)


if __name__ == "__main__":
    run()
