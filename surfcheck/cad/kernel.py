"""Running the kernel quietly: OpenCASCADE writes its progress and parse errors to the process's
standard output, which must stay clean (``--json`` prints one document there)."""

from __future__ import annotations

import contextlib
import os
import sys


@contextlib.contextmanager
def silenced():
    """Send file descriptor 1 (where the kernel's C++ streams write) to the null device meanwhile."""
    sys.stdout.flush()
    saved = os.dup(1)
    null = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(null, 1)
        yield
    finally:
        os.dup2(saved, 1)
        os.close(saved)
        os.close(null)
