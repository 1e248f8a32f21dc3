"""numba's options for the engine's kernels; importing this module points numba's cache at ours.

Every kernel module imports its options from here, so the cache folder is in force before any
`@njit(cache=True)` function is decorated: numba fixes a kernel's cache location when the
decorator runs, from `numba.config.CACHE_DIR` (read from NUMBA_CACHE_DIR when numba is imported).
Setting `config.CACHE_DIR` rather than the environment variable leaves the process environment
as it was; numba re-reads its settings from the environment only when some NUMBA_ variable
changes, and kernels decorated before that keep their location anyway.
"""

from __future__ import annotations

from numba.core import config

from review_alloc.flow._cache import cache_folder


def configure_numba_cache() -> str:
    """Point numba's cache at the per-user folder unless the user chose one; return the folder.

    A NUMBA_CACHE_DIR in the environment, or a `numba.config.CACHE_DIR` set by the program, wins.
    """
    if not config.CACHE_DIR:
        # A NUMBA_CACHE_DIR set after numba was imported has not reached its config yet.
        config.CACHE_DIR = str(cache_folder())
    return str(config.CACHE_DIR)


configure_numba_cache()

if config.DISABLE_JIT:
    # With NUMBA_DISABLE_JIT=1 every kernel runs as plain Python, which cannot call numba's
    # intrinsics: kernels take `trailing_zeros` from here and so get the plain-Python version.
    from review_alloc.flow.interpreted import trailing_zeros
else:
    from numba.cpython.unsafe.numbers import trailing_zeros

__all__ = ["HELPER_OPTIONS", "KERNEL_OPTIONS", "configure_numba_cache", "trailing_zeros"]

KERNEL_OPTIONS: dict[str, bool] = {"cache": True, "nogil": True, "no_cfunc_wrapper": True}
"""numba options of a kernel called from Python.

`nogil` lets a caller's worker thread solve while other threads keep running. numba builds a C
callback wrapper for every compiled function by default (for use as a first-class function
value), which nothing here uses; `no_cfunc_wrapper` skips that part of every cold compile.
"""

HELPER_OPTIONS: dict[str, bool] = {**KERNEL_OPTIONS, "no_cpython_wrapper": True}
"""numba options of a helper called only from other kernels: it needs no Python entry point
either (the option numba's own `overload` helpers use), so none is compiled. Calling such a
helper from Python raises; keep these for functions that only kernels call."""
