"""Compile (or load from the cache) every kernel ahead of the first real solve.

`warm_up()` is safe to call from a background thread (the kernels release the GIL while they
run, and a lock keeps two warm-ups from compiling at once). After a warm-up that succeeded, a
small marker file in the cache folder lets `solver_cache_ready()` tell, without importing or
compiling anything, whether the next process will load the kernels from disk.
"""

from __future__ import annotations

import hashlib
import os
import platform
import threading
from pathlib import Path

import numba
import numpy as np

from review_alloc import __version__
from review_alloc.flow.costscaling import cost_scaling_kernel, exact_potentials
from review_alloc.flow.dinic import dinic_kernel, reachable_kernel
from review_alloc.flow.maxflow import max_flow
from review_alloc.flow.mincost import min_cost_flow, primal_dual_kernel
from review_alloc.flow.network import _csr_kernel

_KERNELS = (
    _csr_kernel,
    dinic_kernel,
    reachable_kernel,
    primal_dual_kernel,
    cost_scaling_kernel,
    exact_potentials,
)
_lock = threading.Lock()


def kernels_ready() -> bool:
    """Whether every kernel is already compiled or loaded in this process."""
    return all(kernel.signatures for kernel in _KERNELS)


def _marker() -> Path:
    """The marker file for this package version, numba, Python and kernel sources."""
    key = hashlib.sha256()
    key.update(f"{__version__}|{numba.__version__}|{platform.python_version()}".encode())
    # numba drops a cached kernel when its source file changes, so the marker follows them too.
    for source in sorted(Path(__file__).parent.glob("*.py")):
        stat = source.stat()
        key.update(f"|{source.name}:{stat.st_size}:{stat.st_mtime_ns}".encode())
    folder = Path(os.environ.get("NUMBA_CACHE_DIR") or numba.config.CACHE_DIR or ".")
    return folder / f"review-alloc-ready-{key.hexdigest()[:16]}"


def solver_cache_ready() -> bool:
    """Whether a warm-up already filled the on-disk kernel cache for this exact installation."""
    try:
        return _marker().is_file()
    except OSError:
        return False


def warm_up() -> None:
    """Run each solver once on a tiny graph so that later calls start at full speed."""
    with _lock:
        # Path 0 -> 1 -> 2 plus a direct edge; the lower bound exercises the circulation stage.
        tails = np.array([0, 1, 0], dtype=np.int64)
        heads = np.array([1, 2, 2], dtype=np.int64)
        capacities = np.array([2, 2, 1], dtype=np.int64)
        max_flow(3, tails, heads, capacities, 0, 2)
        max_flow(3, tails, heads, capacities, 0, 2, lower=np.array([1, 0, 0], dtype=np.int64))
        circulation = (
            np.append(tails, 2),
            np.append(heads, 0),
            np.append(capacities, 3),
            np.array([1, 1, 3, -4], dtype=np.int64),
        )
        for method in ("cost-scaling", "primal-dual"):
            min_cost_flow(3, *circulation, method=method)
        if kernels_ready() and not solver_cache_ready():
            try:
                _marker().touch()
            except OSError:
                # A read-only cache folder only costs the message being shown again.
                return
