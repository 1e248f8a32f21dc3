"""A solved min-cost flow kept between solves: patch bounds and costs, re-solve locally.

`KeptFlow` holds the residual network (CSR, built once), the optimal flow and potentials that
certify it. `patched()` changes the bounds or costs of a few edges and returns a new state
(the old one stays valid); `resolve()` then restores optimality in work proportional to the
change, on the very same arrays, without terminal arcs and without rebuilding anything:

1. Patching puts every changed edge inside its new bounds and on the side its reduced cost
   asks for (negative: at the upper bound; positive: at the lower bound; zero: the old flow,
   clipped), so every residual arc keeps reduced cost >= 0 under the kept potentials. The flow
   moved there leaves an excess at one end and a deficit at the other.
2. Re-solving routes the excesses to the deficits by successive shortest paths: a Dijkstra on
   reduced costs from a deficit *backwards* (the arcs into v are the partners `rev[a]` of v's
   own arcs a; a bitmap says which of them have residual capacity), stopped at the first node
   holding an excess; only the nodes it settled get new potentials (`pot[v] += reach -
   dist[v]`, which keeps every residual reduced cost >= 0). The search's own path then takes
   what it can, and Dinic's phases, restricted to the settled nodes and arcs of zero reduced
   cost, push what is left at the same distance. Round stamps, not O(n) resets, tell which
   nodes a search touched. The search can start from several deficits at once, but on the
   benchmark's withdrawals that covered the union of their regions in every round (2-3x the
   work), so each round starts from one.

After a small change the deficits are few and local (the papers that lost a reviewer), while
the excess may sit at a hub (the source); searching from the deficits keeps each search small.
The supplies a kept flow meets are those of the flow it was made from (its out - in per node).

A parent must stay usable after its children (an undo patches it again, a what-if preview and
the re-plan are siblings), yet copying the 2m residual capacities and costs for each child was
most of a patch's time. So the states of one family share those arrays (`_Shared`): a patch
swaps its edges' values in and keeps the old ones, a resolve logs each edge it routes on before
its first change (`_note`), and a state used again swaps its values back along the chain of
such changes (`_Shared.hold`), in work proportional to what differs between the two states.
"""

from __future__ import annotations

import threading
from typing import Any

import numpy as np
from numba import njit

from review_alloc.flow._jit import HELPER_OPTIONS, KERNEL_OPTIONS, trailing_zeros
from review_alloc.flow.mincost import min_cost_flow
from review_alloc.flow.residual import build_residual, net_outflow
from review_alloc.flow.results import CostFlowResult, FlowError, FlowInputError, InfeasibleError
from review_alloc.flow.sums import exact_dot
from review_alloc.flow.validate import (
    TOTAL_LIMIT,
    as_int_array,
    check_costs,
    check_edges,
    check_n,
)

KEPT_WORK_LIMIT = 2
"""By default `resolve()` gives up once its searches have done this many times as much work as
the network has arcs and nodes (one unit per arc read, `SETTLE_WORK` per node settled), or as
soon as the work per unit routed so far says they would: a re-solve that needs more is no
longer local, and the cold solver is then the better bet. On the M and L benchmarks a 1 %
withdrawal takes about 0.05 times the arcs on the loose and scarce families; on the tight one,
where each unit's search covers much of the network (every reviewer is full, so the unit a
paper lost is won back from the cheapest of all papers), about 33 times."""

KEPT_WORK_FLOOR = 1 << 16
"""The least default budget: on a small network a long re-solve still costs next to nothing."""

_POTENTIAL_LIMIT = 2**60
"""Potentials kept below this in absolute value, as `min_cost_flow`'s warm starts require."""


_ONE = np.uint64(1)
_ALL = np.uint64(0xFFFFFFFFFFFFFFFF)

SETTLE_WORK = 32
"""Work units a search counts for settling or labelling a node, beside one per arc it reads:
a heap operation and the random reads around it cost about that many arc reads."""


@njit(**HELPER_OPTIONS)
def _in_word_from(bits: np.ndarray, a: int) -> np.uint64:
    """The word of `bits` holding position a, without the bits of the positions before a."""
    return bits[a >> 6] & (_ALL << np.uint64(a & 63))


@njit(**HELPER_OPTIONS)
def _next_in(bits: np.ndarray, w: int, word: np.uint64, end: int) -> tuple[int, int, np.uint64]:
    """The position of the lowest set bit of `word` (word `w` of `bits`) or, if none, of the
    next nonzero word; `end` if that is not before `end`. Returns (position, w, word) for the
    next call, which passes `word & (word - 1)` to move past the position just read.

    Bit a of `bits` says `cap[rev[a]] > 0`: whether the arc *into* the node that a leaves can
    carry flow. The backward searches need only those, and a reviewer's or the sink's list
    holds hundreds of positions whose partners are empty; a word skips 64 of them without
    reading `cap[rev[a]]` (a cache miss each). The scans keep the word in hand and clear each
    bit read, as cost scaling's `_next_set` does (no reload and shift per position); nothing
    changes the bits while a search or a labelling scans. Cost scaling's bitmap (`live`, of
    the arcs themselves) is in another warm-up group, so these helpers share nothing with it.
    """
    while word == 0:
        w += 1
        if w << 6 >= end:
            return end, w, word
        word = bits[w]
    return min((w << 6) + np.int64(trailing_zeros(word)), end), w, word


@njit(**HELPER_OPTIONS)
def _sift_up(keys: np.ndarray, nodes: np.ndarray, pos: np.ndarray, i: int) -> None:
    """Move heap entry i up to its place; `pos[node]` follows every move (indexed heap)."""
    key = keys[i]
    node = nodes[i]
    while i > 0:
        parent = (i - 1) >> 1
        if keys[parent] <= key:
            break
        keys[i] = keys[parent]
        nodes[i] = nodes[parent]
        pos[nodes[i]] = i
        i = parent
    keys[i] = key
    nodes[i] = node
    pos[node] = i


@njit(**HELPER_OPTIONS)
def _pop(keys: np.ndarray, nodes: np.ndarray, pos: np.ndarray, size: int) -> tuple[int, int, int]:
    """Remove the smallest entry of the indexed heap; return its key, its node and the new size."""
    top_key = keys[0]
    top_node = nodes[0]
    size -= 1
    if size > 0:
        key = keys[size]
        node = nodes[size]
        i = 0
        while True:
            child = 2 * i + 1
            if child >= size:
                break
            if child + 1 < size and keys[child + 1] < keys[child]:
                child += 1
            if keys[child] >= key:
                break
            keys[i] = keys[child]
            nodes[i] = nodes[child]
            pos[nodes[i]] = i
            i = child
        keys[i] = key
        nodes[i] = node
        pos[node] = i
    return top_key, top_node, size


@njit(**HELPER_OPTIONS)
def _search(
    start: np.ndarray,
    head: np.ndarray,
    rev: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
    ex: np.ndarray,
    bits: np.ndarray,
    deficits: np.ndarray,
    first: int,
    last: int,
    stamp: int,
    seen: np.ndarray,
    settled: np.ndarray,
    dist: np.ndarray,
    parent: np.ndarray,
    keys: np.ndarray,
    nodes: np.ndarray,
    pos: np.ndarray,
    order: np.ndarray,
    work: np.ndarray,
    budget: int,
) -> tuple[int, int, int]:
    """Dijkstra on reduced costs from `deficits[first:last]` against the arcs, up to an excess.

    `dist[v]` becomes the length of a shortest residual path from v to a deficit. Returns
    (status, settled count, reach): status 1 when a node with an excess was settled at distance
    `reach`, 0 when none can reach a deficit, 2 when the work went over the budget. The settled
    nodes are `order[:count]` and carry `settled[v] == stamp`; `parent[v]` is the arc leaving v
    on its shortest path (-1 at the deficits).
    """
    # Typed zeros: a counter that starts at a literal 0 reaches a callee as Literal[int](0) on
    # one path and int64 on another, and numba compiles the callee twice.
    size = np.int64(0)
    for k in range(first, last):
        v = deficits[k]
        seen[v] = stamp
        dist[v] = 0
        parent[v] = -1
        # Equal keys: appending keeps the heap ordered.
        keys[size] = 0
        nodes[size] = v
        pos[v] = size
        size += 1
    count = 0
    while size > 0:
        d, v, size = _pop(keys, nodes, pos, size)
        settled[v] = stamp
        order[count] = v
        count += 1
        if ex[v] > 0:
            return 1, count, d
        end = start[v + 1]
        work[0] += ((end - start[v]) >> 9) + SETTLE_WORK
        if work[0] > budget:
            return 2, count, d
        pv = pot[v]
        first = start[v]
        a, w, word = _next_in(bits, first >> 6, _in_word_from(bits, first), end)
        while a < end:
            word &= word - _ONE
            # The bit says the partner b = rev[a] (u -> v) has residual capacity, and its cost is
            # -cost[a]: neither needs a read far away in the arrays (a cache miss each).
            u = head[a]
            work[0] += 1
            if settled[u] != stamp:
                # Reduced costs are >= 0, so distances only grow.
                candidate = d - cost[a] + pot[u] - pv
                if seen[u] != stamp:
                    seen[u] = stamp
                    dist[u] = candidate
                    parent[u] = rev[a]
                    keys[size] = candidate
                    nodes[size] = u
                    _sift_up(keys, nodes, pos, size)
                    size += 1
                elif candidate < dist[u]:
                    dist[u] = candidate
                    parent[u] = rev[a]
                    i = pos[u]
                    keys[i] = candidate
                    _sift_up(keys, nodes, pos, i)
            a, w, word = _next_in(bits, w, word, end)
    return 0, count, 0


@njit(**HELPER_OPTIONS)
def _levels(
    start: np.ndarray,
    head: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
    ex: np.ndarray,
    bits: np.ndarray,
    deficits: np.ndarray,
    n_def: int,
    stamp: int,
    settled: np.ndarray,
    phase: int,
    mark: np.ndarray,
    level: np.ndarray,
    queue: np.ndarray,
    work: np.ndarray,
) -> tuple[bool, int]:
    """BFS levels towards the deficits over admissible arcs among this round's settled nodes.

    An admissible arc has residual capacity and zero reduced cost; `level[v]` (valid where
    `mark[v] == phase`) counts its arcs on a shortest admissible path from v to a deficit. Stops
    labelling past the level of the first excess found. Returns (whether an excess was
    labelled, the number of labelled nodes, which are `queue[:count]`).
    """
    count = 0
    for k in range(n_def):
        v = deficits[k]
        if ex[v] < 0 and settled[v] == stamp:
            mark[v] = phase
            level[v] = 0
            queue[count] = v
            count += 1
    found = False
    limit = np.int64(len(level))
    q_head = 0
    while q_head < count:
        v = queue[q_head]
        q_head += 1
        if level[v] >= limit:
            break
        end = start[v + 1]
        work[0] += ((end - start[v]) >> 9) + SETTLE_WORK
        pv = pot[v]
        next_level = level[v] + 1
        first = start[v]
        a, w, word = _next_in(bits, first >> 6, _in_word_from(bits, first), end)
        while a < end:
            word &= word - _ONE
            u = head[a]
            work[0] += 1
            # As in `_search`: the bit stands for cap[rev[a]] > 0, and cost[rev[a]] is -cost[a].
            if mark[u] != phase and settled[u] == stamp and pot[u] - pv == cost[a]:
                mark[u] = phase
                level[u] = next_level
                queue[count] = u
                count += 1
                if ex[u] > 0 and not found:
                    found = True
                    limit = next_level
            a, w, word = _next_in(bits, w, word, end)
    return found, count


@njit(**HELPER_OPTIONS)
def _note(a: int, b: int, e: int, cap: np.ndarray, touched: np.ndarray, log: np.ndarray,
          work: np.ndarray) -> None:
    """Log edge e's residual capacities (forward, backward) before their first change in this
    resolve: arc a (of edge e, or of ~e when a is the reverse arc) and its partner b.

    Each edge is logged once (`touched`), as `log[3k:3k+3] = edge, forward cap, backward cap`
    with k = `work[1]`: what the other states of the family need to get their values back.
    """
    edge = e if e >= 0 else ~e
    if touched[edge] == 0:
        touched[edge] = 1
        k = work[1]
        log[3 * k] = edge
        if e >= 0:
            log[3 * k + 1] = cap[a]
            log[3 * k + 2] = cap[b]
        else:
            log[3 * k + 1] = cap[b]
            log[3 * k + 2] = cap[a]
        work[1] = k + 1


@njit(**HELPER_OPTIONS)
def _push_from(
    x: int,
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    rev: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
    ex: np.ndarray,
    bits: np.ndarray,
    arc_edge: np.ndarray,
    flow: np.ndarray,
    phase: int,
    mark: np.ndarray,
    level: np.ndarray,
    it: np.ndarray,
    it_mark: np.ndarray,
    stack: np.ndarray,
    work: np.ndarray,
    touched: np.ndarray,
    log: np.ndarray,
) -> int:
    """Push x's excess down the levels to deficits along admissible arcs; return the amount.

    An iterative DFS with current-arc pointers (`it[v]`, valid where `it_mark[v] == phase`);
    a dead end, or a deficit that is filled, leaves the level graph (`mark[v] = -1`). Every
    edge pushed on is logged first (`_note`).
    """
    routed = 0
    depth = 0
    u = x
    while ex[x] > 0:
        if level[u] == 0:
            push = min(ex[x], -ex[u])
            for i in range(depth):
                if cap[stack[i]] < push:
                    push = cap[stack[i]]
            first_full = depth
            for i in range(depth):
                a = stack[i]
                b = rev[a]
                e = arc_edge[a]
                _note(a, b, e, cap, touched, log, work)
                cap[a] -= push
                cap[b] += push
                # Bit a follows cap[b] (now > 0), bit b follows cap[a].
                bits[a >> 6] |= _ONE << np.uint64(a & 63)
                if cap[a] == 0:
                    bits[b >> 6] &= ~(_ONE << np.uint64(b & 63))
                    if first_full == depth:
                        first_full = i
                # The flow per edge is kept up to date, so a result needs no pass over the arcs.
                if e >= 0:
                    flow[e] += push
                else:
                    flow[~e] -= push
            ex[x] -= push
            ex[u] += push
            routed += push
            if ex[u] == 0:
                mark[u] = -1
            if first_full < depth:
                # Back to the tail of the first saturated arc: the path up to it is still open.
                depth = first_full
            else:
                # No arc saturated: the deficit is filled (or x is empty and the loop ends).
                depth -= 1
            u = head[rev[stack[depth]]]
            continue
        if it_mark[u] != phase:
            it_mark[u] = phase
            it[u] = start[u]
            work[0] += start[u + 1] - start[u]
        below = level[u] - 1
        pu = pot[u]
        advanced = False
        while it[u] < start[u + 1]:
            a = it[u]
            v = head[a]
            if mark[v] == phase and level[v] == below and cap[a] > 0 and cost[a] + pu - pot[v] == 0:
                stack[depth] = a
                depth += 1
                u = v
                advanced = True
                break
            it[u] += 1
        if not advanced:
            mark[u] = -1
            if depth == 0:
                return routed
            depth -= 1
            a = stack[depth]
            u = head[rev[a]]
            it[u] += 1
    return routed


@njit(**KERNEL_OPTIONS)
def kept_route_kernel(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    rev: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
    ex: np.ndarray,
    bits: np.ndarray,
    arc_edge: np.ndarray,
    flow: np.ndarray,
    candidates: np.ndarray,
    budget: int,
    side: np.ndarray,
    touched: np.ndarray,
    log: np.ndarray,
) -> tuple[int, int, int, int]:
    """Route every excess to the deficits among `candidates` at least cost, in place.

    `ex[v]` is what v still has to send out (< 0: to receive); every residual arc must have
    reduced cost >= 0 under `pot`. Returns (status, work, rounds, logged): status 0 when
    everything was routed, 1 when the arcs scanned went over `budget`, 2 when some deficit
    cannot be reached (then `side[v]` is True for the nodes that cannot reach a remaining
    deficit). Whatever the status, the first `logged` triples of `log` hold every edge whose
    residual capacities changed, with their values before (`_note`; `touched`, one byte per
    edge, starts all zero).
    """
    n = start.size - 1
    seen = np.zeros(n, dtype=np.int64)
    settled = np.zeros(n, dtype=np.int64)
    mark = np.zeros(n, dtype=np.int64)
    it_mark = np.zeros(n, dtype=np.int64)
    dist = np.empty(n, dtype=np.int64)
    parent = np.empty(n, dtype=np.int64)
    keys = np.empty(n, dtype=np.int64)
    nodes = np.empty(n, dtype=np.int64)
    pos = np.empty(n, dtype=np.int64)
    order = np.empty(n, dtype=np.int64)
    level = np.empty(n, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    it = np.empty(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    # work[0]: work units spent; work[1]: edges logged.
    work = np.zeros(2, dtype=np.int64)
    # The deficits, each once (a candidate may be listed twice); `seen` doubles as the mark.
    deficits = np.empty(candidates.size, dtype=np.int64)
    # Typed zeros, as in `_search`: these counters are passed on to the helpers.
    n_def = np.int64(0)
    remaining = np.int64(0)
    for k in range(candidates.size):
        v = candidates[k]
        if ex[v] < 0 and seen[v] == 0:
            seen[v] = -1
            deficits[n_def] = v
            n_def += 1
            remaining -= ex[v]
    total = remaining
    n_stuck = np.int64(0)
    stamp = np.int64(0)
    phase = np.int64(0)
    rounds = np.int64(0)
    while remaining > 0:
        kept = np.int64(0)
        for k in range(n_def):
            if ex[deficits[k]] < 0:
                deficits[kept] = deficits[k]
                kept += 1
        n_def = kept
        stamp += 1
        # One deficit per search: the searches from several deficits at once each covered
        # the union of their regions (2-3x the work on the benchmark's withdrawals).
        status, count, reach = _search(
            start, head, rev, cost, pot, ex, bits, deficits, n_def - 1, n_def, stamp, seen,
            settled, dist, parent, keys, nodes, pos, order, work, budget,
        )
        if status == 2:
            return 1, work[0], rounds, work[1]
        if status == 0:
            # No excess reaches this deficit, and routing the others cannot change that: no
            # residual arc enters the nodes that reach it, so no augmenting path passes there.
            # Kept at the back of the same array (the active deficits stay at the front).
            v = deficits[n_def - 1]
            n_stuck += 1
            deficits[deficits.size - n_stuck] = v
            n_def -= 1
            remaining += ex[v]
            continue
        rounds += 1
        # Only the settled nodes move: the others keep their potentials, as if shifted by reach.
        for k in range(count):
            v = order[k]
            pot[v] += reach - dist[v]
        # First along the search's own shortest path (its arcs now have reduced cost 0): most
        # rounds route one unit, and need no level graph.
        x = order[count - 1]
        push = ex[x]
        u = x
        while parent[u] >= 0:
            a = parent[u]
            if cap[a] < push:
                push = cap[a]
            u = head[a]
        if -ex[u] < push:
            push = -ex[u]
        target = u
        u = x
        while parent[u] >= 0:
            a = parent[u]
            b = rev[a]
            e = arc_edge[a]
            _note(a, b, e, cap, touched, log, work)
            cap[a] -= push
            cap[b] += push
            bits[a >> 6] |= _ONE << np.uint64(a & 63)
            if cap[a] == 0:
                bits[b >> 6] &= ~(_ONE << np.uint64(b & 63))
            if e >= 0:
                flow[e] += push
            else:
                flow[~e] -= push
            u = head[a]
        ex[x] -= push
        ex[target] += push
        remaining -= push
        # More units at the same distance: Dinic's phases over the admissible arcs.
        while remaining > 0 and ex[target] < 0:
            phase += 1
            found, labelled = _levels(
                start, head, cost, pot, ex, bits, deficits, n_def, stamp, settled, phase,
                mark, level, queue, work,
            )
            if not found:
                break
            for k in range(labelled):
                x = queue[k]
                if ex[x] > 0 and mark[x] == phase:
                    remaining -= _push_from(
                        x, start, head, cap, rev, cost, pot, ex, bits, arc_edge, flow, phase,
                        mark, level, it, it_mark, stack, work, touched, log,
                    )
                    if remaining == 0:
                        break
            if work[0] > budget:
                return 1, work[0], rounds, work[1]
        # A change whose rounds each search much of the network would exhaust the budget
        # anyway: give up as soon as the work so far, scaled to every unit, says so.
        routed = total - remaining
        if work[0] > budget // 16 and routed > 0 and work[0] // routed * total > budget:
            return 1, work[0], rounds, work[1]
    if n_stuck == 0:
        return 0, work[0], rounds, work[1]
    # The violated cut: the nodes that reach no stuck deficit (one search from all of them).
    stamp += 1
    status, count, reach = _search(
        start, head, rev, cost, pot, ex, bits, deficits, deficits.size - n_stuck, deficits.size,
        stamp, seen, settled, dist, parent, keys, nodes, pos, order, work, budget,
    )
    if status == 2:
        return 1, work[0], rounds, work[1]
    for v in range(n):
        side[v] = settled[v] != stamp
    return 2, work[0], rounds, work[1]


@njit(**KERNEL_OPTIONS)
def kept_swap_kernel(
    cap: np.ndarray,
    bits: np.ndarray,
    cost: np.ndarray,
    edge_costs: np.ndarray,
    lower: np.ndarray,
    forward: np.ndarray,
    backward: np.ndarray,
    edges: np.ndarray,
    cap_f: np.ndarray,
    cap_b: np.ndarray,
    cost_edges: np.ndarray,
    costs: np.ndarray,
    lower_edges: np.ndarray,
    lowers: np.ndarray,
) -> None:
    """Swap a change's values with the shared arrays' (each edge at most once per list).

    The arrays take the residual capacities `cap_f` (forward arc) and `cap_b` (reverse arc) of
    each of `edges`, the costs of `cost_edges` and the lower bounds of `lower_edges`; the
    change's arrays take the values they replace, so swapping again undoes it. The bitmap
    follows the capacities (bit f says `cap[b] > 0`, bit b says `cap[f] > 0`).
    """
    for k in range(edges.size):
        e = edges[k]
        f = forward[e]
        b = backward[e]
        x = cap[f]
        cap[f] = cap_f[k]
        cap_f[k] = x
        x = cap[b]
        cap[b] = cap_b[k]
        cap_b[k] = x
        if cap[b] > 0:
            bits[f >> 6] |= _ONE << np.uint64(f & 63)
        else:
            bits[f >> 6] &= ~(_ONE << np.uint64(f & 63))
        if cap[f] > 0:
            bits[b >> 6] |= _ONE << np.uint64(b & 63)
        else:
            bits[b >> 6] &= ~(_ONE << np.uint64(b & 63))
    for k in range(cost_edges.size):
        e = cost_edges[k]
        c = costs[k]
        costs[k] = edge_costs[e]
        edge_costs[e] = c
        cost[forward[e]] = c
        cost[backward[e]] = -c
    for k in range(lower_edges.size):
        e = lower_edges[k]
        x = lower[e]
        lower[e] = lowers[k]
        lowers[k] = x


def _readonly(array: np.ndarray) -> np.ndarray:
    """The array made read-only: states share these arrays and none may change them."""
    array.flags.writeable = False
    return array


def _in_bits(cap: np.ndarray, rev: np.ndarray) -> np.ndarray:
    """The bitmap of `_next_in`: bit a set where `cap[rev[a]] > 0`, 64 positions to a word."""
    words = (len(cap) + 63) // 64 + 1
    packed = np.packbits(cap[rev] > 0, bitorder="little")
    raw = np.zeros(words * 8, dtype=np.uint8)
    raw[: len(packed)] = packed
    # Byte j holds positions 8j..8j+7 from its lowest bit up: read as little-endian words.
    return raw.view("<u8").astype(np.uint64)


_NONE = np.zeros(0, dtype=np.int64)


class _Change:
    """The values of some edges in one state (see `kept_swap_kernel`): the residual capacities
    of the forward and reverse arcs of `edges`, the costs of `cost_edges` and the lower bounds
    of `lower_edges` (each list only the edges whose values differ, or may)."""

    __slots__ = ("cap_b", "cap_f", "cost_edges", "costs", "edges", "lower_edges", "lowers")

    def __init__(
        self,
        edges: np.ndarray,
        cap_f: np.ndarray,
        cap_b: np.ndarray,
        cost_edges: np.ndarray = _NONE,
        costs: np.ndarray = _NONE,
        lower_edges: np.ndarray = _NONE,
        lowers: np.ndarray = _NONE,
    ) -> None:
        """Own copies of the values: a swap writes into them."""
        self.edges = np.array(edges, dtype=np.int64)
        self.cap_f = np.array(cap_f, dtype=np.int64)
        self.cap_b = np.array(cap_b, dtype=np.int64)
        self.cost_edges = np.array(cost_edges, dtype=np.int64)
        self.costs = np.array(costs, dtype=np.int64)
        self.lower_edges = np.array(lower_edges, dtype=np.int64)
        self.lowers = np.array(lowers, dtype=np.int64)


class _Version:
    """One state's values of the shared arrays: either in the arrays (the family's current
    version, `toward` None) or the changes that make them from the version `toward` holds."""

    __slots__ = ("changes", "toward")

    def __init__(self) -> None:
        self.toward: _Version | None = None
        self.changes: list[_Change] = []


class _Shared:
    """The residual capacities, bitmap, costs and lower bounds that a family of states (one
    `from_solution` and every state patched from it) keep in one set of arrays.

    The arrays hold one version's values at a time; every other version is a chain of changes
    toward it, each the size of a patch or of what a resolve routed. `hold(version)` walks the
    chain and swaps the changes in, turning each step around (the step's changes then lead
    back), so moving between a parent and its child costs what differs between them, never a
    copy of the arrays (persistent arrays by rerooting, as in Baker's shallow binding). A
    version nobody can reach any more is dropped with its changes.
    """

    __slots__ = (
        "backward", "bits", "cap", "cost", "current", "edge_costs", "forward", "lock", "log",
        "lower", "touched",
    )

    def __init__(
        self,
        cap: np.ndarray,
        bits: np.ndarray,
        cost: np.ndarray,
        edge_costs: np.ndarray,
        lower: np.ndarray,
        forward: np.ndarray,
        backward: np.ndarray,
    ) -> None:
        self.cap = cap
        self.bits = bits
        self.cost = cost
        self.edge_costs = edge_costs
        self.lower = lower
        self.forward = forward
        self.backward = backward
        self.current = _Version()
        # A resolve's log and its one byte per edge (all zero between resolves), made on the
        # first resolve and kept: resolves of a family run one at a time under `lock`.
        self.touched = np.zeros(0, dtype=np.uint8)
        self.log = np.zeros(0, dtype=np.int64)
        # Re-entrant: a state's resolve holds it while the state's own steps hold it again.
        self.lock = threading.RLock()

    def swap(self, change: _Change) -> None:
        """Swap `change` with the arrays' values at its edges (see `kept_swap_kernel`)."""
        kept_swap_kernel(
            self.cap, self.bits, self.cost, self.edge_costs, self.lower, self.forward,
            self.backward, change.edges, change.cap_f, change.cap_b, change.cost_edges,
            change.costs, change.lower_edges, change.lowers,
        )

    def hold(self, version: _Version) -> None:
        """Put `version`'s values in the arrays (call with `lock` held)."""
        path = []
        step = version
        while step is not self.current:
            path.append(step)
            nxt = step.toward
            if nxt is None:
                raise FlowError("a kept flow's version lost its way to the shared arrays")
            step = nxt
        for here in reversed(path):
            there = here.toward
            assert there is not None
            for change in here.changes:
                self.swap(change)
            # Swapped, each change holds `there`'s values: in reverse order they lead back.
            there.toward, there.changes = here, here.changes[::-1]
            here.toward, here.changes = None, []
            self.current = here

    def moved_on(self, version: _Version, change: _Change) -> _Version:
        """The arrays, holding `version`, were changed in place; `change` holds the values
        they had at its edges. Returns the version of the new values; `version` now leads there."""
        after = _Version()
        version.toward, version.changes = after, [change]
        self.current = after
        return after


class KeptFlow:
    """A min-cost flow's residual state, patched and re-solved in work proportional to a change.

    Frozen-ish: a state is never changed by another state's patches. `patched()` returns a new
    *pending* state; `resolve()` turns a pending state into an *optimal* one, in place (that is
    the only change a state ever sees), and returns its `CostFlowResult`. A resolve that gives
    up (work budget) or finds the supplies cannot be met leaves the state *spent*: resolving it
    again returns None or raises again, and it cannot be patched. Keep the optimal parent to
    patch anew.

    Every state of a family (one `from_solution` or `solve`, and everything patched from it)
    shares one set of arrays for the residual capacities, the bitmap of arcs with residual
    partners, the costs and the lower bounds (`_Shared`): a patch writes its few edges into
    them and keeps the values it replaced, a resolve logs the edges it routes on, and a state
    used again (a parent patched anew for an undo or a preview) swaps its values back in, in
    work proportional to what differs. A patch copies only the flow per edge (the result's
    own array) and the node arrays. The topology (CSR offsets, heads, pairings, arc -> edge
    map) is shared read-only.

    Nodes are 0..n-1 and edge e runs `tails[e] -> heads[e]`, as everywhere in the engine; the
    supplies met are those of the flow the state was made from. Safe to use from several
    threads: each state resolves under its own lock, and the shared arrays have one of theirs.
    """

    __slots__ = (
        "_arc_edge",
        "_backward",
        "_edge_flow",
        "_error",
        "_ex",
        "_forward",
        "_from_patch",
        "_head",
        "_lock",
        "_max_cost",
        "_moved",
        "_pending",
        "_pot",
        "_result",
        "_rev",
        "_shared",
        "_spent",
        "_start",
        "_total",
        "_total_upper",
        "_version",
        "last_work",
        "n",
        "n_edges",
    )

    n: int
    n_edges: int
    last_work: int
    """Work units the last `resolve()` of this state spent (see `KEPT_WORK_LIMIT`; 0 before)."""

    def __init__(
        self,
        n: int,
        n_edges: int,
        topology: tuple[np.ndarray, ...],
        shared: _Shared,
        version: _Version,
        edge_flow: np.ndarray,
        pot: np.ndarray,
        ex: np.ndarray,
        pending: np.ndarray,
        total_upper: int,
        max_cost: int,
        total: int,
        from_patch: bool,
    ) -> None:
        """Assemble a state from its parts; use `from_solution`, `solve` or `patched` instead."""
        self.n = n
        self.n_edges = n_edges
        self._start, self._head, self._rev, self._forward, self._backward, self._arc_edge = (
            topology
        )
        self._shared = shared
        self._version = version
        self._edge_flow = edge_flow
        self._pot = pot
        self._ex = ex
        self._pending = pending
        self._total_upper = total_upper
        self._max_cost = max_cost
        self._total = total
        # The edges whose flow may differ from the state this one was patched from.
        self._moved: list[np.ndarray] = []
        self._result: CostFlowResult | None = None
        self._error: InfeasibleError | None = None
        self._spent = False
        self._from_patch = from_patch
        self._lock = threading.Lock()
        self.last_work = 0

    @classmethod
    def from_solution(
        cls,
        n: int,
        tails: Any,
        heads: Any,
        capacities: Any,
        costs: Any,
        lower: Any,
        flow: Any,
        potentials: Any,
    ) -> KeptFlow:
        """Keep an optimal flow with certifying potentials (e.g. a `CostFlowResult`'s).

        Builds the residual CSR once; raises `FlowInputError` unless the flow lies within the
        bounds and the potentials certify it (`CostFlowResult`'s conditions).
        """
        n = check_n(n, 1)
        edges = check_edges(n, tails, heads, capacities, lower=lower, costs=costs)
        m = len(edges.tails)
        x = as_int_array("flow", flow)
        pot = as_int_array("potentials", potentials)
        if len(x) != m:
            raise FlowInputError(f"flow has {len(x)} entries but there are {m} edges")
        if len(pot) != n:
            raise FlowInputError(f"potentials has {len(pot)} entries but n is {n}")
        if len(pot) and int(np.abs(pot).max()) >= _POTENTIAL_LIMIT:
            raise FlowInputError(
                f"potentials must lie between {-_POTENTIAL_LIMIT} and {_POTENTIAL_LIMIT}"
            )
        outside = (x < edges.lower) | (x > edges.upper)
        if outside.any():
            e = int(np.argmax(outside))
            raise FlowInputError(
                f"flow[{e}] is {x[e]}, outside its bounds [{edges.lower[e]}, {edges.upper[e]}]"
            )
        costs_in = np.asarray(edges.costs, dtype=np.int64)
        reduced = costs_in + pot[edges.tails] - pot[edges.heads]
        wrong = ((x < edges.upper) & (reduced < 0)) | ((x > edges.lower) & (reduced > 0))
        if wrong.any():
            e = int(np.argmax(wrong))
            raise FlowInputError(
                f"the potentials do not certify the flow: edge {e} has flow {x[e]} in "
                f"[{edges.lower[e]}, {edges.upper[e]}] and reduced cost {reduced[e]}"
            )
        net = build_residual(n, edges.tails, edges.heads, edges.upper, edges.lower, x, costs_in)
        forward = net.arc_of_edge
        backward = net.rev[forward].astype(np.int64)
        # Arc -> edge: e for the forward arc of edge e, ~e for its reverse.
        arc_edge = np.empty(2 * m, dtype=np.int32)
        arc_edge[forward] = np.arange(m, dtype=np.int32)
        arc_edge[backward] = ~np.arange(m, dtype=np.int32)
        topology = tuple(
            _readonly(a) for a in (net.start, net.head, net.rev, forward, backward, arc_edge)
        )
        shared = _Shared(
            net.cap, _in_bits(net.cap, net.rev), net.cost, costs_in.copy(),
            np.array(edges.lower, dtype=np.int64), topology[3], topology[4],
        )
        total_upper = int(edges.upper.sum())
        max_cost = int(np.abs(costs_in).max(initial=0))
        # Flows lie within [lower, upper] with lower >= 0: the sum of |flow| is the flows' sum
        # (at most `total_upper`, below TOTAL_LIMIT).
        total = exact_dot(x, costs_in, int(x.sum()))
        return cls(
            n, m, topology, shared, shared.current, x.copy(), pot.copy(),
            np.zeros(n, dtype=np.int64), np.zeros(0, dtype=np.int64), total_upper, max_cost,
            total, False,
        )

    @classmethod
    def solve(
        cls,
        n: int,
        tails: Any,
        heads: Any,
        capacities: Any,
        costs: Any,
        *,
        lower: Any = None,
        supplies: Any = None,
        method: str = "auto",
    ) -> KeptFlow:
        """Solve cold with `min_cost_flow` and keep the optimum (InfeasibleError as it raises)."""
        result = min_cost_flow(
            n, tails, heads, capacities, costs, supplies=supplies, lower=lower, method=method
        )
        low = np.zeros(len(result.flow), dtype=np.int64) if lower is None else lower
        kept = cls.from_solution(
            n, tails, heads, capacities, costs, low, result.flow, result.potentials
        )
        kept._result = result
        return kept

    @property
    def pending(self) -> bool:
        """Whether a patch awaits `resolve()` (False once resolved, or for a fresh state)."""
        return self._from_patch and self._result is None and not self._spent

    @property
    def spent(self) -> bool:
        """Whether a resolve gave up or found the supplies unmeetable (the state is then dead)."""
        return self._spent

    def _held(self) -> _Shared:
        """The shared arrays, holding this state's values until another state of the family
        is used (for reading them in checks; the state's own steps hold the lock throughout)."""
        with self._shared.lock:
            self._shared.hold(self._version)
            return self._shared

    @property
    def _cap(self) -> np.ndarray:
        """The residual capacity per arc (shared: see `_held`)."""
        return self._held().cap

    @property
    def _inbits(self) -> np.ndarray:
        """The bitmap of `_next_in` (shared: see `_held`)."""
        return self._held().bits

    @property
    def _cost(self) -> np.ndarray:
        """The cost per arc (shared: see `_held`)."""
        return self._held().cost

    @property
    def _edge_costs(self) -> np.ndarray:
        """The cost per edge (shared: see `_held`)."""
        return self._held().edge_costs

    @property
    def _lower(self) -> np.ndarray:
        """The lower bound per edge (shared: see `_held`)."""
        return self._held().lower

    def supplies(self) -> np.ndarray:
        """The supplies every flow of this state meets: out - in per node of the kept flow."""
        return net_outflow(self.n, *self._edge_ends(np.arange(self.n_edges)), self._flow()) + (
            self._ex
        )

    def _edge_ends(self, edges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Tails and heads of the given edges, read from the CSR (head of the reverse arc)."""
        head = self._head
        return (
            head[self._backward[edges]].astype(np.int64),
            head[self._forward[edges]].astype(np.int64),
        )

    def _flow(self) -> np.ndarray:
        """The current flow per edge (within the bounds; pending excesses not yet routed)."""
        return self._edge_flow

    def patched(
        self,
        arcs: Any,
        *,
        capacities: Any = None,
        lower: Any = None,
        costs: Any = None,
    ) -> KeptFlow:
        """A new pending state with those edges' upper bounds, lower bounds and/or costs changed.

        `arcs` are edge indices (each at most once); the other arrays give one new value per
        listed edge (None: unchanged). This state stays as it was. O(len(arcs)) besides copying
        the flow per edge and the node arrays (the arrays of 2m values are shared, see the
        class).
        """
        if self._spent:
            raise FlowError("this kept flow is spent (its resolve gave up or was infeasible)")
        m = self.n_edges
        edges = as_int_array("arcs", arcs)
        if len(edges) and (int(edges.min()) < 0 or int(edges.max()) >= m):
            bad = int(np.argmax((edges < 0) | (edges >= m)))
            raise FlowInputError(f"arcs[{bad}] is {edges[bad]}; edges are 0..{m - 1}")
        if len(edges) > 1:
            steps = np.diff(edges)
            # Patches list their edges in order: sort only when they come otherwise.
            if not (steps > 0).all() and not np.diff(np.sort(edges)).all():
                raise FlowInputError("arcs lists an edge more than once")
        k = len(edges)

        def given(name: str, values: Any) -> np.ndarray | None:
            if values is None:
                return None
            array = as_int_array(name, values)
            if len(array) != k:
                raise FlowInputError(f"{name} has {len(array)} entries but arcs has {k}")
            return array

        new_upper = given("capacities", capacities)
        new_lower = given("lower", lower)
        new_costs = given("costs", costs)
        if new_costs is not None:
            check_costs(new_costs, self.n)
        forward, backward = self._forward[edges], self._backward[edges]
        tail, head = self._edge_ends(edges)
        shared = self._shared
        with shared.lock:
            shared.hold(self._version)
            old_lower = shared.lower[edges]
            old_flow = old_lower + shared.cap[backward]
            old_upper = old_flow + shared.cap[forward]
            old_costs = shared.edge_costs[edges]
            up = old_upper if new_upper is None else new_upper
            lo = old_lower if new_lower is None else new_lower
            c = old_costs if new_costs is None else new_costs
            if (up < 0).any():
                bad = int(np.argmax(up < 0))
                raise FlowInputError(f"capacities[{bad}] is {up[bad]}; capacities must be >= 0")
            if (lo < 0).any() or (lo > up).any():
                bad = int(np.argmax((lo < 0) | (lo > up)))
                raise FlowInputError(
                    f"edge {edges[bad]} would have lower bound {lo[bad]} and capacity "
                    f"{up[bad]}; 0 <= lower <= capacity is required"
                )
            total_upper = self._total_upper + int(up.sum()) - int(old_upper.sum())
            if total_upper >= TOTAL_LIMIT:
                raise FlowInputError("the capacities would add up to 2**62 or more")
            reduced = c + self._pot[tail] - self._pot[head]
            # Each changed edge goes to the bound its reduced cost asks for, so the kept
            # potentials stay a valid start: every residual arc keeps reduced cost >= 0.
            new_flow = np.where(
                reduced < 0, up, np.where(reduced > 0, lo, np.clip(old_flow, lo, up))
            )
            # Costs and lower bounds go into the change only where a value really changes.
            recost = (c != old_costs).nonzero()[0]
            relower = (lo != old_lower).nonzero()[0]
            change = _Change(
                edges, up - new_flow, new_flow - lo, edges[recost], c[recost], edges[relower],
                lo[relower],
            )
            shared.swap(change)
            child_version = shared.moved_on(self._version, change)
        delta = new_flow - old_flow
        ex = self._ex.copy()
        np.subtract.at(ex, tail, delta)
        np.add.at(ex, head, delta)
        moved = delta != 0
        pending = np.concatenate([self._pending, tail[moved], head[moved]])
        topology = (
            self._start, self._head, self._rev, self._forward, self._backward, self._arc_edge
        )
        edge_flow = self._edge_flow.copy()
        edge_flow[edges] = new_flow
        max_cost = max(self._max_cost, int(np.abs(c).max(initial=0)))
        # The cost of the new flow, from this one's and the changed edges' (exact integers).
        total = self._total + exact_dot(new_flow, c) - exact_dot(old_flow, old_costs)
        child = KeptFlow(
            self.n, m, topology, shared, child_version, edge_flow, self._pot.copy(), ex,
            pending, total_upper, max_cost, total, True,
        )
        # A pending parent's own changes are the child's too (a chain of patches, one resolve).
        child._moved = [*self._moved, change.edges] if self.pending else [change.edges]
        return child

    def changed_edges(self) -> np.ndarray:
        """The edges whose flow may differ from that of the state this one was patched from
        (its patches' edges and those its resolve routed on), sorted; none for a state made
        by `from_solution` or `solve`. Every other edge carries the parent's flow."""
        with self._lock:
            edges = np.sort(np.concatenate([_NONE, *self._moved]), kind="stable")
            if len(edges) < 2:
                return edges
            return edges[np.concatenate(([True], edges[1:] != edges[:-1]))]

    def default_budget(self) -> int:
        """The work `resolve()` allows by default: `KEPT_WORK_LIMIT` times arcs plus nodes."""
        return max(KEPT_WORK_LIMIT * (2 * self.n_edges + self.n), KEPT_WORK_FLOOR)

    def resolve(self, budget: int | None = None) -> CostFlowResult | None:
        """Restore optimality after the patches; None when the work goes over `budget`.

        `budget` counts work units (see `KEPT_WORK_LIMIT`; default `default_budget()`); a
        resolve also gives up early once its work per unit routed projects past it. Raises
        `InfeasibleError` with a violated cut, as `min_cost_flow` does, when the supplies cannot
        be met. The result's potentials certify optimality (see `CostFlowResult`); its flow is
        per edge (the state's own array, read-only from then on).
        """
        limit = self.default_budget() if budget is None else int(budget)
        with self._lock:
            if self._error is not None:
                raise self._error
            if self._spent:
                return None
            if self._result is not None:
                return self._result
            side = np.zeros(self.n, dtype=np.bool_)
            m = self.n_edges
            shared = self._shared
            with shared.lock:
                if len(shared.touched) != m:
                    # One byte per edge and a log of three values per edge: numpy's large
                    # allocations are mapped lazily, so only the pages resolves touch cost.
                    shared.touched = np.zeros(m, dtype=np.uint8)
                    shared.log = np.empty(3 * m, dtype=np.int64)
                touched, log = shared.touched, shared.log
                shared.hold(self._version)
                status, work, _, logged = kept_route_kernel(
                    self._start, self._head, shared.cap, self._rev, shared.cost, self._pot,
                    self._ex, shared.bits, self._arc_edge, self._edge_flow, self._pending,
                    np.int64(limit), side, touched, log,
                )
                if logged:
                    # Whatever the status, the arrays now hold this state's new values: the
                    # versions that led to its old ones lead there through the log.
                    triples = log[: 3 * int(logged)].reshape(-1, 3)
                    change = _Change(triples[:, 0], triples[:, 1], triples[:, 2])
                    touched[change.edges] = 0
                    self._version = shared.moved_on(self._version, change)
                    self._moved.append(change.edges)
                    # The cost moves by the routed edges' flow changes times their costs.
                    before = shared.lower[change.edges] + change.cap_b
                    self._total += exact_dot(
                        self._edge_flow[change.edges] - before, shared.edge_costs[change.edges]
                    )
            self.last_work = int(work)
            if status == 1:
                self._spent = True
                return None
            if status == 2:
                self._spent = True
                deficit = int(-self._ex[self._ex < 0].sum())
                self._error = InfeasibleError(
                    f"the supplies cannot be met: {int(side.sum())} nodes must send out "
                    f"{deficit} more units than the upper bounds of their outgoing edges allow",
                    source_side=side,
                    deficit=deficit,
                )
                raise self._error
            if len(self._pot) and int(np.abs(self._pot).max()) >= _POTENTIAL_LIMIT:
                # Drifted far: shifting by a constant changes no reduced cost.
                self._pot -= self._pot.min()
            self._pending = np.zeros(0, dtype=np.int64)
            self._result = CostFlowResult(
                flow=self._flow(), cost=self._total, potentials=self._pot.copy()
            )
            return self._result
