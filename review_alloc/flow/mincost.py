"""Minimum-cost flow by the primal-dual method, with Dinic blocking flows on the admissible graph.

1. Lower bounds move into the supplies: every edge starts at its lower bound.
2. Every negative-cost edge starts saturated instead, so every residual arc costs >= 0 and zero
   potentials are a valid start (cheap when, as in the planner, few edges are negative).
3. A super source feeds the nodes that still have to send flow out, a super sink drains the
   others. Repeat: Dijkstra on reduced costs from the super source (a binary heap with lazy
   deletion, stopped once the super sink is settled), add the clamped distances to the
   potentials, then a maximum flow by Dinic's phases restricted to the admissible arcs (residual
   capacity and zero reduced cost), until every excess is routed or the sink is cut off.

Each step keeps every residual arc at reduced cost >= 0, so the final potentials certify
optimality on the original edges once the super nodes are dropped.
"""

from __future__ import annotations

from typing import Any, cast

import numpy as np
from numba import njit

from review_alloc.flow.circulation import violated_cut
from review_alloc.flow.dinic import bfs_levels, blocking_flow
from review_alloc.flow.network import build_with_terminals, net_outflow
from review_alloc.flow.results import CostFlowResult, InfeasibleError
from review_alloc.flow.validate import check_edges, check_n, check_supplies

_INF = np.iinfo(np.int64).max


@njit(cache=True)
def _heap_push(keys: np.ndarray, nodes: np.ndarray, size: int, key: int, node: int) -> int:
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


@njit(cache=True)
def _heap_pop(keys: np.ndarray, nodes: np.ndarray, size: int) -> tuple[int, int, int]:
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


@njit(cache=True)
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
) -> bool:
    """Reduced-cost distances from source over residual arcs, settled up to the sink.

    Returns whether the sink was reached; nodes not settled keep a tentative distance (or INF)
    that is at least the sink's.
    """
    dist[:] = _INF
    done[:] = False
    dist[source] = 0
    size = _heap_push(heap_keys, heap_nodes, 0, 0, source)
    while size > 0:
        d, u, size = _heap_pop(heap_keys, heap_nodes, size)
        if done[u]:
            continue
        done[u] = True
        if u == sink:
            return True
        for a in range(start[u], start[u + 1]):
            if cap[a] > 0:
                v = head[a]
                if not done[v]:
                    candidate = d + cost[a] + pot[u] - pot[v]
                    if candidate < dist[v]:
                        dist[v] = candidate
                        size = _heap_push(heap_keys, heap_nodes, size, candidate, v)
    return False


@njit(cache=True)
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
) -> tuple[int, int]:
    """Route up to `demand` units source -> sink at least cost; return (routed, Dijkstra rounds)."""
    n = start.size - 1
    dist = np.empty(n, dtype=np.int64)
    done = np.empty(n, dtype=np.bool_)
    heap_keys = np.empty(head.size + 1, dtype=np.int64)
    heap_nodes = np.empty(head.size + 1, dtype=np.int64)
    level = np.empty(n, dtype=np.int64)
    queue = np.empty(n, dtype=np.int64)
    it = np.empty(n, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    routed = 0
    rounds = 0
    while routed < demand:
        if not dijkstra(
            start, head, cap, cost, pot, source, sink, dist, done, heap_keys, heap_nodes
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
            it[:] = start[:n]
            routed += blocking_flow(
                start, head, cap, rev, source, sink, level, it, stack, cost, pot
            )
    return routed, rounds


def _total_cost(flow: np.ndarray, costs: np.ndarray) -> int:
    """Exact total cost as a Python int (int64 products could overflow on extreme inputs)."""
    magnitude = float(np.abs(flow.astype(np.float64)) @ np.abs(costs.astype(np.float64)))
    if magnitude < 2.0**62:
        return int(flow @ costs)
    used = np.flatnonzero(flow)
    return sum(
        int(f) * int(c) for f, c in zip(flow[used].tolist(), costs[used].tolist(), strict=True)
    )


def min_cost_flow(
    n: int,
    tails: Any,
    heads: Any,
    capacities: Any,
    costs: Any,
    *,
    supplies: Any = None,
    lower: Any = None,
) -> CostFlowResult:
    """A flow of least total cost meeting the supplies (`out - in = supplies[v]`) and the bounds.

    Costs are integers and may be negative; `supplies=None` asks for a circulation. Self-loops
    are allowed (a negative one is optimally saturated). The result's potentials certify
    optimality (see `CostFlowResult`). Raises `InfeasibleError` with a cut when the supplies
    cannot be met.
    """
    n = check_n(n, 1)
    edges = check_edges(n, tails, heads, capacities, lower=lower, costs=costs)
    need = np.zeros(n, dtype=np.int64) if supplies is None else check_supplies(supplies, n)
    costs_in = cast(np.ndarray, edges.costs)  # check_edges returns the costs it was given

    start_flow = np.where(costs_in < 0, edges.upper, edges.lower)
    excess = need - net_outflow(n, edges.tails, edges.heads, start_flow)
    net, demand = build_with_terminals(
        n, edges.tails, edges.heads, edges.upper, edges.lower, start_flow, excess, costs_in
    )
    potentials = np.zeros(n + 2, dtype=np.int64)
    routed, _ = primal_dual_kernel(
        net.start,
        net.head,
        net.cap,
        net.rev,
        net.cost,
        potentials,
        np.int64(n),
        np.int64(n + 1),
        np.int64(demand),
    )
    if routed < demand:
        side = violated_cut(net, n)
        raise InfeasibleError(
            f"the supplies cannot be met: {int(side.sum())} nodes must send out {demand - routed} "
            "more units than the upper bounds of their outgoing edges allow",
            source_side=side,
            deficit=demand - routed,
        )
    flow = net.edge_flow(edges.lower)
    return CostFlowResult(
        flow=flow, cost=_total_cost(flow, costs_in), potentials=potentials[:n].copy()
    )
