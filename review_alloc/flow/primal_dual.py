"""Minimum-cost flow by the primal-dual method: Dijkstra on reduced costs, then Dinic's phases.

The method of warm starts (a few units to re-route from near-optimal potentials) and the
fallback where cost scaling's prices could overflow:

1. Every edge of negative reduced cost (under the given potentials; zero ones for a cold start)
   starts saturated, one of positive reduced cost at its lower bound, the others at the given
   flow; so every residual arc has reduced cost >= 0 and the potentials are a valid start.
2. A super source feeds the nodes that still have to send flow out, a super sink drains the
   others. Repeat: Dijkstra on reduced costs from the super source (a binary heap with lazy
   deletion, stopped once the super sink is settled), add the clamped distances to the
   potentials, then a maximum flow by Dinic's phases restricted to the admissible arcs (residual
   capacity and zero reduced cost), until every excess is routed or the sink is cut off.

Each step keeps every residual arc at reduced cost >= 0, so the final potentials certify
optimality on the original edges once the super nodes are dropped.
"""

from __future__ import annotations

from typing import cast

import numpy as np
from numba import njit

from review_alloc.flow._jit import HELPER_OPTIONS, KERNEL_OPTIONS
from review_alloc.flow.circulation import unmet_supplies
from review_alloc.flow.dinic import bfs_levels, blocking_flow
from review_alloc.flow.residual import ResidualNetwork, build_with_terminals, net_outflow
from review_alloc.flow.results import InfeasibleError
from review_alloc.flow.validate import EdgeArrays

WARM_WORK_LIMIT = 40
"""A warm start gives up (and the cold solver takes over) once its shortest-path searches have
scanned this many times the arcs of the network: by then cost scaling would be done. At 20 the
warm start of the scarce L benchmark (after a change of bounds) gave up; at 40 it finishes in
about a third of the cold solve, and the other families finish well inside either limit."""

_INF = np.iinfo(np.int64).max


@njit(**HELPER_OPTIONS)
def heap_push(keys: np.ndarray, nodes: np.ndarray, size: int, key: int, node: int) -> int:
    """Push (key, node) on the binary min-heap of `size` entries; return the new size."""
    i = size
    while i > 0:
        parent = (i - 1) >> 1
        if keys[parent] <= key:
            break
        keys[i] = keys[parent]
        nodes[i] = nodes[parent]
        i = parent
    keys[i] = key
    nodes[i] = node
    return size + 1


@njit(**HELPER_OPTIONS)
def heap_pop(keys: np.ndarray, nodes: np.ndarray, size: int) -> tuple[int, int, int]:
    """Pop the smallest (key, node); return key, node and the new size."""
    top_key, top_node = keys[0], nodes[0]
    size -= 1
    key, node = keys[size], nodes[size]
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
        i = child
    if size > 0:
        keys[i] = key
        nodes[i] = node
    return top_key, top_node, size


@njit(**HELPER_OPTIONS)
def dijkstra(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
    source: int,
    sink: int,
    dist: np.ndarray,
    done: np.ndarray,
    heap_keys: np.ndarray,
    heap_nodes: np.ndarray,
    work: np.ndarray,
) -> bool:
    """Reduced-cost distances from source over residual arcs, settled up to the sink.

    Returns whether the sink was reached; nodes not settled keep a tentative distance (or INF)
    that is at least the sink's. Adds the number of arcs scanned to `work[0]`.
    """
    dist[:] = _INF
    done[:] = False
    dist[source] = 0
    # Typed zeros: literals would compile a second copy of heap_push.
    size = heap_push(heap_keys, heap_nodes, np.int64(0), np.int64(0), source)
    while size > 0:
        d, u, size = heap_pop(heap_keys, heap_nodes, size)
        if done[u]:
            continue
        done[u] = True
        if u == sink:
            return True
        work[0] += start[u + 1] - start[u]
        for a in range(start[u], start[u + 1]):
            if cap[a] > 0:
                v = head[a]
                if not done[v]:
                    candidate = d + cost[a] + pot[u] - pot[v]
                    if candidate < dist[v]:
                        dist[v] = candidate
                        # head holds int32: widen so heap_push keeps one int64 signature.
                        size = heap_push(heap_keys, heap_nodes, size, candidate, np.int64(v))
    return False


@njit(**KERNEL_OPTIONS)
def primal_dual_kernel(
    start: np.ndarray,
    head: np.ndarray,
    cap: np.ndarray,
    rev: np.ndarray,
    cost: np.ndarray,
    pot: np.ndarray,
    source: int,
    sink: int,
    demand: int,
    budget: int,
) -> tuple[int, int, bool]:
    """Route up to `demand` units source -> sink at least cost.

    Returns (routed, Dijkstra rounds, whether it gave up): with `budget` > 0 it stops once its
    Dijkstra searches have scanned more arcs than that.
    """
    n = start.size - 1
    dist = np.empty(n, dtype=np.int64)
    done = np.empty(n, dtype=np.bool_)
    heap_keys = np.empty(head.size + 1, dtype=np.int64)
    heap_nodes = np.empty(head.size + 1, dtype=np.int64)
    level = np.empty(n, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    it = np.empty(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    work = np.zeros(1, dtype=np.int64)
    routed = 0
    rounds = 0
    while routed < demand:
        if budget > 0 and work[0] > budget:
            return routed, rounds, True
        if not dijkstra(
            start, head, cap, cost, pot, source, sink, dist, done, heap_keys, heap_nodes, work
        ):
            break
        rounds += 1
        # Clamping at the sink's distance keeps reduced costs >= 0 on arcs into unsettled nodes.
        reach = dist[sink]
        for v in range(n):
            pot[v] += min(dist[v], reach)
        while routed < demand and bfs_levels(
            start, head, cap, source, sink, level, queue, cost, pot
        ):
            # A loop: a slice copy compiles numba's costly shape-mismatch message.
            for v in range(n):
                it[v] = start[v]
            routed += blocking_flow(
                start, head, cap, rev, source, sink, level, it, stack, cost, pot
            )
    return routed, rounds, False


def solve_primal_dual(
    edges: EdgeArrays, need: np.ndarray, base_flow: np.ndarray, pot: np.ndarray, budget: int = 0
) -> tuple[ResidualNetwork, np.ndarray] | None:
    """Primal-dual from `base_flow` and potentials `pot`; return the network and potentials.

    Returns None if the searches scanned more than `budget` arcs (when `budget` > 0).
    """
    n = edges.n
    costs = cast(np.ndarray, edges.costs)
    reduced = costs + pot[edges.tails] - pot[edges.heads]
    # Arcs on the wrong side of their reduced cost go to the bound that makes them optimal.
    start_flow = np.where(reduced < 0, edges.upper, np.where(reduced > 0, edges.lower, base_flow))
    excess = need - net_outflow(n, edges.tails, edges.heads, start_flow)
    net, demand = build_with_terminals(
        n, edges.tails, edges.heads, edges.upper, edges.lower, start_flow, excess, costs
    )
    potentials = np.zeros(n + 2, dtype=np.int64)
    potentials[:n] = pot
    # Terminal arcs cost 0: these potentials keep their reduced costs >= 0 from the start.
    senders, receivers = excess > 0, excess < 0
    potentials[n] = int(pot[senders].max()) if senders.any() else 0
    potentials[n + 1] = int(pot[receivers].min()) if receivers.any() else 0
    routed, _, gave_up = primal_dual_kernel(
        net.start, net.head, net.cap, net.rev, net.cost, potentials,
        np.int64(n), np.int64(n + 1), np.int64(demand), np.int64(budget),
    )
    if gave_up:
        return None
    if routed < demand:
        raise unmet_supplies(net, n, demand, routed)
    return net, potentials[:n].copy()


def solve_warm_primal_dual(
    edges: EdgeArrays, need: np.ndarray, base_flow: np.ndarray, pot: np.ndarray
) -> tuple[ResidualNetwork, np.ndarray] | None:
    """Primal-dual from a previous flow, searching from the deficits on the reversed network.

    After a small change the deficits are few and local (the nodes that lost an in-flow),
    while the excess sits at hubs such as a source that feeds many nodes, from which every
    search would spread over the whole graph. Reversing every edge swaps the two roles: flows
    stay, supplies and potentials change sign. Returns None when the supplies cannot be met,
    so that the cold path can report the cut in the original orientation.
    """
    flipped = EdgeArrays(
        n=edges.n, tails=edges.heads, heads=edges.tails, upper=edges.upper, lower=edges.lower,
        costs=edges.costs,
    )
    # A change that is not small enough to pay off is handed to the cold solver.
    budget = WARM_WORK_LIMIT * (2 * len(edges.tails) + edges.n)
    try:
        solved = solve_primal_dual(flipped, -need, base_flow, -pot, budget)
    except InfeasibleError:
        return None
    if solved is None:
        return None
    net, potentials = solved
    return net, -potentials
