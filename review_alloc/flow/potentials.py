"""Shortest-path potentials of a residual network by queue-based Bellman-Ford, as numba kernels.

Potentials `pot` meet the reduced-cost conditions of a flow when every arc with residual capacity
has `cost + pot[tail] - pot[head] >= 0`: shortest-path distances in the residual graph are such
potentials, and they exist exactly when no residual cycle has negative cost. Cost scaling uses the
pass to turn its scaled prices into exact integer potentials, to test early whether a flow is
optimal already, and (with lengthened arcs) to look for starting prices.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from review_alloc.flow._jit import HELPER_OPTIONS, KERNEL_OPTIONS

NO_FLOOR = np.int64(np.iinfo(np.int64).min)
"""The `floor` of a shortest-path pass that needs none."""


@njit(**HELPER_OPTIONS)
def bellman_ford(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
    budget: int,
    floor: int,
) -> bool:
    """Queue-based Bellman-Ford lowering `pot`; False on a negative cycle or past `budget` arcs.

    `budget` <= 0 means no limit on the arcs scanned. Also False once a potential would drop
    below `floor`, which bounds every value (a walk around a negative cycle cannot overflow).
    """
    n = start.size - 1
    queue = np.empty(n, dtype=np.int64)
    queued = np.ones(n, dtype=np.bool_)
    lowered = np.zeros(n, dtype=np.int64)
    for v in range(n):
        queue[v] = v
    q_head = 0
    q_tail = 0
    size = n
    work = 0
    while size > 0:
        u = queue[q_head]
        q_head += 1
        if q_head == n:
            q_head = 0
        size -= 1
        queued[u] = False
        pu = pot[u]
        if budget > 0:
            work += start[u + 1] - start[u]
            if work > budget:
                return False
        for a in range(start[u], start[u + 1]):
            if cap[a] > 0:
                v = head[a]
                reach = pu + cost[a]
                if reach < pot[v]:
                    if reach < floor:
                        return False
                    pot[v] = reach
                    lowered[v] += 1
                    if lowered[v] > n:
                        return False
                    if not queued[v]:
                        queue[q_tail] = v
                        q_tail += 1
                        if q_tail == n:
                            q_tail = 0
                        size += 1
                        queued[v] = True
    return True


@njit(**KERNEL_OPTIONS)
def exact_potentials(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
    budget: int,
    floor: int,
) -> bool:
    """Lower `pot` to shortest-path potentials of the residual graph (queue-based Bellman-Ford).

    Starting from nearly valid potentials, only the few arcs still at negative reduced cost set
    corrections off. Returns False if some node is lowered more than n times (a negative
    residual cycle, so the flow was not optimal), below `floor`, or, when `budget` > 0, once
    more than `budget` arcs were scanned.
    """
    return bellman_ford(start, head, cap, cost, pot, budget, floor)
