"""The tier pre-pass of cost scaling: lexicographic cost tiers are filled by Dinic, tier by tier,
and cost scaling starts from prices at the scale of the remaining costs.

Every optimum is compared with OR-Tools SimpleMinCostFlow (`ortools_cost`) and passes the
reduced-cost certificate check; the networks are random, with the layered shape and tier
weights of a reviewer allocation (a fact of the trade's planning models, common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
from flow_helpers import ortools_cost

from review_alloc.flow import check_cost_certificate, min_cost_flow
from review_alloc.flow.cost_scaling import PRICE_LIMIT
from review_alloc.flow.dinic import dinic
from review_alloc.flow.residual import ResidualNetwork, build_with_terminals, net_outflow
from review_alloc.flow.tier_start import MAX_TIERS, saturate_tiers, starting_prices


def tiered_circulation(
    rng: np.random.Generator,
    n_items: int,
    n_agents: int,
    per_item: int,
    tiers: list[int],
    supply: float,
) -> tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """source -> item (one edge per tier weight) -> agent (scores) -> sink -> source.

    Item edges cost minus a tier weight; pair edges cost a nonnegative score penalty; agent
    capacities add up to about `supply` times the item demand, so below 1 some tiers stay
    partly empty. A few pair edges carry a lower bound of 1 (a pinned pair).
    """
    source, sink = 0, 1 + n_items + n_agents
    tails, heads, caps, costs, lower = [], [], [], [], []

    def edge(t: int, h: int, cap: int, cost: int, low: int = 0) -> None:
        tails.append(t)
        heads.append(h)
        caps.append(cap)
        costs.append(cost)
        lower.append(low)

    for j in range(n_items):
        for weight in tiers:
            edge(source, 1 + j, int(rng.integers(1, 3)), -weight)
    pinned = set(rng.choice(n_items, max(1, n_items // 10), replace=False).tolist())
    pins = np.zeros(n_agents, np.int64)
    for j in range(n_items):
        for k, i in enumerate(rng.choice(n_agents, per_item, replace=False)):
            low = 1 if (j in pinned and k == 0) else 0
            pins[i] += low
            edge(1 + j, 1 + n_items + int(i), 1, int(rng.integers(0, 1_000)), low)
    demand = n_items * 2 * len(tiers)
    for i in range(n_agents):
        # Room for the pinned pairs at least, so that every network is feasible.
        edge(1 + n_items + i, sink, max(1, int(pins[i]), round(supply * demand / n_agents)), 0)
    edge(sink, source, demand + n_items, 0)
    return (
        sink + 1,
        np.array(tails, np.int64),
        np.array(heads, np.int64),
        np.array(caps, np.int64),
        np.array(costs, np.int64),
        np.array(lower, np.int64),
    )


@pytest.mark.parametrize("supply", [0.4, 0.8, 1.5])
@pytest.mark.parametrize("seed", range(4))
def test_tiered_networks_reach_the_reference_optimum(seed: int, supply: float) -> None:
    rng = np.random.default_rng(seed)
    tiers = [4_000_000, 2_000_000, 1_000_003][: 1 + seed % 3]
    n, tails, heads, caps, costs, lower = tiered_circulation(rng, 40, 25, 6, tiers, supply)
    result = min_cost_flow(n, tails, heads, caps, costs, lower=lower)
    # OR-Tools SimpleMinCostFlow on the same network (lower bounds shifted out).
    assert result.cost == ortools_cost(n, tails, heads, caps, costs, lower=lower)
    assert check_cost_certificate(
        n, tails, heads, caps, costs, result.flow, result.potentials, lower=lower
    ) == result.cost


def routed_network(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    costs: np.ndarray,
    lower: np.ndarray,
) -> ResidualNetwork:
    """The cold solver's network after routing the lower bounds (terminals for every node)."""
    excess = -net_outflow(n, tails, heads, lower)
    net, demand = build_with_terminals(
        n, tails, heads, caps, lower, lower, excess, costs, every_node=True
    )
    assert dinic(net, n, n + 1)[0] == demand
    terminal = net.arc_of_edge[len(tails):]
    net.cap[terminal] = 0
    net.cap[net.rev[terminal]] = 0
    return net


@pytest.mark.parametrize("supply", [0.4, 1.5])
def test_pre_pass_keeps_a_feasible_flow_and_finds_a_close_start(supply: float) -> None:
    rng = np.random.default_rng(7)
    n, tails, heads, caps, costs, lower = tiered_circulation(
        rng, 60, 30, 5, [4_000_000, 2_000_000], supply
    )
    net = routed_network(n, tails, heads, caps, costs, lower)
    scale = int(costs.max())
    assert saturate_tiers(net, n, len(tails), scale) == 2_000_000
    flow = net.edge_flow(lower)[: len(tails)]
    assert (flow >= lower).all() and (flow <= caps).all()
    assert not net_outflow(n, tails, heads, flow).any()
    # The tiers are filled as far as the capacities allow, every lighter tier never at the
    # expense of a heavier one, so the flow is within `scale` per arc of optimal: the budgeted
    # shortest-path pass finds prices for that tolerance.
    prices, eps = starting_prices(net, net.cap, scale, net.n + 1, PRICE_LIMIT)
    assert eps == scale * (net.n + 1)
    reduced = net.cost * (net.n + 1) + prices[net.head[net.rev]] - prices[net.head]
    assert (reduced[net.cap > 0] >= -eps).all()


def test_too_many_tiers_skip_the_pre_pass_and_still_solve() -> None:
    rng = np.random.default_rng(3)
    # Tier weights far apart from each other: each is a tier of its own.
    tiers = [10_000 * (k + 2) ** 2 for k in range(MAX_TIERS + 1)]
    n, tails, heads, caps, costs, lower = tiered_circulation(rng, 12, 8, 4, tiers, 0.7)
    net = routed_network(n, tails, heads, caps, costs, lower)
    before = net.cap.copy()
    assert saturate_tiers(net, n, len(tails), int(costs.max())) == 0
    assert (net.cap == before).all()
    result = min_cost_flow(n, tails, heads, caps, costs, lower=lower)
    # OR-Tools SimpleMinCostFlow on the same network.
    assert result.cost == ortools_cost(n, tails, heads, caps, costs, lower=lower)


def test_networks_without_tiers_are_left_alone() -> None:
    rng = np.random.default_rng(5)
    n, tails, heads, caps, costs, lower = tiered_circulation(rng, 20, 10, 4, [500], 0.9)
    net = routed_network(n, tails, heads, caps, costs, lower)
    # Item edges cost -500, above minus the largest pair cost: no tier to fill.
    assert saturate_tiers(net, n, len(tails), int(costs.max())) == 0
    result = min_cost_flow(n, tails, heads, caps, costs, lower=lower)
    # OR-Tools SimpleMinCostFlow on the same network.
    assert result.cost == ortools_cost(n, tails, heads, caps, costs, lower=lower)


def test_no_start_is_claimed_for_a_flow_far_from_optimal() -> None:
    rng = np.random.default_rng(11)
    n, tails, heads, caps, costs, lower = tiered_circulation(
        rng, 30, 15, 5, [4_000_000, 2_000_000], 1.2
    )
    # Without the pre-pass the tiers are empty: residual cycles through them cost millions,
    # far below -scale per arc, so the shortest-path pass must find a negative cycle.
    net = routed_network(n, tails, heads, caps, costs, lower)
    prices, eps = starting_prices(net, net.cap, int(costs.max()), net.n + 1, PRICE_LIMIT)
    assert eps == 0 and not prices.any()


def chained_tiers(
    rng: np.random.Generator, n_items: int, n_agents: int, n_groups: int
) -> tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """source -> agent -> (group) -> item -> sink -> source, with tiers on edges in series.

    The planner's shape with the senior rule: a group edge (a paper's senior node, weight
    40,000) lies upstream of the item's required edge (300,000) and extra edge (10,000), and
    some groups are fed by few agents or none, so their tier must hand flow back.
    A few agent-item edges carry a lower bound of 1 (a pinned pair).
    """
    source = 0
    agents = 1 + np.arange(n_agents)
    groups = 1 + n_agents + np.arange(n_groups)
    items = 1 + n_agents + n_groups + np.arange(n_items)
    sink = 1 + n_agents + n_groups + n_items
    rows: list[tuple[int, int, int, int, int]] = []
    for a in agents:
        rows.append((source, int(a), int(rng.integers(0, 4)), 0, 0))
    group_item = rng.integers(0, n_items, n_groups)
    for a in agents:
        for it in rng.choice(n_items, min(n_items, int(rng.integers(1, 4))), replace=False):
            mine = np.flatnonzero(group_item == it)
            head = items[it] if len(mine) == 0 or rng.random() < 0.5 else groups[rng.choice(mine)]
            rows.append((int(a), int(head), 1, int(rng.integers(0, 100)), int(rng.random() < 0.15)))
    for k, g in enumerate(groups):
        rows.append((int(g), int(items[group_item[k]]), int(rng.integers(1, 3)), -40_000, 0))
        rows.append((int(g), int(items[group_item[k]]), 3, 0, 0))
    for it in items:
        rows.append((int(it), sink, int(rng.integers(0, 2)), -300_000, 0))
        rows.append((int(it), sink, int(rng.integers(0, 3)), -10_000, 0))
    rows.append((sink, source, 1_000_000, 0, 0))
    t, h, c, w, low = (np.array(col, np.int64) for col in zip(*rows, strict=True))
    return sink + 1, t, h, c, w, low


def _assert_pre_pass_keeps_a_circulation(
    n: int,
    tails: np.ndarray,
    heads: np.ndarray,
    caps: np.ndarray,
    costs: np.ndarray,
    lower: np.ndarray,
) -> None:
    net = routed_network(n, tails, heads, caps, costs, lower)
    saturate_tiers(net, n, len(tails), max(1, int(costs.max())))
    flow = net.edge_flow(lower)[: len(tails)]
    assert (flow >= lower).all() and (flow <= caps).all()
    assert not net_outflow(n, tails, heads, flow).any()


def test_a_lighter_tier_pushing_through_a_heavier_ones_edge_keeps_the_flow() -> None:
    # Regression: the group edge 4 -> 5 has no feed, so its tier (-40,000) hands its units back
    # along its own arcs and is left with room on the other group edge 3 -> 6; the lighter
    # tier 6 -> 7 (-10,000) then routes a unit forward along 3 -> 6. The pre-pass used to write
    # the heavier tier's saved reverse residuals back over that unit, so the flow stopped being
    # a circulation and cost scaling returned a wrong flow (the planner withheld such plans).
    rows = [
        (0, 1, 1, 0), (0, 2, 3, 0), (1, 3, 1, 2), (1, 5, 1, 56), (2, 5, 1, 68),
        (3, 6, 2, -40_000), (4, 5, 2, -40_000), (5, 7, 1, -300_000), (6, 7, 1, -10_000),
        (7, 0, 1_000_000, 0),
    ]
    tails, heads, caps, costs = (np.array(col, np.int64) for col in zip(*rows, strict=True))
    lower = np.zeros(len(tails), np.int64)
    _assert_pre_pass_keeps_a_circulation(8, tails, heads, caps, costs, lower)
    result = min_cost_flow(8, tails, heads, caps, costs, lower=lower)
    # OR-Tools SimpleMinCostFlow on the same network.
    assert result.cost == ortools_cost(8, tails, heads, caps, costs, lower=lower)
    assert check_cost_certificate(
        8, tails, heads, caps, costs, result.flow, result.potentials, lower=lower
    ) == result.cost


def test_chained_tiers_with_pins_reach_the_reference_optimum() -> None:
    for seed in range(600):
        rng = np.random.default_rng(seed)
        n, tails, heads, caps, costs, lower = chained_tiers(
            rng, int(rng.integers(2, 6)), int(rng.integers(2, 6)), int(rng.integers(1, 5))
        )
        reference = ortools_cost(n, tails, heads, caps, costs, lower=lower)
        if reference is None:  # the pins do not fit the capacities
            continue
        _assert_pre_pass_keeps_a_circulation(n, tails, heads, caps, costs, lower)
        result = min_cost_flow(n, tails, heads, caps, costs, lower=lower)
        # OR-Tools SimpleMinCostFlow on the same network (lower bounds shifted out).
        assert result.cost == reference, seed
        assert check_cost_certificate(
            n, tails, heads, caps, costs, result.flow, result.potentials, lower=lower
        ) == result.cost
