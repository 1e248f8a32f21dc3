"""Minimum-cost flow: the front door, and the primal-dual method used for warm starts.

`min_cost_flow` solves cold by cost scaling (see `costscaling.py`): Dinic routes the supplies to
a feasible flow, fills the tiers of very negative cost (lexicographic weights) one after another,
push-relabel phases make the flow optimal from prices at the scale of the remaining costs, and a
shortest-path pass turns the scaled prices into exact integer potentials. The primal-dual
method below serves warm starts (a few units to re-route from near-optimal potentials) and is
the fallback where scaled prices could overflow:

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

from dataclasses import dataclass
from typing import Any, cast

import numpy as np
from numba import njit

from review_alloc.flow._cache import HELPER_OPTIONS, KERNEL_OPTIONS
from review_alloc.flow.circulation import violated_cut
from review_alloc.flow.costscaling import (
    NO_FLOOR,
    PRICE_LIMIT,
    cost_scaling_kernel,
    exact_potentials,
)
from review_alloc.flow.dinic import bfs_levels, blocking_flow, dinic
from review_alloc.flow.mincost_heap import heap_pop, heap_push
from review_alloc.flow.network import ResidualNetwork, build_with_terminals, net_outflow
from review_alloc.flow.results import CostFlowResult, FlowInputError, InfeasibleError
from review_alloc.flow.validate import (
    EdgeArrays,
    as_int_array,
    check_edges,
    check_n,
    check_supplies,
)

COST_METHODS = ("auto", "cost-scaling", "primal-dual")
"""Algorithms `min_cost_flow(method=...)` accepts for a cold solve; "auto" is cost scaling
(primal-dual where scaled prices could overflow int64). A warm start always tries the
primal-dual method first."""

SCALING_ALPHA = 8
"""Cost scaling divides its tolerance by this much per phase (chosen by the benchmarks)."""

WARM_WORK_LIMIT = 40
"""A warm start gives up (and the cold solver takes over) once its shortest-path searches have
scanned this many times the arcs of the network: by then cost scaling would be done. At 20 the
warm start of the scarce L benchmark re-plan gave up; at 40 it finishes in about a third of the
cold solve, and the other families finish well inside either limit."""

OPTIMALITY_TEST_SCANS = 2
"""Cost scaling tests for early optimality after each phase with eps below one cost unit, giving
each test at most this many passes over the arcs (a test that succeeds needs about one)."""

MAX_TIERS = 8
"""Networks with more tiers of very negative costs than this skip the tier pre-pass of cost
scaling (each tier costs up to two Dinic runs; the planner makes at most five)."""

STARTING_PRICE_SCANS = 8
"""The shortest-path pass that looks for starting prices after the tier pre-pass gives up after
this many passes over the arcs. On the L benchmarks a start that exists is found within three
(one on loose and tight fresh plans); a re-plan's first try, at the largest positive cost, finds
none and spends the whole budget (about 0.2 s) before the try at the lightest tier succeeds."""

_INF = np.iinfo(np.int64).max


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


def _total_cost(flow: np.ndarray, costs: np.ndarray) -> int:
    """Exact total cost as a Python int (int64 products could overflow on extreme inputs)."""
    magnitude = float(np.abs(flow.astype(np.float64)) @ np.abs(costs.astype(np.float64)))
    if magnitude < 2.0**62:
        return int(flow @ costs)
    used = np.flatnonzero(flow)
    return sum(
        int(f) * int(c) for f, c in zip(flow[used].tolist(), costs[used].tolist(), strict=True)
    )




@dataclass(frozen=True, eq=False)
class WarmStart:
    """A previous flow (one value per edge) and potentials (one per node) to restart from.

    They need not fit the new bounds: flows are clipped into them, and arcs whose reduced cost
    says they are on the wrong side are moved to the right bound before re-routing.
    """

    flow: np.ndarray
    potentials: np.ndarray


def _check_warm(warm: WarmStart, m: int, n: int) -> tuple[np.ndarray, np.ndarray]:
    flow = as_int_array("warm.flow", warm.flow)
    pot = as_int_array("warm.potentials", warm.potentials)
    if len(flow) != m:
        raise FlowInputError(f"warm.flow has {len(flow)} entries but there are {m} edges")
    if len(pot) != n:
        raise FlowInputError(f"warm.potentials has {len(pot)} entries but n is {n}")
    # Potentials are differences of path costs; keep them where reduced costs cannot overflow.
    limit = 2**60
    if len(pot) and int(np.abs(pot).max()) >= limit:
        raise FlowInputError(f"warm.potentials must lie between {-limit} and {limit}")
    return flow, pot


def _infeasible(net: ResidualNetwork, n: int, demand: int, routed: int) -> InfeasibleError:
    side = violated_cut(net, n)
    return InfeasibleError(
        f"the supplies cannot be met: {int(side.sum())} nodes must send out {demand - routed} "
        "more units than the upper bounds of their outgoing edges allow",
        source_side=side,
        deficit=demand - routed,
    )


def _primal_dual(
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
        raise _infeasible(net, n, demand, routed)
    return net, potentials[:n].copy()


def _warm_primal_dual(
    edges: EdgeArrays, need: np.ndarray, base_flow: np.ndarray, pot: np.ndarray
) -> tuple[ResidualNetwork, np.ndarray] | None:
    """Primal-dual from a previous flow, searching from the deficits on the reversed network.

    After a small change the deficits are few and local (the papers that lost a reviewer),
    while the excess sits at hubs such as the planner's source, from which every search would
    spread over the whole graph. Reversing every edge swaps the two roles: flows stay, supplies
    and potentials change sign. Returns None when the supplies cannot be met, so that the cold
    path can report the cut in the original orientation.
    """
    flipped = EdgeArrays(
        n=edges.n, tails=edges.heads, heads=edges.tails, upper=edges.upper, lower=edges.lower,
        costs=edges.costs,
    )
    # A change that is not small enough to pay off is handed to the cold solver.
    budget = WARM_WORK_LIMIT * (2 * len(edges.tails) + edges.n)
    try:
        solved = _primal_dual(flipped, -need, base_flow, -pot, budget)
    except InfeasibleError:
        return None
    if solved is None:
        return None
    net, potentials = solved
    return net, -potentials


def _narrow(values: np.ndarray, reach: np.ndarray) -> np.ndarray:
    """An int32 copy of `values` if every value in `reach` fits in int32, else `values` itself."""
    info = np.iinfo(np.int32)
    if reach.size == 0 or (int(reach.min()) >= info.min and int(reach.max()) <= info.max):
        return values.astype(np.int32)
    return values


def _cost_scaling(edges: EdgeArrays, need: np.ndarray) -> tuple[ResidualNetwork, np.ndarray] | None:
    """Cost scaling from a Dinic-routed feasible flow; None if prices would leave int64."""
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
        raise _infeasible(net, n, demand, routed)
    # The terminal arcs have done their job; closing them leaves a circulation problem.
    terminal = net.arc_of_edge[m:]
    net.cap[terminal] = 0
    net.cap[net.rev[terminal]] = 0
    scale = max(1, int(costs.max(initial=0)))
    lightest = _saturate_tiers(net, n, m, scale)
    # Where the tiers interact (a lighter tier gains by swapping which items a heavier one
    # serves), the flow is only within the lightest tier's weight of optimal: the second try.
    pot = optimal_potentials(net, (scale, lightest) if lightest else ())
    if pot is None:
        return None
    return net, pot[:n].copy()


def _saturate_tiers(net: ResidualNetwork, n: int, m: int, scale: int) -> int:
    """Fill the edges of very negative cost, tier by tier, before cost scaling starts.

    A tier is a run of edge costs below -`scale` (the largest positive cost) with gaps of at
    most `scale` between them, as the planner's lexicographic weights make. From most to least
    negative, each tier's edges are saturated and the excess this leaves at their heads is
    routed back to their tails by Dinic, at first without undoing the tier (its reverse arcs
    closed) and then, for what could not go another way, along them too. Earlier tiers stay
    closed while later ones are routed, so no tier's flow is traded for a lighter one's. What
    remains for cost scaling is then imbalance of the order of `scale` instead of the tier
    weights: on the planner's networks about half the phases. Returns the weight of the
    lightest tier (minus its highest cost), or 0 (network untouched) when no edge or more than
    MAX_TIERS tiers lie below -`scale`.
    """
    tier_arcs = net.arc_of_edge[:m][net.cost[net.arc_of_edge[:m]] < -scale]
    if tier_arcs.size == 0:
        return 0
    values = np.unique(net.cost[tier_arcs])
    breaks = np.flatnonzero(np.diff(values) > scale)
    if breaks.size + 1 > MAX_TIERS:
        return 0
    lows = np.concatenate([values[:1], values[breaks + 1]])
    highs = np.concatenate([values[breaks], values[-1:]])
    feed = net.arc_of_edge[m : m + n]
    drain = net.arc_of_edge[m + n :]
    closed: list[tuple[np.ndarray, np.ndarray]] = []
    tier_cost = net.cost[tier_arcs]
    for low, high in zip(lows, highs, strict=True):
        band = tier_arcs[(tier_cost >= low) & (tier_cost <= high)]
        # Every arc of the tier is undone only through its reverse arc, also those the lower
        # bounds' routing filled already: all of them stay closed until the last tier is done.
        back = net.rev[band]
        arcs = band[net.cap[band] > 0]
        if arcs.size:
            amount = net.cap[arcs].copy()
            net.cap[arcs] = 0
            net.cap[net.rev[arcs]] += amount
            reopened = net.cap[back].copy()
            net.cap[back] = 0
            excess = np.zeros(net.n, dtype=np.int64)
            np.add.at(excess, net.head[arcs], amount)
            np.subtract.at(excess, net.head[net.rev[arcs]], amount)
            net.cap[feed] = np.maximum(excess[:n], 0)
            net.cap[drain] = np.maximum(-excess[:n], 0)
            dinic(net, n, n + 1)
            net.cap[back] = reopened
            if net.cap[feed].any():
                # Returning along the tier's own arcs always succeeds: the flow was feasible.
                dinic(net, n, n + 1)
                if net.cap[feed].any():
                    raise AssertionError("excess left over after re-opening the tier's arcs")
            for terminal in (feed, drain):
                net.cap[terminal] = 0
                net.cap[net.rev[terminal]] = 0
        closed.append((back, net.cap[back].copy()))
        net.cap[back] = 0
    for back, residual in closed:
        net.cap[back] = residual
    return -int(values[-1])


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
    # The kernel is bound by reading arcs: 4-byte residuals, where every value fits, cut the
    # bytes read per arc. Costs stay int64: a re-plan's keep tier needs that range, and 4-byte
    # costs only where they fit would compile (and warm up) a second copy of the kernel for a
    # gain lost in the noise on the L instances.
    cap = _narrow(net.cap, net.cap + net.cap[net.rev])
    cost = net.cost
    prices, eps = np.zeros(net.n, dtype=np.int64), 0
    for tolerance in tolerances:
        prices, eps = _starting_prices(net, cap, tolerance, factor)
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


def _starting_prices(
    net: ResidualNetwork, cap: np.ndarray, scale: int, factor: int
) -> tuple[np.ndarray, int]:
    """Scaled prices and a tolerance cost scaling may start from; (zeros, 0) if none found.

    Shortest paths with every arc lengthened by `scale` exist exactly when no residual cycle
    averages below -`scale` per arc; their distances, times `factor`, are then prices at which
    every residual arc's scaled reduced cost is at least -`scale` * `factor`.
    """
    zeros = np.zeros(net.n, dtype=np.int64)
    if scale <= 0 or net.cost.size == 0:
        return zeros, 0
    lengths = net.cost + scale
    # Distances below this floor would make prices outside the kernel's range (and keep a walk
    # around a negative cycle from overflowing): the pass then reports no start.
    floor = np.int64(-(PRICE_LIMIT // factor))
    distances = zeros.copy()
    budget = np.int64(STARTING_PRICE_SCANS * net.head.size)
    if not exact_potentials(net.start, net.head, cap, lengths, distances, budget, floor):
        return zeros, 0
    return distances * factor, scale * factor


def min_cost_flow(
    n: int,
    tails: Any,
    heads: Any,
    capacities: Any,
    costs: Any,
    *,
    supplies: Any = None,
    lower: Any = None,
    method: str = "auto",
    warm: WarmStart | None = None,
) -> CostFlowResult:
    """A flow of least total cost meeting the supplies (`out - in = supplies[v]`) and the bounds.

    Costs are integers and may be negative; `supplies=None` asks for a circulation. Self-loops
    are allowed (a negative one is optimally saturated). The result's potentials certify
    optimality (see `CostFlowResult`). Raises `InfeasibleError` with a cut when the supplies
    cannot be met. `method` picks the algorithm (`COST_METHODS`); `warm` restarts the
    primal-dual method from a previous flow and potentials, which pays off after small changes
    (after a large one it gives up early and the cold `method` solves instead).
    """
    if method not in COST_METHODS:
        choices = ", ".join(repr(m) for m in COST_METHODS)
        raise FlowInputError(f"method {method!r} is not available; choose one of {choices}")
    n = check_n(n, 1)
    edges = check_edges(n, tails, heads, capacities, lower=lower, costs=costs)
    need = np.zeros(n, dtype=np.int64) if supplies is None else check_supplies(supplies, n)
    costs_in = cast(np.ndarray, edges.costs)  # check_edges returns the costs it was given

    solved = None
    if warm is not None:
        flow, pot = _check_warm(warm, len(edges.tails), n)
        solved = _warm_primal_dual(edges, need, np.clip(flow, edges.lower, edges.upper), pot)
    if solved is None and method != "primal-dual":
        solved = _cost_scaling(edges, need)
    if solved is None:
        solved = _primal_dual(edges, need, edges.lower, np.zeros(n, dtype=np.int64))
    if solved is None:  # only a budget makes the primal-dual method give up, and none was set
        raise AssertionError("the primal-dual method gave up without a work budget")
    net, potentials = solved
    flow = net.edge_flow(edges.lower)
    return CostFlowResult(flow=flow, cost=_total_cost(flow, costs_in), potentials=potentials)
