"""Cost-scaling push-relabel for min-cost circulations (Goldberg and Tarjan), as numba kernels.

Costs are multiplied by `factor` (more than the number of nodes), so that prices with every
residual arc at reduced cost >= -1 make the flow exactly optimal: a residual cycle of at most
`factor - 1` arcs then costs more than -1 in original units, hence >= 0. Each phase divides the
tolerance epsilon by `alpha`: it saturates every residual arc of negative reduced cost, then
discharges the nodes left with excess (last in, first out), pushing along admissible arcs
(reduced cost < 0) and relabelling a node to the largest price that makes one of its arcs
admissible.

The kernels only change flow and prices, so they need a feasible flow to start from (the front
door routes the supplies with Dinic first); afterwards `exact_potentials` turns the scaled prices
into integer potentials that meet the reduced-cost conditions on the original costs exactly.
"""

from __future__ import annotations

import numpy as np
from numba import njit
from numba.cpython.unsafe.numbers import trailing_zeros

from review_alloc.flow._cache import HELPER_OPTIONS, KERNEL_OPTIONS

PRICE_LIMIT = 2**61
"""A price beyond this aborts the kernel, which then reports failure instead of overflowing."""


_ONE = np.uint64(1)

NO_FLOOR = np.int64(np.iinfo(np.int64).min)
"""The `floor` of a shortest-path pass that needs none."""


@njit(**KERNEL_OPTIONS)
def _live_bits(cap: np.ndarray) -> np.ndarray:
    """One bit per arc, set where the arc has residual capacity (64 arcs to a word)."""
    live = np.zeros((cap.size + 63) // 64 + 1, dtype=np.uint64)
    for a in range(cap.size):
        if cap[a] > 0:
            live[a >> 6] |= _ONE << np.uint64(a & 63)
    return live


@njit(**KERNEL_OPTIONS)
def _next_live(live: np.ndarray, a: int, end: int) -> int:
    """The first arc in `a:end` with residual capacity, or `end`.

    A node's arcs are contiguous, so one word covers up to 64 of them: a paper's many reverse
    arcs, almost all empty, are skipped a word at a time without reading their capacities.
    """
    while a < end:
        word = live[a >> 6] >> np.uint64(a & 63)
        if word != 0:
            return min(a + np.int64(trailing_zeros(word)), end)
        a = (a | 63) + 1
    return end


@njit(**HELPER_OPTIONS)
def _relabel(
    u: int,
    start: np.ndarray,
    head: np.ndarray,
    live: np.ndarray,
    cost: np.ndarray,
    factor: int,
    price: np.ndarray,
    eps: int,
    current: np.ndarray,
) -> int:
    """A new price for u, which has no admissible arc; `current[u]` moves to its first new one.

    Lowering by eps keeps every residual arc epsilon-optimal (all have reduced cost >= 0), so
    the scan stops at the first arc that this makes admissible, as OR-Tools' relabel does;
    only when there is none is the largest epsilon-optimal drop needed (all arcs scanned).
    Returns -(2**62) - eps when u has no residual arc at all.
    """
    floor = price[u] - eps
    best = -(2**62)
    end = start[u + 1]
    b = _next_live(live, start[u], end)
    while b < end:
        candidate = price[head[b]] - np.int64(cost[b]) * factor
        if candidate > floor:
            current[u] = b
            return floor
        if candidate > best:
            best = candidate
        b = _next_live(live, b + 1, end)
    current[u] = start[u]
    return best - eps


@njit(**HELPER_OPTIONS)
def _has_admissible(
    v: int,
    start: np.ndarray,
    head: np.ndarray,
    live: np.ndarray,
    cost: np.ndarray,
    factor: int,
    price: np.ndarray,
    current: np.ndarray,
) -> bool:
    """Whether v has an admissible arc at or after its current arc (moving the pointer to it)."""
    pv = price[v]
    end = start[v + 1]
    a = _next_live(live, current[v], end)
    while a < end:
        if np.int64(cost[a]) * factor + pv - price[head[a]] < 0:
            current[v] = a
            return True
        a = _next_live(live, a + 1, end)
    current[v] = end
    return False


@njit(**KERNEL_OPTIONS)
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
    lookahead: bool,
    test_budget: int,
) -> tuple[bool, int, int]:
    """Turn a feasible circulation into an optimal one; return (ok, phases, relabels).

    `price` holds scaled prices (in units of cost / factor) and is updated in place; the flow is
    in `cap`. `eps_start` <= 0 means "the largest scaled cost", the tolerance every flow meets
    with zero prices. With `lookahead`, a push into a node without excess and without an
    admissible arc relabels that node instead (so flow does not run into dead ends). Goldberg's
    global price update is left out: with look-ahead it cost more time than the relabels it
    saved on every benchmark family (1.6-3x the kernel's time). After each phase with eps at
    most `factor`, a shortest-path pass of at most `test_budget` arc scans (0: none) tries to
    prove the flow optimal already; if it does,
    `price` becomes those exact potentials times `factor` and the kernel stops. `ok` is False
    only if a price left the safe range; the residuals then hold a pseudoflow (a phase stopped
    half way may leave excesses), which the caller must discard. `cap` and `cost` may be int32
    or int64 arrays.
    """
    n = start.size - 1
    eps = eps_start
    if eps <= 0:
        eps = 1
        for a in range(head.size):
            if abs(np.int64(cost[a]) * factor) > eps:
                eps = abs(np.int64(cost[a]) * factor)
    excess = np.zeros(n, dtype=np.int64)
    current = np.empty(n, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    queued = np.zeros(n, dtype=np.bool_)
    trial = np.empty(n, dtype=np.int64)
    # Kept equal to `cap > 0` on every push: scans skip full arcs a word at a time.
    live = _live_bits(cap)
    phases = 0
    relabels = 0
    while eps > 1:
        eps = max(1, eps // alpha)
        phases += 1
        # Saturating every arc of negative reduced cost makes the pseudoflow 0-optimal.
        for u in range(n):
            pu = price[u]
            end = start[u + 1]
            a = _next_live(live, start[u], end)
            while a < end:
                v = head[a]
                if np.int64(cost[a]) * factor + pu - price[v] < 0:
                    r = cap[a]
                    cap[a] = 0
                    live[a >> 6] &= ~(_ONE << np.uint64(a & 63))
                    b = rev[a]
                    cap[b] += r
                    live[b >> 6] |= _ONE << np.uint64(b & 63)
                    excess[u] -= r
                    excess[v] += r
                a = _next_live(live, a + 1, end)
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
            # Last in, first out: the node just pushed to is still in cache (twice as fast as
            # FIFO on the benchmark instances, with as many relabels).
            q_tail -= 1
            if q_tail < 0:
                q_tail = n - 1
            u = queue[q_tail]
            size -= 1
            queued[u] = False
            end = start[u + 1]
            while excess[u] > 0:
                pu = price[u]
                # A scan of all of u's arcs also yields its new price, so relabelling is free.
                full = current[u] == start[u]
                a = _next_live(live, current[u], end)
                best = -(2**62)
                while a < end:
                    v = head[a]
                    pv = price[v]
                    sc = np.int64(cost[a]) * factor
                    if sc + pu - pv < 0:
                        if (
                            lookahead
                            and excess[v] >= 0
                            and v != u
                            and not _has_admissible(
                                v, start, head, live, cost, factor, price, current
                            )
                        ):
                            # int64 like u below: one compiled copy of _relabel.
                            lowered = _relabel(
                                np.int64(v), start, head, live, cost, factor, price, eps,
                                current,
                            )
                            # A node whose arcs are all full or fixed has no price to
                            # drop to; the push itself gives it the way back to u.
                            if lowered != -(2**62) - eps:
                                price[v] = lowered
                                relabels += 1
                                if price[v] < -PRICE_LIMIT:
                                    return False, phases, relabels
                                continue
                        r = cap[a]
                        d = min(r, excess[u])
                        cap[a] = r - d
                        if r == d:
                            live[a >> 6] &= ~(_ONE << np.uint64(a & 63))
                        b = rev[a]
                        cap[b] += d
                        live[b >> 6] |= _ONE << np.uint64(b & 63)
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
                    elif pv - sc > best:
                        best = pv - sc
                    a = _next_live(live, a + 1, end)
                current[u] = a
                if excess[u] > 0:
                    if full:
                        price[u] = best - eps
                        current[u] = start[u]
                    else:
                        price[u] = _relabel(
                            u, start, head, live, cost, factor, price, eps, current
                        )
                    relabels += 1
                    if price[u] < -PRICE_LIMIT:
                        return False, phases, relabels
        # Once eps is below one original cost unit the flow is often optimal already, phases
        # before the last (short residual cycles cannot be negative): a budgeted shortest-path
        # pass proves it, and the remaining phases (a tenth to a quarter of all relabels on the
        # benchmark instances) are skipped. A failed test costs at most `test_budget` arc scans.
        if test_budget > 0 and 1 < eps <= factor:
            for v in range(n):
                trial[v] = price[v] // factor
            if _bellman_ford(start, head, cap, cost, trial, test_budget, NO_FLOOR):
                for v in range(n):
                    price[v] = trial[v] * factor
                return True, phases, relabels
    return True, phases, relabels


@njit(**HELPER_OPTIONS)
def _bellman_ford(
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
    return _bellman_ford(start, head, cap, cost, pot, budget, floor)
