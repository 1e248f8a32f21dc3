"""Cost-scaling push-relabel for min-cost circulations (Goldberg and Tarjan), as numba kernels.

Costs are multiplied by `factor` (more than the number of nodes), so that prices with every
residual arc at reduced cost >= -1 make the flow exactly optimal: a residual cycle of at most
`factor - 1` arcs then costs more than -1 in original units, hence >= 0. Each phase divides the
tolerance epsilon by `alpha`: it saturates every residual arc of negative reduced cost, then
discharges the nodes left with excess in FIFO order, pushing along admissible arcs (reduced cost
< 0) and relabelling a node to the largest price that makes one of its arcs admissible.

The kernels only change flow and prices, so they need a feasible flow to start from (the front
door routes the supplies with Dinic first); afterwards `exact_potentials` turns the scaled prices
into integer potentials that meet the reduced-cost conditions on the original costs exactly.
"""

from __future__ import annotations

import numpy as np
from numba import njit

PRICE_LIMIT = 2**61
"""A price beyond this aborts the kernel, which then reports failure instead of overflowing."""


@njit(cache=True, nogil=True)
def _relabel(
    u: int,
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    scaled: np.ndarray,
    price: np.ndarray,
    eps: int,
) -> int:
    """The largest price of u that keeps every residual arc out of u epsilon-optimal, minus eps."""
    best = -(2**62)
    for b in range(start[u], start[u + 1]):
        if cap[b] > 0:
            candidate = price[head[b]] - scaled[b]
            if candidate > best:
                best = candidate
    return best - eps


@njit(cache=True, nogil=True)
def cost_scaling_kernel(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    rev: np.ndarray,
    cost: np.ndarray,
    price: np.ndarray,
    factor: int,
    alpha: int,
    eps_start: int,
) -> tuple[bool, int, int]:
    """Turn a feasible circulation into an optimal one; return (ok, phases, relabels).

    `price` holds scaled prices (in units of cost / factor) and is updated in place; the flow is
    in `cap`. `eps_start` <= 0 means "the largest scaled cost", the tolerance every flow meets
    with zero prices. `ok` is False only if a price left the safe range (the flow is then still
    feasible, but not known to be optimal).
    """
    n = start.size - 1
    scaled = cost * factor
    eps = eps_start
    if eps <= 0:
        eps = 1
        for a in range(head.size):
            if abs(scaled[a]) > eps:
                eps = abs(scaled[a])
    excess = np.zeros(n, dtype=np.int64)
    current = np.empty(n, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    queued = np.zeros(n, dtype=np.bool_)
    phases = 0
    relabels = 0
    while eps > 1:
        eps = max(1, eps // alpha)
        phases += 1
        # Saturating every arc of negative reduced cost makes the pseudoflow 0-optimal.
        for u in range(n):
            pu = price[u]
            for a in range(start[u], start[u + 1]):
                r = cap[a]
                if r > 0:
                    v = head[a]
                    if scaled[a] + pu - price[v] < 0:
                        cap[a] = 0
                        cap[rev[a]] += r
                        excess[u] -= r
                        excess[v] += r
        q_head = 0
        q_tail = 0
        size = 0
        for u in range(n):
            current[u] = start[u]
            if excess[u] > 0:
                queue[q_tail] = u
                q_tail += 1
                size += 1
                queued[u] = True
        if q_tail == n:
            q_tail = 0
        while size > 0:
            u = queue[q_head]
            q_head += 1
            if q_head == n:
                q_head = 0
            size -= 1
            queued[u] = False
            end = start[u + 1]
            while excess[u] > 0:
                pu = price[u]
                a = current[u]
                while a < end:
                    r = cap[a]
                    if r > 0:
                        v = head[a]
                        if scaled[a] + pu - price[v] < 0:
                            d = min(r, excess[u])
                            cap[a] -= d
                            cap[rev[a]] += d
                            excess[u] -= d
                            excess[v] += d
                            if excess[v] > 0 and not queued[v] and v != u:
                                queue[q_tail] = v
                                q_tail += 1
                                if q_tail == n:
                                    q_tail = 0
                                size += 1
                                queued[v] = True
                            if excess[u] == 0:
                                break
                    a += 1
                current[u] = a
                if excess[u] > 0:
                    price[u] = _relabel(u, start, head, cap, scaled, price, eps)
                    current[u] = start[u]
                    relabels += 1
                    if price[u] < -PRICE_LIMIT:
                        return False, phases, relabels
    return True, phases, relabels


@njit(cache=True, nogil=True)
def exact_potentials(
    start: np.ndarray, head: np.ndarray, cap: np.ndarray, cost: np.ndarray, pot: np.ndarray
) -> bool:
    """Lower `pot` to shortest-path potentials of the residual graph (queue-based Bellman-Ford).

    Starting from nearly valid potentials, only the few arcs still at negative reduced cost set
    corrections off. Returns False if some node is lowered more than n times: a negative
    residual cycle, so the flow was not optimal.
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
    while size > 0:
        u = queue[q_head]
        q_head += 1
        if q_head == n:
            q_head = 0
        size -= 1
        queued[u] = False
        pu = pot[u]
        for a in range(start[u], start[u + 1]):
            if cap[a] > 0:
                v = head[a]
                reach = pu + cost[a]
                if reach < pot[v]:
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
