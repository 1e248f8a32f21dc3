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

from review_alloc.flow._jit import HELPER_OPTIONS, KERNEL_OPTIONS
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
def _edge_bfs(
    out_start: np.ndarray,
    in_start: np.ndarray,
    in_arc: np.ndarray,
    carried: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    flow: np.ndarray,
    source: int,
    sink: int,
    level: np.ndarray,
    queue: np.ndarray,
) -> bool:
    """`bfs_levels` on the edge index: forward arcs (caps - flow) first, then reverse arcs.

    `carried[p]` tells whether the edge of `in_arc[p]` (see `index_entering`) carries flow, so
    reverse arcs are tested in memory order and their tails read from the same index.
    """
    level[:] = -1
    level[source] = 0
    queue[0] = source
    q_head, q_tail = 0, 1
    while q_head < q_tail:
        u = queue[q_head]
        q_head += 1
        next_level = level[u] + 1
        for e in range(out_start[u], out_start[u + 1]):
            v = heads[e]
            if level[v] < 0 and caps[e] > flow[e]:
                level[v] = next_level
                if v == sink:
                    return True
                queue[q_tail] = v
                q_tail += 1
        for p in range(in_start[u], in_start[u + 1]):
            # Few edges carry flow: test the flag first and read the tail only for those.
            if carried[p]:
                v = in_arc[p] & TAIL_MASK
                if level[v] < 0:
                    level[v] = next_level
                    if v == sink:
                        return True
                    queue[q_tail] = v
                    q_tail += 1
    return False


@njit(**HELPER_OPTIONS)
def _edge_blocking_flow(
    out_start: np.ndarray,
    in_start: np.ndarray,
    in_arc: np.ndarray,
    in_pos: np.ndarray,
    carried: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    flow: np.ndarray,
    source: int,
    sink: int,
    level: np.ndarray,
    it_out: np.ndarray,
    it_in: np.ndarray,
    stack: np.ndarray,
    nodes: np.ndarray,
) -> int:
    """`blocking_flow` on the edge index, trying arcs in the same order; returns its value.

    A stack entry is an edge e pushed forward, or ~p for the reverse arc of `in_arc[p]`'s edge;
    `nodes` holds the tail of each stack entry, so a retreat needs no lookup. `carried` follows
    every change of `flow`.
    """
    total = 0
    depth = 0
    u = source
    while True:
        if u == sink:
            push = _INF
            for i in range(depth):
                a = stack[i]
                residual = caps[a] - flow[a] if a >= 0 else flow[in_arc[~a] >> 32]
                if residual < push:
                    push = residual
            first_full = -1
            for i in range(depth):
                a = stack[i]
                if a >= 0:
                    flow[a] += push
                    carried[in_pos[a]] = True
                    residual = caps[a] - flow[a]
                else:
                    e = in_arc[~a] >> 32
                    flow[e] -= push
                    residual = flow[e]
                    carried[~a] = residual > 0
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
            end = in_start[u + 1]
            while it_in[u] < end:
                p = it_in[u]
                v = in_arc[p] & TAIL_MASK if carried[p] else -1
                if v >= 0 and level[v] == next_level:
                    stack[depth] = ~p
                    advanced = True
                    break
                it_in[u] = p + 1
        if advanced:
            nodes[depth] = u
            depth += 1
            u = v
            continue
        level[u] = -1
        if depth == 0:
            return total
        depth -= 1
        u = nodes[depth]
        if stack[depth] >= 0:
            it_out[u] += 1
        else:
            it_in[u] += 1


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
    """Mark in `seen` the nodes that can reach sink in the residual graph of `flow`.

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
    carried: np.ndarray,
    in_arc: np.ndarray,
    in_pos: np.ndarray,
) -> tuple[int, int, np.ndarray, np.ndarray]:
    """Dinic on edges listed by tail (the edges leaving v are `out_start[v]:out_start[v + 1]`).

    Returns (value, phases, source side, sink side) and leaves the flow in `flow`. The source
    side comes from the last BFS, which could not reach the sink and so labelled every node
    reachable in the final residual; the sink side (the nodes that can still reach the sink)
    from a walk against the residual arcs.
    """
    index_entering(n, out_start, heads, in_start, in_arc, in_pos)
    level = np.empty(n, dtype=np.int32)
    queue = np.empty(n, dtype=np.int32)
    it_out = np.empty(n, dtype=np.int64)
    it_in = np.empty(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    nodes = np.empty(n, dtype=np.int64)
    value = 0
    phases = 0
    while _edge_bfs(
        out_start, in_start, in_arc, carried, heads, caps, flow, source, sink, level, queue,
    ):
        for v in range(n):
            it_out[v] = out_start[v]
            it_in[v] = in_start[v]
        value += _edge_blocking_flow(
            out_start, in_start, in_arc, in_pos, carried, heads, caps, flow, source, sink,
            level, it_out, it_in, stack, nodes,
        )
        phases += 1
    sink_side = np.zeros(n, dtype=np.bool_)
    _edge_reaching(
        out_start, in_start, in_arc, heads, caps, flow, sink, sink_side, queue,
    )
    return value, phases, level >= 0, sink_side


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
    carried: np.ndarray,
    index: np.ndarray,
    in_arc: np.ndarray,
    work: np.ndarray,
) -> tuple[int, int, int, np.ndarray, np.ndarray]:
    """Check, index and solve a max flow without lower bounds in one call.

    Takes zeroed `flow` (int64) and `carried` (bool) arrays with one entry per edge, an int32
    scratch `index` of shape (2, edges), an int64 scratch `in_arc` (one entry per edge) and a
    zeroed int64 scratch `work` of shape (2, edges), all allocated by the caller (`work` is
    written only when the edges come in no order, so pages of an `np.zeros` that nothing writes
    cost nothing: the sorted copy's heads and capacities). Returns (status, value, phases, source
    side, sink side) and leaves the flow in `flow`, one entry per edge in the caller's order; a
    nonzero status is that of `scan_edges` and nothing was solved.

    The kernels want every node's leaving edges together in memory. Edges listed by tail are
    solved as they are; edges listed by head (a scores file lists pairs paper by paper) are
    solved as they are too, as the reversed problem (sink to source on the reversed edges: the
    same flow per edge, the two cut sides swapped); any other order is counting-sorted by head
    first, solved as the reversed problem too, and the flow mapped back. Sorted by tail instead,
    the benchmark's shuffled instances solved 10-35 % slower on three of its four families (as
    their reviewer-major lists do against paper-major ones); on random graphs neither
    direction was faster.
    """
    in_pos, order = index[0], index[1]
    out_start = np.zeros(n + 1, dtype=np.int64)
    in_start = np.zeros(n + 1, dtype=np.int64)
    status, by_tail, by_head = scan_edges(
        n, tails, heads, caps, total_checked, out_start, in_start
    )
    if status != 0:
        nothing = np.zeros(n, dtype=np.bool_)
        return status, 0, 0, nothing, nothing
    if by_tail:
        value, phases, source_side, sink_side = _solve_by_tail(
            n, heads, caps, out_start, in_start, source, sink, flow, carried, in_arc,
            in_pos,
        )
        return 0, value, phases, source_side, sink_side
    if by_head:
        # In the reversed residual graph, what the sink reaches is what reaches it here.
        value, phases, sink_side, source_side = _solve_by_tail(
            n, tails, caps, in_start, out_start, sink, source, flow, carried, in_arc,
            in_pos,
        )
        return 0, value, phases, source_side, sink_side
    sorted_heads, sorted_caps = work[0], work[1]
    # The reversed edges sorted by their tail (the caller's heads); their heads, the caller's
    # tails, go to `sorted_heads`.
    sort_by_tail_packed(n, heads, tails, caps, in_start, order, sorted_heads, sorted_caps)
    # The sorted copy's flow goes into `flow` itself (one array less to fault in); in the
    # reversed residual graph, what the sink reaches is what reaches it here.
    value, phases, sink_side, source_side = _solve_by_tail(
        n, sorted_heads, sorted_caps, in_start, out_start, sink, source, flow, carried,
        in_arc, in_pos,
    )
    # The flow's few nonzero entries then move to the caller's edges, through two arrays the
    # solve no longer needs.
    positions, amounts = in_arc, sorted_heads
    moved = 0
    for p in range(flow.size):
        f = flow[p]
        if f != 0:
            positions[moved] = p
            amounts[moved] = f
            flow[p] = 0
            moved += 1
    for i in range(moved):
        flow[order[positions[i]]] = amounts[i]
    return 0, value, phases, source_side, sink_side
