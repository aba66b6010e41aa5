"""Where numba keeps the compiled kernels of this package (``cache=True``).

numba writes its on-disk cache beside the source (``__pycache__``) or, failing that, in the user's
cache folder, and refuses to compile a cached kernel when neither is writable (a read-only install
under a home-less service account). use_writable_cache then points numba at a folder of its own under
the system's temporary folder, before any kernel is compiled.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numba
from numba.misc.appdirs import AppDirs

KERNELS = Path(__file__).resolve().parent  # the kernels of surfcheck.geometry live here


def use_writable_cache(kernels: Path = KERNELS) -> Path | None:
    """Set NUMBA_CACHE_DIR (and numba's config) to a temporary folder when numba's own places are
    not writable; the folder used, or None when numba's choice stands (or the user set one)."""
    if os.environ.get("NUMBA_CACHE_DIR") or numba.config.CACHE_DIR:
        return None
    if writable(kernels / "__pycache__") or writable(Path(AppDirs(appname="numba", appauthor=False).user_cache_dir)):
        return None
    folder = Path(tempfile.gettempdir()) / f"surfcheck-numba-{os.getuid() if hasattr(os, 'getuid') else 'user'}"
    if not writable(folder):
        return None  # numba will say it cannot cache; nothing better to offer
    os.environ["NUMBA_CACHE_DIR"] = str(folder)
    numba.config.CACHE_DIR = str(folder)
    return folder


def writable(folder: Path) -> bool:
    """Whether a file can be made in ``folder`` (created when missing), as numba itself checks."""
    try:
        folder.mkdir(parents=True, exist_ok=True)
        tempfile.TemporaryFile(dir=folder).close()
    except OSError:
        return False
    return True
