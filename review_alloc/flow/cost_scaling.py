"""Minimum-cost flow by cost scaling: push-relabel (Goldberg and Tarjan) as numba kernels.

`solve_cost_scaling` is the cold method of `min_cost_flow`: Dinic routes the supplies to a
feasible flow, the tier pre-pass (`tier_start.py`) fills the bands of very negative cost and may
find starting prices, push-relabel phases make the circulation optimal, and a shortest-path pass
(`potentials.py`) turns the scaled prices into exact integer potentials.

Costs are multiplied by `factor` (more than the number of nodes), so that prices with every
residual arc at reduced cost >= -1 make the flow exactly optimal: a residual cycle of at most
`factor - 1` arcs then costs more than -1 in original units, hence >= 0. Each phase divides the
tolerance epsilon by `alpha`: it saturates every residual arc of negative reduced cost, then
discharges the nodes left with excess (last in, first out), pushing along admissible arcs
(reduced cost < 0) and relabelling a node to the largest price that makes one of its arcs
admissible. The kernels only change flow and prices, so they need a feasible flow to start from.
"""

from __future__ import annotations

from typing import cast

import numpy as np
from numba import njit

from review_alloc.flow._jit import HELPER_OPTIONS, KERNEL_OPTIONS, trailing_zeros
from review_alloc.flow.circulation import unmet_supplies
from review_alloc.flow.dinic import dinic
from review_alloc.flow.potentials import NO_FLOOR, bellman_ford, exact_potentials
from review_alloc.flow.residual import ResidualNetwork, build_with_terminals, net_outflow
from review_alloc.flow.tier_start import saturate_tiers, starting_prices
from review_alloc.flow.validate import EdgeArrays

PRICE_LIMIT = 2**61
"""A price beyond this aborts the kernel, which then reports failure instead of overflowing."""

SCALING_ALPHA = 8
"""Cost scaling divides its tolerance by this much per phase (chosen by the benchmarks)."""

OPTIMALITY_TEST_SCANS = 2
"""Cost scaling tests for early optimality after each phase with eps below one cost unit, giving
each test at most this many passes over the arcs (a test that succeeds needs about one)."""

_ONE = np.uint64(1)
_ALL = np.uint64(0xFFFFFFFFFFFFFFFF)


@njit(**KERNEL_OPTIONS)
def _live_bits(cap: np.ndarray) -> np.ndarray:
    """One bit per arc, set where the arc has residual capacity (64 arcs to a word)."""
    live = np.zeros((cap.size + 63) // 64 + 1, dtype=np.uint64)
    for a in range(cap.size):
        if cap[a] > 0:
            live[a >> 6] |= _ONE << np.uint64(a & 63)
    return live


@njit(**HELPER_OPTIONS)
def _word_from(live: np.ndarray, a: int) -> np.uint64:
    """The bitmap word holding arc a, without the bits of the arcs before a."""
    return live[a >> 6] & (_ALL << np.uint64(a & 63))


@njit(**KERNEL_OPTIONS)
def _next_set(live: np.ndarray, w: int, word: np.uint64, end: int) -> tuple[int, int, np.uint64]:
    """The arc of the lowest set bit of `word` (word `w` of the bitmap) or, if none, of the next
    nonzero word; `end` if that arc is not before `end`. Returns (arc, w, word) for the next call.

    A scan keeps its bitmap word in hand and clears each bit it has read (`word & (word - 1)`),
    so the next arc costs a trailing-zero count instead of reloading and shifting the word: the
    chain of work from one arc to the next is what bounds the scans, and this cut the kernel's
    time by 26-32 % on the L benchmark instances. A node's arcs are contiguous, so one word covers
    up to 64 of them: the many reverse arcs of a node with a large in-degree, almost all empty,
    are skipped a word at a time without reading their capacities.
    """
    while word == 0:
        w += 1
        if w << 6 >= end:
            return end, w, word
        word = live[w]
    return min((w << 6) + np.int64(trailing_zeros(word)), end), w, word


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
    first = start[u]
    end = start[u + 1]
    w = first >> 6
    b, w, word = _next_set(live, w, _word_from(live, first), end)
    while b < end:
        candidate = price[head[b]] - np.int64(cost[b]) * factor
        if candidate > floor:
            current[u] = b
            return floor
        if candidate > best:
            best = candidate
        b, w, word = _next_set(live, w, word & (word - _ONE), end)
    current[u] = first
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
    w = current[v] >> 6
    a, w, word = _next_set(live, w, _word_from(live, current[v]), end)
    while a < end:
        if np.int64(cost[a]) * factor + pv - price[head[a]] < 0:
            current[v] = a
            return True
        a, w, word = _next_set(live, w, word & (word - _ONE), end)
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
            w = start[u] >> 6
            a, w, word = _next_set(live, w, _word_from(live, start[u]), end)
            while a < end:
                v = head[a]
                # The bit of a is cleared in hand whether or not a is saturated now.
                word &= word - _ONE
                if np.int64(cost[a]) * factor + pu - price[v] < 0:
                    r = cap[a]
                    cap[a] = 0
                    live[a >> 6] &= ~(_ONE << np.uint64(a & 63))
                    b = rev[a]
                    cap[b] += r
                    live[b >> 6] |= _ONE << np.uint64(b & 63)
                    excess[u] -= r
                    excess[v] += r
                    if v == u:
                        # A loop's reverse arc is u's own: read the bitmap again after a.
                        word = _word_from(live, a) & ~(_ONE << np.uint64(a & 63))
                a, w, word = _next_set(live, w, word, end)
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
                w = current[u] >> 6
                a, w, word = _next_set(live, w, _word_from(live, current[u]), end)
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
                                # The same arc again, at v's new price.
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
                        if v == u:
                            # A loop's reverse arc is u's own: read the bitmap again (a's bit
                            # kept set, for the clearing of the lowest bit below).
                            word = _word_from(live, a) | (_ONE << np.uint64(a & 63))
                    elif pv - sc > best:
                        best = pv - sc
                    a, w, word = _next_set(live, w, word & (word - _ONE), end)
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
            if bellman_ford(start, head, cap, cost, trial, test_budget, NO_FLOOR):
                for v in range(n):
                    price[v] = trial[v] * factor
                return True, phases, relabels
    return True, phases, relabels


def _narrow(values: np.ndarray, reach: np.ndarray) -> np.ndarray:
    """An int32 copy of `values` if every value in `reach` fits in int32, else `values` itself."""
    info = np.iinfo(np.int32)
    if reach.size == 0 or (int(reach.min()) >= info.min and int(reach.max()) <= info.max):
        return values.astype(np.int32)
    return values


def solve_cost_scaling(
    edges: EdgeArrays, need: np.ndarray
) -> tuple[ResidualNetwork, np.ndarray] | None:
    """Cost scaling from a Dinic-routed feasible flow; None if prices would leave int64.

    Returns the residual network of an optimal flow and its potentials; raises
    `InfeasibleError` with a cut when the supplies `need` cannot be met.
    """
    n = edges.n
    m = len(edges.tails)
    costs = cast(np.ndarray, edges.costs)
    excess = need - net_outflow(n, edges.tails, edges.heads, edges.lower)
    net, demand = build_with_terminals(
        n, edges.tails, edges.heads, edges.upper, edges.lower, edges.lower, excess, costs,
        every_node=True,
    )
    routed, _ = dinic(net, n, n + 1)
    if routed < demand:
        raise unmet_supplies(net, n, demand, routed)
    # The terminal arcs have done their job; closing them leaves a circulation problem.
    terminal = net.arc_of_edge[m:]
    net.cap[terminal] = 0
    net.cap[net.rev[terminal]] = 0
    scale = max(1, int(costs.max(initial=0)))
    lightest = saturate_tiers(net, n, m, scale)
    # Where the tiers interact (a lighter tier gains by swapping which nodes a heavier one
    # feeds), the flow is only within the lightest tier's weight of optimal: the second try.
    pot = optimal_potentials(net, (scale, lightest) if lightest else ())
    if pot is None:
        return None
    return net, pot[:n].copy()


def optimal_potentials(
    net: ResidualNetwork, tolerances: tuple[int, ...] = ()
) -> np.ndarray | None:
    """Make the circulation in `net` optimal by cost scaling; its exact potentials, or None.

    Cost scaling starts at the first of `tolerances` (in cost units) for which a budgeted
    shortest-path pass finds prices, that is, where the flow is that close to optimal already;
    failing all, from zero potentials at the largest cost. None means scaled prices would leave
    int64 (the caller falls back to the primal-dual method).
    """
    factor = net.n + 1
    # 4-byte residuals, where every value fits, cut the bytes read per arc. Costs stay int64: the
    # heaviest cost tiers need that range, and 4-byte costs only where they fit would compile
    # (and warm up) a second copy of the kernel for a gain of 0-4 % on the L instances (the
    # kernel waits on the chain from one arc to the next more than on memory). A residual never
    # exceeds the sum of its arc pair, at most twice the largest residual: where that fits
    # int32, the pairwise sums (a gather over every arc, 0.03-0.1 s on L) are not needed.
    top = 2 * int(net.cap.max(initial=0))
    fits = top <= np.iinfo(np.int32).max
    cap = _narrow(net.cap, np.array([top]) if fits else net.cap + net.cap[net.rev])
    cost = net.cost
    prices, eps = np.zeros(net.n, dtype=np.int64), 0
    for tolerance in tolerances:
        prices, eps = starting_prices(net, cap, tolerance, factor, PRICE_LIMIT)
        if eps:
            break

    def scale_costs(prices: np.ndarray, eps: int) -> bool:
        ok, _, _ = cost_scaling_kernel(
            net.start, net.head, cap, net.rev, cost, prices,
            np.int64(factor), np.int64(SCALING_ALPHA), np.int64(eps), True,
            np.int64(OPTIMALITY_TEST_SCANS * net.head.size),
        )
        return bool(ok)

    # A kernel stopped by its price limit leaves a pseudoflow: keep the flow to retry from.
    saved = cap.copy() if eps else cap
    ok = scale_costs(prices, eps)
    if not ok and eps > 0:
        # Prices from a start can grow past the limit where cold ones would not.
        cap[:] = saved
        prices = np.zeros(net.n, dtype=np.int64)
        ok = scale_costs(prices, 0)
    if cap is not net.cap:
        net.cap[:] = cap
    if not ok:
        return None
    # Every residual arc has scaled reduced cost >= -1, so floor(prices / factor) misses the
    # exact conditions by at most 1 per arc; a shortest-path pass repairs that exactly. It reads
    # the kernel's residuals: the same array type as the kernel's own optimality test, so the
    # shortest-path code is compiled (and warmed up) once instead of twice.
    pot = np.floor_divide(prices, factor)
    if not exact_potentials(net.start, net.head, cap, net.cost, pot, np.int64(0), NO_FLOOR):
        return None
    return pot
