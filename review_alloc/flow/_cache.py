"""Where numba keeps the engine's compiled kernels: a per-user folder, resolved without numba.

Numba writes its cache beside the source file by default, which fails when the package sits in a
read-only site-packages; a per-user cache also survives reinstalls of the same version. Nothing
here imports numba or changes the environment: `_jit.py` hands the folder to numba when the first
kernel module is imported, and `compile.py` passes it to its child processes.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path


def _temp_cache_dir() -> Path:
    user = str(os.getuid()) if hasattr(os, "getuid") else os.environ.get("USERNAME", "user")
    return Path(tempfile.gettempdir()) / f"review-alloc-{user}" / "numba"


def numba_cache_dir() -> Path:
    """The folder review-alloc keeps numba's compiled kernels in: the platform's per-user
    cache folder (platformdirs: `$XDG_CACHE_HOME/review-alloc` or `~/.cache/review-alloc` on
    Linux, the usual places on macOS and Windows), then `numba`."""
    from platformdirs import user_cache_path

    folder = user_cache_path("review-alloc", appauthor=False)
    if not folder.is_absolute():
        # Without a home folder (some service accounts), a per-user temp folder still works.
        return _temp_cache_dir()
    return folder / "numba"


def user_cache_dir() -> str:
    """The cache folder the user chose with NUMBA_CACHE_DIR, or '' when they chose none."""
    return os.environ.get("NUMBA_CACHE_DIR", "")


def cache_folder() -> Path:
    """The folder the kernels are cached in: the user's choice, else `numba_cache_dir()`.

    The per-user folder is created here; where that fails (a read-only home), a per-user temp
    folder is used instead.
    """
    chosen = user_cache_dir()
    if chosen:
        return Path(chosen)
    folder = numba_cache_dir()
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError:
        folder = _temp_cache_dir()
        folder.mkdir(parents=True, exist_ok=True)
    return folder
