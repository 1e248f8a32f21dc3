"""Dinic's maximum-flow algorithm: BFS level graphs and blocking flows, as numba kernels.

The kernels work in place on a `ResidualNetwork`'s arrays. They also serve the min-cost solver,
which passes `cost` and `pot` to restrict every walk to arcs of zero reduced cost
(`cost[a] + pot[tail] - pot[head] == 0`); the max-flow path passes empty arrays for both. One
argument type for both uses keeps numba to a single compiled copy of each kernel, which costs a
cold start far more than the test of `pot.size` costs a solve.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from review_alloc.flow._jit import HELPER_OPTIONS, KERNEL_OPTIONS, trailing_zeros
from review_alloc.flow.residual import (
    TAIL_MASK,
    ResidualNetwork,
    index_entering,
    scan_edges,
    sort_by_tail_packed,
)

_INF = np.iinfo(np.int64).max


@njit(**HELPER_OPTIONS)
def bfs_levels(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    source: int,
    sink: int,
    level: np.ndarray,
    queue: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
) -> bool:
    """Label every node with its BFS distance from source over usable arcs (-1: unreached).

    A usable arc has residual capacity and, unless `pot` is empty, zero reduced cost. Stops as
    soon as the sink is labelled (pass sink = -1 to label everything reachable). Returns whether
    the sink was reached.
    """
    costed = pot.size > 0
    level[:] = -1
    level[source] = 0
    queue[0] = source
    q_head, q_tail = 0, 1
    while q_head < q_tail:
        u = queue[q_head]
        q_head += 1
        for a in range(start[u], start[u + 1]):
            v = head[a]
            if level[v] < 0 and cap[a] > 0 and (not costed or cost[a] + pot[u] - pot[v] == 0):
                level[v] = level[u] + 1
                if v == sink:
                    return True
                queue[q_tail] = v
                q_tail += 1
    return False


@njit(**HELPER_OPTIONS)
def blocking_flow(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    rev: np.ndarray,
    source: int,
    sink: int,
    level: np.ndarray,
    it: np.ndarray,
    stack: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
) -> int:
    """Push a blocking flow along the level graph with an iterative DFS; return its value.

    `it[v]` is v's current-arc pointer: arcs before it are known to be useless this phase.
    A node whose arcs are exhausted is a dead end and gets level -1, so no later path tries it.
    """
    costed = pot.size > 0
    total = 0
    depth = 0
    u = source
    while True:
        if u == sink:
            push = _INF
            for i in range(depth):
                if cap[stack[i]] < push:
                    push = cap[stack[i]]
            first_full = -1
            for i in range(depth):
                a = stack[i]
                cap[a] -= push
                cap[rev[a]] += push
                if first_full < 0 and cap[a] == 0:
                    first_full = i
            total += push
            # Retreat to the tail of the first saturated arc: the path up to it is still open.
            depth = first_full
            u = head[rev[stack[depth]]]
            continue
        advanced = False
        while it[u] < start[u + 1]:
            a = it[u]
            v = head[a]
            if (
                level[v] == level[u] + 1
                and cap[a] > 0
                and (not costed or cost[a] + pot[u] - pot[v] == 0)
            ):
                stack[depth] = a
                depth += 1
                u = v
                advanced = True
                break
            it[u] += 1
        if not advanced:
            level[u] = -1
            if depth == 0:
                return total
            depth -= 1
            a = stack[depth]
            u = head[rev[a]]
            it[u] += 1


@njit(**KERNEL_OPTIONS)
def dinic_kernel(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    rev: np.ndarray,
    source: int,
    sink: int,
    cost: np.ndarray,
    pot: np.ndarray,
) -> tuple[int, int]:
    """Run Dinic's phases until the sink is unreachable; return (flow value, phases)."""
    n = start.size - 1
    level = np.empty(n, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    it = np.empty(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    value = 0
    phases = 0
    while bfs_levels(start, head, cap, source, sink, level, queue, cost, pot):
        # A loop, not a slice copy: numba's slice assignment compiles a shape-mismatch message
        # formatter that alone costs seconds of a cold start.
        for v in range(n):
            it[v] = start[v]
        value += blocking_flow(start, head, cap, rev, source, sink, level, it, stack, cost, pot)
        phases += 1
    return value, phases


@njit(**KERNEL_OPTIONS)
def reachable_kernel(
    start: np.ndarray, head: np.ndarray, cap: np.ndarray, source: int
) -> np.ndarray:
    """Nodes reachable from source along arcs with residual capacity."""
    n = start.size - 1
    level = np.empty(n, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    # A typed -1 and empty int64 costs: anything else would compile a second copy of bfs_levels.
    no_costs = np.empty(0, dtype=np.int64)
    bfs_levels(start, head, cap, source, np.int64(-1), level, queue, no_costs, no_costs)
    return level >= 0


@njit(**KERNEL_OPTIONS)
def reaching_kernel(
    start: np.ndarray, head: np.ndarray, cap: np.ndarray, rev: np.ndarray, sink: int
) -> np.ndarray:
    """Nodes that can reach sink along arcs with residual capacity (a BFS against the arcs).

    The arcs into v are the partners `rev[a]` of v's own arcs a, so the walk needs no index of
    arcs by head.
    """
    n = start.size - 1
    seen = np.zeros(n, dtype=np.bool_)
    queue = np.empty(n, dtype=np.int64)
    seen[sink] = True
    queue[0] = sink
    q_head, q_tail = 0, 1
    while q_head < q_tail:
        v = queue[q_head]
        q_head += 1
        for a in range(start[v], start[v + 1]):
            u = head[a]
            if not seen[u] and cap[rev[a]] > 0:
                seen[u] = True
                queue[q_tail] = u
                q_tail += 1
    return seen


def dinic(net: ResidualNetwork, source: int, sink: int) -> tuple[int, int]:
    """Augment `net` in place to a maximum source-sink flow; return (added value, phases)."""
    no_costs = np.empty(0, dtype=np.int64)
    value, phases = dinic_kernel(
        net.start, net.head, net.cap, net.rev, np.int64(source), np.int64(sink), no_costs,
        no_costs,
    )
    return int(value), int(phases)


def reachable(net: ResidualNetwork, source: int) -> np.ndarray:
    """Boolean mask of the nodes reachable from source in the residual network."""
    return reachable_kernel(net.start, net.head, net.cap, np.int64(source))


def reaching(net: ResidualNetwork, sink: int) -> np.ndarray:
    """Boolean mask of the nodes that can reach sink in the residual network."""
    return reaching_kernel(net.start, net.head, net.cap, net.rev, np.int64(sink))


@njit(**HELPER_OPTIONS)
def _in_id_order(queue: np.ndarray, low: int, high: int, bits: np.ndarray) -> None:
    """Put the distinct node ids `queue[low:high]` in increasing order, through `bits` (a
    zeroed bitmap of 32 bits a word, left zeroed)."""
    first_word = bits.size
    last_word = -1
    for i in range(low, high):
        # Widened from the queue's int32: a bit shift in int32 would overflow at bit 31.
        v = np.int64(queue[i])
        w = v >> 5
        bits[w] |= 1 << (v & 31)
        first_word = min(first_word, w)
        last_word = max(last_word, w)
    i = low
    for w in range(first_word, last_word + 1):
        word = bits[w]
        bits[w] = 0
        while word != 0:
            queue[i] = (w << 5) + np.int64(trailing_zeros(word))
            i += 1
            word &= word - 1


@njit(**HELPER_OPTIONS)
def _stop_at_sink(level: np.ndarray, queue: np.ndarray, low: int, high: int) -> int:
    """Unlabel the nodes `queue[low:high]`, found at the sink's level before it; return
    `-(high + 1)`.

    No path of the level graph goes through them, yet a blocking flow would search each one;
    which of them a search finds before the sink depends on the order it takes (10-20 % of a
    solve on some networks).
    """
    for i in range(low, high):
        level[queue[i]] = -1
    return -(high + 1)


@njit(**HELPER_OPTIONS)
def _edge_bfs(
    out_start: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    flow: np.ndarray,
    first: np.ndarray,
    pool: np.ndarray,
    source: int,
    sink: int,
    level: np.ndarray,
    queue: np.ndarray,
    marks: np.ndarray,
) -> int:
    """`bfs_levels` on edges listed by tail: forward arcs (caps - flow) first, then the reverse
    arcs of the node's list of carrying edges (see `_edge_blocking_flow`).

    Returns the number of nodes labelled, negated when the search stopped at the sink (then
    the labels are partial, and only the sink has the sink's level); a full search labels
    exactly the nodes reachable from source.
    """
    n = level.size
    # The first half of `marks` flags the labelled nodes, the second is `_in_id_order`'s.
    labelled, scratch = marks[: marks.size >> 1], marks[marks.size >> 1 :]
    level[:] = -1
    labelled[:] = 0
    level[source] = 0
    labelled[source >> 5] = 1 << (source & 31)
    queue[0] = source
    # Typed, not literals: a literal would compile second copies of the helpers they reach.
    q_head, q_tail = np.int64(0), np.int64(1)
    level_end = np.int64(1)
    while q_head < q_tail:
        if q_head == level_end:
            level_end = q_tail
            # A large level is searched in id order, so its nodes' arcs are read in memory
            # order: in the order found (that of the edges, on edges given in no order) every
            # node's arcs start at a cache miss. The reorder reads at most 2 words a node.
            if (level_end - q_head) * 64 >= n:
                _in_id_order(queue, q_head, level_end, scratch)
        u = queue[q_head]
        q_head += 1
        next_level = level[u] + 1
        for e in range(out_start[u], out_start[u + 1]):
            v = heads[e]
            # Whether v is labelled, from a bitmap of 32 bits a word that stays in the fastest
            # cache where the labels would not: the heads come in no order within a node.
            if not (labelled[v >> 5] >> (v & 31)) & 1 and caps[e] > flow[e]:
                labelled[v >> 5] |= 1 << (v & 31)
                level[v] = next_level
                if v == sink:
                    return _stop_at_sink(level, queue, level_end, q_tail)
                queue[q_tail] = v
                q_tail += 1
        k = first[u]
        while k >= 0:
            word = pool[2 * k]
            v = word & TAIL_MASK
            # The label first: it is in a small array, the flow in a large one.
            if not (labelled[v >> 5] >> (v & 31)) & 1 and flow[word >> 32] > 0:
                labelled[v >> 5] |= 1 << (v & 31)
                level[v] = next_level
                if v == sink:
                    return _stop_at_sink(level, queue, level_end, q_tail)
                queue[q_tail] = v
                q_tail += 1
            k = pool[2 * k + 1]
    return q_tail


@njit(**HELPER_OPTIONS)
def _edge_blocking_flow(
    out_start: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    flow: np.ndarray,
    first: np.ndarray,
    pool: np.ndarray,
    pooled: np.ndarray,
    pool_size: int,
    source: int,
    sink: int,
    level: np.ndarray,
    it_out: np.ndarray,
    it_in: np.ndarray,
    stack: np.ndarray,
    nodes: np.ndarray,
) -> tuple[int, int]:
    """`blocking_flow` on edges listed by tail; returns (its value, the new pool size).

    The reverse arcs are those of edges that carry flow, so instead of an index of every
    edge by head each node keeps a list of the edges into it that ever carried flow: entry k
    of `pool` is the word `edge << 32 | tail` at `2k` and the next entry of the same head at
    `2k + 1` (-1 ends a list, which starts at `first[head]`); `pooled[e]` says whether edge e
    has an entry. An edge enters the list of its head the first time it carries flow and stays
    (the flow is read at each use). A new entry goes first in its list, behind the node's
    current arc: its reverse arc leads one level down, so it is of no use this phase.

    A stack entry is an edge e pushed forward, or ~k for the reverse arc of pool entry k;
    `nodes` holds the tail of each stack entry, so a retreat needs no lookup.
    """
    total = 0
    depth = 0
    u = source
    while True:
        if u == sink:
            push = _INF
            for i in range(depth):
                a = stack[i]
                residual = caps[a] - flow[a] if a >= 0 else flow[pool[2 * ~a] >> 32]
                if residual < push:
                    push = residual
            first_full = -1
            for i in range(depth):
                a = stack[i]
                if a >= 0:
                    if flow[a] == 0 and not pooled[a]:
                        pooled[a] = True
                        v = heads[a]
                        pool[2 * pool_size] = (a << 32) | nodes[i]
                        pool[2 * pool_size + 1] = first[v]
                        first[v] = pool_size
                        pool_size += 1
                    flow[a] += push
                    residual = caps[a] - flow[a]
                else:
                    e = pool[2 * ~a] >> 32
                    flow[e] -= push
                    residual = flow[e]
                if first_full < 0 and residual == 0:
                    first_full = i
            total += push
            # Retreat to the tail of the first saturated arc: the path up to it is still open.
            depth = first_full
            u = nodes[depth]
            continue
        next_level = level[u] + 1
        advanced = False
        end = out_start[u + 1]
        while it_out[u] < end:
            e = it_out[u]
            v = heads[e]
            if level[v] == next_level and caps[e] > flow[e]:
                stack[depth] = e
                advanced = True
                break
            it_out[u] = e + 1
        if not advanced:
            k = it_in[u]
            while k >= 0:
                word = pool[2 * k]
                v = word & TAIL_MASK
                if level[v] == next_level and flow[word >> 32] > 0:
                    stack[depth] = ~k
                    advanced = True
                    break
                k = pool[2 * k + 1]
                it_in[u] = k
        if advanced:
            nodes[depth] = u
            depth += 1
            u = v
            continue
        level[u] = -1
        if depth == 0:
            return total, pool_size
        depth -= 1
        u = nodes[depth]
        a = stack[depth]
        if a >= 0:
            it_out[u] += 1
        else:
            it_in[u] = pool[2 * ~a + 1]


@njit(**HELPER_OPTIONS)
def _reaching_by_sweeps(
    n: int,
    out_start: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    flow: np.ndarray,
    first: np.ndarray,
    pool: np.ndarray,
    sink: int,
    level: np.ndarray,
    seen: np.ndarray,
    pending: np.ndarray,
    budget: int,
) -> bool:
    """Mark in `seen` the nodes that can reach sink in the residual graph, by sweeps over the
    nodes' own arcs; False (and `seen` incomplete) when that took more than `budget` arc reads.

    A node reaches the sink when one of its residual arcs (an edge below capacity, or the
    reverse arc of an edge into it that carries flow) leads to a node that does. Each sweep
    tests the nodes not yet marked, marks in place (so one sweep often reaches far) and stops
    at a node's first such arc; the sweeps end when one marks nothing. Only nodes outside the
    source's side (`level < 0` after the last, complete search) can reach the sink, so when
    all of them are marked nothing is left to test: on networks where every node is on one
    side or the other, that ends the walk long before it has read every arc. The walk needs
    no index of the arcs by head, which a search from the sink would.
    """
    seen[sink] = True
    count = 0
    for v in range(n):
        if level[v] < 0 and v != sink:
            pending[count] = v
            count += 1
    reads = 0
    changed = True
    while changed and count > 0:
        changed = False
        kept = 0
        for i in range(count):
            u = pending[i]
            found = False
            begin = out_start[u]
            end = out_start[u + 1]
            for e in range(begin, end):
                v = heads[e]
                if seen[v] and caps[e] > flow[e]:
                    found = True
                    reads += e - begin
                    break
            if not found:
                reads += end - begin
                k = first[u]
                while k >= 0:
                    word = pool[2 * k]
                    if seen[word & TAIL_MASK] and flow[word >> 32] > 0:
                        found = True
                        break
                    k = pool[2 * k + 1]
            if found:
                seen[u] = True
                changed = True
            else:
                pending[kept] = u
                kept += 1
        count = kept
        if changed and count > 0 and reads > budget:
            return False
    return True


@njit(**HELPER_OPTIONS)
def _edge_reaching(
    out_start: np.ndarray,
    in_start: np.ndarray,
    in_arc: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    flow: np.ndarray,
    sink: int,
    seen: np.ndarray,
    queue: np.ndarray,
) -> None:
    """Mark in `seen` the nodes that can reach sink in the residual graph of `flow`, by a
    search from the sink against the arcs over an index of the edges by head.

    The residual arcs into v are its entering edges below capacity and the reverse arcs of its
    leaving edges that carry flow (no lower bounds on this path).
    """
    seen[sink] = True
    queue[0] = sink
    q_head, q_tail = 0, 1
    while q_head < q_tail:
        v = queue[q_head]
        q_head += 1
        for p in range(in_start[v], in_start[v + 1]):
            word = in_arc[p]
            u = word & TAIL_MASK
            # The tails come in memory order; only an unseen one costs a look at its edge.
            if not seen[u]:
                e = word >> 32
                if caps[e] > flow[e]:
                    seen[u] = True
                    queue[q_tail] = u
                    q_tail += 1
        for e in range(out_start[v], out_start[v + 1]):
            u = heads[e]
            if not seen[u] and flow[e] > 0:
                seen[u] = True
                queue[q_tail] = u
                q_tail += 1


@njit(**HELPER_OPTIONS)
def _solve_by_tail(
    n: int,
    heads: np.ndarray,
    caps: np.ndarray,
    out_start: np.ndarray,
    in_start: np.ndarray,
    source: int,
    sink: int,
    flow: np.ndarray,
    pooled: np.ndarray,
    pool: np.ndarray,
) -> tuple[int, int, np.ndarray, np.ndarray, int]:
    """Dinic on edges listed by tail (the edges leaving v are `out_start[v]:out_start[v + 1]`).

    Returns (value, phases, source side, sink side, pool size) and leaves the flow in `flow`;
    every edge that carries flow has an entry in `pool` (see `_edge_blocking_flow`). The source
    side comes from the last BFS, which could not reach the sink and so labelled every node
    reachable in the final residual; the sink side (the nodes that can still reach the sink)
    from sweeps over the nodes outside it, or, should those take more than about two reads of
    every arc, from a search against the arcs over an index of the edges by head (`in_start`
    holds its offsets).
    """
    m = heads.size
    level = np.empty(n, dtype=np.int32)
    queue = np.empty(n, dtype=np.int32)
    marks = np.zeros(2 * ((n >> 5) + 1), dtype=np.int64)
    first = np.full(n, -1, dtype=np.int64)
    it_out = np.empty(n, dtype=np.int64)
    it_in = np.empty(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    nodes = np.empty(n, dtype=np.int64)
    value = 0
    phases = 0
    # Typed, not a literal 0: a literal would compile a second copy of the blocking flow.
    pool_size = np.int64(0)
    while _edge_bfs(
        out_start, heads, caps, flow, first, pool, source, sink, level, queue, marks
    ) < 0:
        for v in range(n):
            it_out[v] = out_start[v]
            it_in[v] = first[v]
        pushed, pool_size = _edge_blocking_flow(
            out_start, heads, caps, flow, first, pool, pooled, pool_size, source, sink,
            level, it_out, it_in, stack, nodes,
        )
        value += pushed
        phases += 1
    sink_side = np.zeros(n, dtype=np.bool_)
    if not _reaching_by_sweeps(
        n, out_start, heads, caps, flow, first, pool, sink, level, sink_side, stack,
        2 * m + n,
    ):
        in_arc = np.empty(m, dtype=np.int64)
        in_pos = np.empty(m, dtype=np.int32)
        index_entering(n, out_start, heads, in_start, in_arc, in_pos)
        sink_side[:] = False
        _edge_reaching(
            out_start, in_start, in_arc, heads, caps, flow, sink, sink_side, queue,
        )
    return value, phases, level >= 0, sink_side, pool_size


@njit(**KERNEL_OPTIONS)
def max_flow_kernel(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    source: int,
    sink: int,
    total_checked: bool,
    flow: np.ndarray,
    pooled: np.ndarray,
    pool: np.ndarray,
    order: np.ndarray,
    work: np.ndarray,
) -> tuple[int, int, int, np.ndarray, np.ndarray]:
    """Check, index and solve a max flow without lower bounds in one call.

    Takes zeroed `flow` (int64) and `pooled` (bool) arrays with one entry per edge, an int64
    scratch `pool` of two entries per edge (`_edge_blocking_flow` uses the front of it, the rest
    is never touched), an int32 scratch `order` (one entry per edge) and a zeroed int64 scratch
    `work` of shape (2, edges), all allocated by the caller (`order` and `work` are written
    only when the edges come in no order, so pages of an `np.empty` or `np.zeros` that nothing
    writes cost nothing: the sorted copy's heads and capacities). Returns (status, value,
    phases, source side, sink side) and leaves the flow in `flow`, one entry per edge in the
    caller's order; a nonzero status is that of `scan_edges` and nothing was solved.

    The kernels want every node's leaving edges together in memory. Edges listed by tail are
    solved as they are; edges listed by head (a scores file lists pairs paper by paper) are
    solved as they are too, as the reversed problem (sink to source on the reversed edges: the
    same flow per edge, the two cut sides swapped); any other order is counting-sorted by head
    first, solved as the reversed problem too, and the flow mapped back. Sorted by tail instead,
    the benchmark's shuffled instances solved 30-50 % slower on its scarce and skewed families
    and 2-5 % faster on the other two (measured again with the carrying lists); on random
    graphs neither direction was faster.
    """
    out_start = np.zeros(n + 1, dtype=np.int64)
    in_start = np.zeros(n + 1, dtype=np.int64)
    status, by_tail, by_head = scan_edges(
        n, tails, heads, caps, total_checked, out_start, in_start
    )
    if status != 0:
        nothing = np.zeros(n, dtype=np.bool_)
        return status, 0, 0, nothing, nothing
    if by_tail:
        value, phases, source_side, sink_side, _ = _solve_by_tail(
            n, heads, caps, out_start, in_start, source, sink, flow, pooled, pool,
        )
        return 0, value, phases, source_side, sink_side
    if by_head:
        # In the reversed residual graph, what the sink reaches is what reaches it here.
        value, phases, sink_side, source_side, _ = _solve_by_tail(
            n, tails, caps, in_start, out_start, sink, source, flow, pooled, pool,
        )
        return 0, value, phases, source_side, sink_side
    sorted_heads, sorted_caps = work[0], work[1]
    # The reversed edges sorted by their tail (the caller's heads); their heads, the caller's
    # tails, go to `sorted_heads`.
    sort_by_tail_packed(n, heads, tails, caps, in_start, order, sorted_heads, sorted_caps)
    # The sorted copy's flow goes into `flow` itself (one array less to fault in); in the
    # reversed residual graph, what the sink reaches is what reaches it here.
    value, phases, sink_side, source_side, pool_size = _solve_by_tail(
        n, sorted_heads, sorted_caps, in_start, out_start, sink, source, flow, pooled, pool,
    )
    # Only pooled edges can carry flow: their amounts move to the caller's edges, through the
    # pool's list links, which the solve no longer needs.
    for k in range(pool_size):
        p = pool[2 * k] >> 32
        pool[2 * k + 1] = flow[p]
        flow[p] = 0
    for k in range(pool_size):
        flow[order[pool[2 * k] >> 32]] = pool[2 * k + 1]
    return 0, value, phases, source_side, sink_side
