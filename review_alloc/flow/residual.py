"""The CSR residual network every kernel works on.

Each input edge e becomes a forward arc (residual `upper - flow`) and a reverse arc (residual
`flow - lower`). Arcs are grouped by tail: the arcs leaving node v are `start[v]:start[v + 1]`,
`rev[a]` is the arc paired with a, and `arc_of_edge[e]` is the forward arc of edge e.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from review_alloc.flow._jit import HELPER_OPTIONS, KERNEL_OPTIONS


@dataclass(eq=False)
class ResidualNetwork:
    """Flat arrays of a residual network; `cap` (and nothing else) changes as flow is pushed."""

    n: int
    start: np.ndarray
    head: np.ndarray
    cap: np.ndarray
    rev: np.ndarray
    arc_of_edge: np.ndarray
    cost: np.ndarray

    def edge_flow(self, lower: np.ndarray) -> np.ndarray:
        """Flow on the first len(lower) edges, read from the residuals of their reverse arcs."""
        return lower + self.cap[self.rev[self.arc_of_edge[: len(lower)]]]


@njit(**KERNEL_OPTIONS)
def _csr_kernel(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    forward: np.ndarray,
    backward: np.ndarray,
    costs: np.ndarray,
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    rev: np.ndarray,
    arc_of_edge: np.ndarray,
    cost: np.ndarray,
) -> None:
    """Counting sort of the 2m arcs by tail: forward arcs in edge order, then reverse arcs.

    Fills the arrays given: `start` (n + 1 zeros), `head`, `cap`, `rev`, `cost` (2m each) and
    `arc_of_edge` (m). An empty `costs` means a network without costs (one array type for both
    keeps numba to a single compiled copy); `cost` is then empty too.
    """
    m = tails.size
    costed = costs.size > 0
    for e in range(m):
        start[tails[e] + 1] += 1
        start[heads[e] + 1] += 1
    for v in range(n):
        start[v + 1] += start[v]
    fill = start[:n].copy()
    # Forward arcs are placed before any reverse arc at the same tail, as a stable sort would.
    for e in range(m):
        a = fill[tails[e]]
        fill[tails[e]] += 1
        arc_of_edge[e] = a
        head[a] = heads[e]
        cap[a] = forward[e]
        if costed:
            cost[a] = costs[e]
    for e in range(m):
        a = fill[heads[e]]
        fill[heads[e]] += 1
        f = arc_of_edge[e]
        head[a] = tails[e]
        cap[a] = backward[e]
        rev[a] = f
        rev[f] = a
        if costed:
            cost[a] = -costs[e]


def build_residual(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    upper: np.ndarray,
    lower: np.ndarray,
    flow: np.ndarray,
    costs: np.ndarray | None = None,
) -> ResidualNetwork:
    """Build the residual network of `flow` (lower <= flow <= upper) on the given edges."""
    return _residual(n, tails, heads, upper - flow, flow - lower, costs)


def _residual(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    forward: np.ndarray,
    backward: np.ndarray,
    costs: np.ndarray | None,
) -> ResidualNetwork:
    """The residual network with the given forward and reverse residuals per edge."""
    m = len(tails)
    costed = costs is not None
    # numpy allocates the big arrays: its large allocations fault in far fewer pages than
    # numba's, which on a 3 M edge network was a good part of the build.
    start = np.zeros(n + 1, dtype=np.int64)
    head = np.empty(2 * m, dtype=np.int32)
    cap = np.empty(2 * m, dtype=np.int64)
    rev = np.empty(2 * m, dtype=np.int32)
    arc_of_edge = np.empty(m, dtype=np.int64)
    cost = np.empty(2 * m if costed else 0, dtype=np.int64)
    _csr_kernel(
        np.int64(n),
        np.ascontiguousarray(tails, dtype=np.int64),
        np.ascontiguousarray(heads, dtype=np.int64),
        np.ascontiguousarray(forward, dtype=np.int64),
        np.ascontiguousarray(backward, dtype=np.int64),
        np.ascontiguousarray(costs, dtype=np.int64) if costed else np.zeros(0, np.int64),
        start,
        head,
        cap,
        rev,
        arc_of_edge,
        cost,
    )
    return ResidualNetwork(
        n=n, start=start, head=head, cap=cap, rev=rev, arc_of_edge=arc_of_edge, cost=cost
    )


def net_outflow(n: int, tails: np.ndarray, heads: np.ndarray, flow: np.ndarray) -> np.ndarray:
    """Out-flow minus in-flow at every node, exact in int64 (bincount would go through floats)."""
    balance = np.zeros(n, dtype=np.int64)
    np.add.at(balance, tails, flow)
    np.subtract.at(balance, heads, flow)
    return balance


def build_with_terminals(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    upper: np.ndarray,
    lower: np.ndarray,
    flow: np.ndarray,
    excess: np.ndarray,
    costs: np.ndarray | None = None,
    every_node: bool = False,
) -> tuple[ResidualNetwork, int]:
    """Residual network of `flow` plus a super source n and a super sink n + 1.

    The super source feeds every node with `excess > 0` (flow it still has to send out) and every
    node with `excess < 0` drains into the super sink; terminal arcs cost 0. Edge e < len(tails)
    keeps its index. With `every_node`, edge len(tails) + v runs from the super source to v and
    edge len(tails) + n + v from v to the super sink for every node v (capacity 0 where v has
    nothing to send or receive), so later stages can route new excesses on the same network.
    Returns the network and the total excess to route.
    """
    if every_node:
        senders = receivers = np.arange(n)
        excess_out, excess_in = np.maximum(excess, 0), np.maximum(-excess, 0)
    else:
        senders = np.flatnonzero(excess > 0)
        receivers = np.flatnonzero(excess < 0)
        excess_out, excess_in = excess[senders], -excess[receivers]
    n_extra = len(senders) + len(receivers)
    # The residuals are formed once, on the concatenated arrays: no copy of upper, lower or flow.
    net = _residual(
        n + 2,
        np.concatenate([tails, np.full(len(senders), n), receivers]),
        np.concatenate([heads, senders, np.full(len(receivers), n + 1)]),
        np.concatenate([upper - flow, excess_out, excess_in]),
        np.concatenate([flow - lower, np.zeros(n_extra, dtype=np.int64)]),
        None if costs is None else np.concatenate([costs, np.zeros(n_extra, dtype=np.int64)]),
    )
    return net, int(excess_out.sum())


@njit(**HELPER_OPTIONS)
def scan_edges(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    total_checked: bool,
    out_start: np.ndarray,
    in_start: np.ndarray,
) -> tuple[int, bool, bool]:
    """Check a max-flow input in one pass and count its edges by tail and by head.

    Fills `out_start` and `in_start` (n + 1 zeros each) with the CSR offsets of the edges by
    tail and by head, and returns (status, by_tail, by_head). Status 1: a node id is out of
    range or a capacity is negative (the caller re-runs the full checks for the message; the
    offsets are then incomplete); status 2: the capacities add up to 2**61 or more, which the
    caller decides with the exact check and then calls again with `total_checked`; status 0:
    counted. `by_tail` (`by_head`) says whether the tails (heads) never decrease along the edges.
    """
    m = tails.size
    total = 0
    by_tail = True
    by_head = True
    last_tail = 0
    last_head = 0
    for e in range(m):
        t = tails[e]
        h = heads[e]
        c = caps[e]
        if t < 0 or t >= n or h < 0 or h >= n or c < 0:
            return 1, by_tail, by_head
        if not total_checked:
            # Stop adding before int64 could overflow; the exact check decides from there.
            if c >= 2**61 - total:
                return 2, by_tail, by_head
            total += c
        if t < last_tail:
            by_tail = False
        if h < last_head:
            by_head = False
        last_tail = t
        last_head = h
        out_start[t + 1] += 1
        in_start[h + 1] += 1
    for v in range(n):
        out_start[v + 1] += out_start[v]
        in_start[v + 1] += in_start[v]
    return 0, by_tail, by_head


@njit(**HELPER_OPTIONS)
def _bit_length(x: int) -> int:
    """The number of bits of a nonnegative int (0 for 0)."""
    bits = 0
    while x > 0:
        bits += 1
        x >>= 1
    return bits


@njit(**HELPER_OPTIONS)
def sort_by_tail_packed(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    out_start: np.ndarray,
    order: np.ndarray,
    sorted_heads: np.ndarray,
    sorted_caps: np.ndarray,
) -> None:
    """Stable counting sort of the edges by tail, in O(n + m), into `sorted_heads` and
    `sorted_caps`; `order[p]` becomes the edge at sorted position p.

    The scattered writes are what cost (every tail's bucket is a different cache line, and
    there are too many for any cache), so each edge makes one: a single int64 word holding
    its capacity, head and index (`cap << nb + eb | head << eb | e`, with eb and nb the bits of
    the largest edge and node ids), written where its capacity goes; a sequential pass then
    splits the words in place. One word instead of two scattered writes (the index in `order`
    and capacity with head) took a third off the sort of 3 M shuffled edges. A capacity too
    large for the word's top bits is marked by a negative word (`~(head << eb | e)`) and read
    from `caps`. Node and edge ids must be below 2**31 (the kernels index them in int32).
    """
    m = tails.size
    edge_bits = _bit_length(m)
    node_bits = _bit_length(n)
    edge_mask = (1 << edge_bits) - 1
    node_mask = (1 << node_bits) - 1
    shift = edge_bits + node_bits
    # With both ids below 2**31 the shift is at most 62: capacities 0 and 1 always fit.
    limit = 1 << (63 - shift)
    fill = np.empty(n, dtype=np.int64)
    # A loop, not a slice copy, which would compile a costly shape-mismatch message.
    for v in range(n):
        fill[v] = out_start[v]
    for e in range(m):
        t = tails[e]
        p = fill[t]
        fill[t] = p + 1
        c = caps[e]
        ids = (heads[e] << edge_bits) | e
        sorted_caps[p] = (c << shift) | ids if c < limit else ~ids
    for p in range(m):
        word = sorted_caps[p]
        if word >= 0:
            sorted_caps[p] = word >> shift
        else:
            word = ~word
            sorted_caps[p] = caps[word & edge_mask]
        order[p] = word & edge_mask
        sorted_heads[p] = (word >> edge_bits) & node_mask


TAIL_MASK = 0xFFFFFFFF
"""The word `e << 32 | v` for an edge e with tail v: in `index_entering`'s index and in the
carrying lists of `dinic._edge_blocking_flow`."""


@njit(**HELPER_OPTIONS)
def index_entering(
    n: int,
    out_start: np.ndarray,
    heads: np.ndarray,
    in_start: np.ndarray,
    in_arc: np.ndarray,
    in_pos: np.ndarray,
) -> None:
    """Index edges listed by tail (v's are `out_start[v]:out_start[v + 1]`) by head.

    The edges entering v are at `in_start[v]:in_start[v + 1]` of `in_arc`, in edge order, each
    as one word `e << 32 | tail` (`TAIL_MASK` takes the tail); `in_pos[e]` is e's position.
    Walks against the edges read a node's entering tails in memory order instead of gathering
    `tails[e]` from all over the edge arrays (a cache miss per entering edge, which made the
    walk from the sink several times slower than the one from the source on large networks);
    one word per edge is one scattered write instead of two. The tails come from the offsets,
    so no array of them is read. Edge and node ids must be below 2**31.
    """
    fill = np.empty(n, dtype=np.int64)
    for v in range(n):
        fill[v] = in_start[v]
    for v in range(n):
        for e in range(out_start[v], out_start[v + 1]):
            h = heads[e]
            p = fill[h]
            fill[h] = p + 1
            in_arc[p] = (e << 32) | v
            in_pos[e] = p
