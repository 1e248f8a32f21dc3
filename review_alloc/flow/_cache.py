"""Point numba's JIT cache at a per-user folder before numba is imported.

Numba writes its cache beside the source file by default, which fails when the package sits in a
read-only site-packages; a per-user cache also survives reinstalls of the same version.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path


def _temp_cache_dir() -> Path:
    user = str(os.getuid()) if hasattr(os, "getuid") else os.environ.get("USERNAME", "user")
    return Path(tempfile.gettempdir()) / f"review-alloc-{user}" / "numba"


def numba_cache_dir() -> Path:
    """The folder review-alloc keeps numba's compiled kernels in, following XDG conventions."""
    base = os.environ.get("XDG_CACHE_HOME")
    if base:
        return Path(base) / "review-alloc" / "numba"
    try:
        return Path.home() / ".cache" / "review-alloc" / "numba"
    except RuntimeError:
        # Without a home folder (some service accounts), a per-user temp folder still works.
        return _temp_cache_dir()


def configure_numba_cache() -> None:
    """Set NUMBA_CACHE_DIR unless the user already chose one."""
    if os.environ.get("NUMBA_CACHE_DIR"):
        return
    folder = numba_cache_dir()
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError:
        folder = _temp_cache_dir()
        folder.mkdir(parents=True, exist_ok=True)
    os.environ["NUMBA_CACHE_DIR"] = str(folder)
    if "numba" in sys.modules:
        # numba reads its settings once at import; keep an earlier import consistent with ours.
        from numba.core import config

        if not config.CACHE_DIR:
            config.CACHE_DIR = str(folder)


KERNEL_OPTIONS: dict[str, bool] = {"cache": True, "nogil": True, "no_cfunc_wrapper": True}
"""numba options of a kernel called from Python.

`nogil` lets the TUI's worker thread solve while the screen keeps drawing. numba builds a C
callback wrapper for every compiled function by default (for use as a first-class function
value), which nothing here uses; `no_cfunc_wrapper` skips that part of every cold compile.
"""

HELPER_OPTIONS: dict[str, bool] = {**KERNEL_OPTIONS, "no_cpython_wrapper": True}
"""numba options of a helper called only from other kernels: it needs no Python entry point
either (the option numba's own `overload` helpers use), so none is compiled. Calling such a
helper from Python raises; keep these for functions that only kernels call."""
