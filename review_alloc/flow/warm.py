"""Compile (or load from the cache) every kernel ahead of the first real solve."""

from __future__ import annotations

import threading

import numpy as np

from review_alloc.flow.dinic import dinic_kernel, reachable_kernel
from review_alloc.flow.maxflow import max_flow
from review_alloc.flow.mincost import min_cost_flow, primal_dual_kernel
from review_alloc.flow.network import _csr_kernel

_KERNELS = (_csr_kernel, dinic_kernel, reachable_kernel, primal_dual_kernel)
_lock = threading.Lock()


def kernels_ready() -> bool:
    """Whether every kernel is already compiled or loaded in this process."""
    return all(kernel.signatures for kernel in _KERNELS)


def warm_up() -> None:
    """Run each solver once on a tiny graph so that later calls start at full speed."""
    with _lock:
        # Path 0 -> 1 -> 2 plus a direct edge; the lower bound exercises the circulation stage.
        tails = np.array([0, 1, 0], dtype=np.int64)
        heads = np.array([1, 2, 2], dtype=np.int64)
        capacities = np.array([2, 2, 1], dtype=np.int64)
        max_flow(3, tails, heads, capacities, 0, 2)
        max_flow(3, tails, heads, capacities, 0, 2, lower=np.array([1, 0, 0], dtype=np.int64))
        min_cost_flow(
            3,
            np.append(tails, 2),
            np.append(heads, 0),
            np.append(capacities, 3),
            np.array([1, 1, 3, -4], dtype=np.int64),
        )
