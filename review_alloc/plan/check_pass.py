"""The checker's kernel: the optimality conditions of every pair arc in one pass.

Imported on first need only (`plan.checker` loads it inside the check of a re-plan), so that
importing the planner does not import numba; `review_alloc.flow._jit` is imported first, which
points numba's cache at the per-user folder before the kernel is decorated.

The pair block holds nearly all of a large network's arcs (3 M of 3.07 M on the L benchmarks).
Checked with numpy, each condition is a pass over those arrays with a temporary array per
operation; comparing them with a previous check's arrays to look only at what changed reads even
more (the old and the new bounds and costs). One fused pass reads each array once.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from review_alloc.flow._jit import KERNEL_OPTIONS

BAD_TAIL, BAD_HEAD, BELOW_LOWER, ABOVE_CAPACITY, CAN_RISE, CAN_FALL = range(6)
"""The kinds of fault the kernel reports, indexes into its result."""


@njit(**KERNEL_OPTIONS)
def pair_block_faults(
    tails: np.ndarray,
    heads: np.ndarray,
    capacities: np.ndarray,
    lower: np.ndarray,
    costs: np.ndarray,
    potentials: np.ndarray,
    start: int,
    used: np.ndarray,
) -> np.ndarray:
    """For each fault kind, the first pair position (arc `start + k`) that shows it, else -1.

    Pair k carries flow 1 where `used[k]`, else 0. Kinds: a tail, a head outside the nodes;
    flow below the lower bound; above the capacity; below the capacity with reduced cost
    `cost + pot[tail] - pot[head]` < 0; above the lower bound with reduced cost > 0.
    """
    first = np.full(6, -1, np.int64)
    n = len(potentials)
    for k in range(len(used)):
        a = start + k
        t = tails[a]
        h = heads[a]
        if t < 0 or t >= n or h < 0 or h >= n:
            if (t < 0 or t >= n) and first[BAD_TAIL] < 0:
                first[BAD_TAIL] = k
            if (h < 0 or h >= n) and first[BAD_HEAD] < 0:
                first[BAD_HEAD] = k
            continue
        x = 1 if used[k] else 0
        low = lower[a]
        cap = capacities[a]
        if x < low and first[BELOW_LOWER] < 0:
            first[BELOW_LOWER] = k
        if x > cap and first[ABOVE_CAPACITY] < 0:
            first[ABOVE_CAPACITY] = k
        reduced = costs[a] + potentials[t] - potentials[h]
        if x < cap and reduced < 0 and first[CAN_RISE] < 0:
            first[CAN_RISE] = k
        if x > low and reduced > 0 and first[CAN_FALL] < 0:
            first[CAN_FALL] = k
    return first


def exercise() -> None:
    """Compile (or load) the kernel on a one-arc case, with the dtypes the checker passes
    (int64 arrays and a bool mask, all read-only views: see `plan.checker`)."""

    def read_only(array: np.ndarray) -> np.ndarray:
        view = array.view()
        view.flags.writeable = False
        return view

    arc = read_only(np.zeros(1, np.int64))
    pair_block_faults(
        arc, read_only(np.ones(1, np.int64)), arc, arc, arc, read_only(np.zeros(2, np.int64)),
        np.int64(0), read_only(np.zeros(1, np.bool_)),
    )
